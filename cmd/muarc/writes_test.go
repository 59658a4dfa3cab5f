package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"sync"
	"testing"
	"time"

	"muarc/deid"
	"muarc/internal/reftest"
	"muarc/recfile"
	"muarc/synth"
)

// writesFixture is what the writing commands' tests work on: the
// generator's small study (two subjects) as plain-text exports, as muarc
// files, de-identified, and a study key. Its values are properties of our
// model; the tests here check files, names and exit codes.
type writesFixture struct {
	Exports    string   // study folder of plain-text exports
	Recordings string   // folder of muarc files (identifying)
	Clean      string   // folder of de-identified muarc files
	Key        string   // study key file
	Single     []string // import arguments for one recording (--meta, --force, --emg)
}

var (
	writesOnce sync.Once
	writesFx   *writesFixture
	writesErr  error
)

func writesFixtureFor(t *testing.T) *writesFixture {
	t.Helper()
	writesOnce.Do(func() { writesFx, writesErr = makeWritesFixture() })
	if writesErr != nil {
		t.Fatal(writesErr)
	}
	return writesFx
}

func makeWritesFixture() (*writesFixture, error) {
	dir, err := os.MkdirTemp(filepath.Dir(muarcBin), "writes-") // removed with the built command
	if err != nil {
		return nil, err
	}
	cfg := synth.TestConfig()
	cfg.Subjects = 2
	gens, err := synth.Generate(cfg)
	if err != nil {
		return nil, err
	}
	fx := &writesFixture{Exports: filepath.Join(dir, "exports"), Recordings: filepath.Join(dir, "recordings"),
		Clean: filepath.Join(dir, "clean"), Key: filepath.Join(dir, "study.key")}
	for _, g := range gens {
		if err := g.WriteExports(fx.Exports); err != nil {
			return nil, err
		}
		p := filepath.Join(fx.Recordings, g.Recording.Subject.ID+".h5")
		if err := os.MkdirAll(fx.Recordings, 0o755); err != nil {
			return nil, err
		}
		if err := recfile.Write(p, g.Recording, recfile.WriteOptions{}); err != nil {
			return nil, err
		}
	}
	if _, err := deid.NewKeyFile(fx.Key); err != nil {
		return nil, err
	}
	key, err := deid.LoadKey(fx.Key)
	if err != nil {
		return nil, err
	}
	if _, err := deid.DeidentifyStudy(fx.Recordings, fx.Clean, deid.StudyOptions{Key: key}); err != nil {
		return nil, err
	}
	// One recording's files for the single form of import.
	first := filepath.Join(fx.Exports, gens[0].Recording.Subject.ID)
	fx.Single = []string{"--meta", filepath.Join(first, "metadata.json")}
	trials, _ := filepath.Glob(filepath.Join(first, "*", "force.csv"))
	sort.Strings(trials)
	for _, f := range trials {
		fx.Single = append(fx.Single, "--force", f)
		emg, _ := filepath.Glob(filepath.Join(filepath.Dir(f), "emg_*.csv"))
		sort.Strings(emg)
		for _, e := range emg {
			fx.Single = append(fx.Single, "--emg", e)
		}
	}
	return fx, nil
}

// writingCommand is one command that writes, with its output inside dir.
type writingCommand struct {
	name string
	// args gives the command line writing under dir; in is a private copy
	// of the fixture where the command needs one (stats --write edits in
	// place).
	args func(fx *writesFixture, dir string) []string
	// output is the final name the command publishes (a file or folder).
	output func(dir string) string
	// inPlace: the command replaces its input (stats --write).
	inPlace bool
}

func writingCommands() []writingCommand {
	return []writingCommand{
		{name: "import study", args: func(fx *writesFixture, dir string) []string {
			return []string{"import", fx.Exports, "-o", filepath.Join(dir, "imported")}
		}, output: func(dir string) string { return filepath.Join(dir, "imported") }},
		{name: "import one", args: func(fx *writesFixture, dir string) []string {
			return append(append([]string{"import"}, fx.Single...), "-o", filepath.Join(dir, "one.h5"))
		}, output: func(dir string) string { return filepath.Join(dir, "one.h5") }},
		{name: "deidentify", args: func(fx *writesFixture, dir string) []string {
			return []string{"deidentify", fx.Recordings, "-o", filepath.Join(dir, "shared"), "--key", fx.Key}
		}, output: func(dir string) string { return filepath.Join(dir, "shared") }},
		{name: "stats --write", inPlace: true, args: func(fx *writesFixture, dir string) []string {
			return []string{"stats", "--write", filepath.Join(dir, "rec.h5")}
		}, output: func(dir string) string { return filepath.Join(dir, "rec.h5") }},
		{name: "pack", args: func(fx *writesFixture, dir string) []string {
			return []string{"pack", fx.Clean, "-o", filepath.Join(dir, "deposit"), "--licence", "CC-BY-4.0"}
		}, output: func(dir string) string { return filepath.Join(dir, "deposit") }},
		{name: "pack --tar", args: func(fx *writesFixture, dir string) []string {
			return []string{"pack", "--tar", fx.Clean, "-o", filepath.Join(dir, "deposit.tar"), "--licence", "CC-BY-4.0"}
		}, output: func(dir string) string { return filepath.Join(dir, "deposit.tar") }},
		{name: "export", args: func(fx *writesFixture, dir string) []string {
			return []string{"export", filepath.Join(fx.Recordings, firstH5(fx.Recordings)), "-o", filepath.Join(dir, "text")}
		}, output: func(dir string) string { return filepath.Join(dir, "text") }},
		{name: "key new", args: func(fx *writesFixture, dir string) []string {
			return []string{"key", "new", filepath.Join(dir, "new.key")}
		}, output: func(dir string) string { return filepath.Join(dir, "new.key") }},
	}
}

func firstH5(dir string) string {
	ents, _ := os.ReadDir(dir)
	for _, e := range ents {
		if strings.HasSuffix(e.Name(), ".h5") {
			return e.Name()
		}
	}
	return ""
}

// copyFile copies a file for a test that changes it.
func copyFileForTest(t *testing.T, from, to string) {
	t.Helper()
	b, err := os.ReadFile(from)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(to, b, 0o644); err != nil {
		t.Fatal(err)
	}
}

// tempsUnder lists the temporary files of atomicfile under dir.
func tempsUnder(dir string) []string {
	var out []string
	filepath.Walk(dir, func(p string, fi os.FileInfo, err error) error {
		if err == nil && !fi.IsDir() && strings.Contains(fi.Name(), ".tmp-") {
			out = append(out, p)
		}
		return nil
	})
	return out
}

// TestFullDiskEveryWritingCommand runs each writing command with its
// output on a real, nearly full file system (a tmpfs): each says "no space
// left on device: PATH" for its output, exits 2, prints no HDF5 error chain
// or crash, and leaves neither a partial output under the final name nor a
// temporary file.
func TestFullDiskEveryWritingCommand(t *testing.T) {
	fx := writesFixtureFor(t)
	for _, c := range writingCommands() {
		t.Run(c.name, func(t *testing.T) {
			size := int64(256 << 10)
			if c.inPlace {
				// Room for the input and a little more, not for a second copy.
				fi, _ := os.Stat(filepath.Join(fx.Recordings, firstH5(fx.Recordings)))
				size = fi.Size() + fi.Size()/2
			}
			if c.name == "key new" {
				size = 4096
			}
			dir := smallFS(t, size)
			if c.inPlace {
				copyFileForTest(t, filepath.Join(fx.Recordings, firstH5(fx.Recordings)), filepath.Join(dir, "rec.h5"))
			}
			if c.name == "key new" {
				fill(t, dir)
			}
			before := snapshot(t, dir)
			_, stderr, code := runMuarc(t, ".", c.args(fx, dir)...)
			if code != 2 {
				t.Fatalf("exit %d, want 2; stderr:\n%s", code, stderr)
			}
			want := "muarc: no space left on device: " + c.output(dir)
			if !strings.Contains(stderr, want) {
				t.Fatalf("stderr lacks %q:\n%s", want, stderr)
			}
			for _, bad := range []string{"bytes actually written", "HDF5-DIAG", "goroutine ", "recordings refused"} {
				if strings.Contains(stderr, bad) {
					t.Fatalf("stderr shows %q:\n%s", bad, stderr)
				}
			}
			if tmp := tempsUnder(dir); len(tmp) > 0 {
				t.Fatalf("temporary files left: %v", tmp)
			}
			// Files published before the disk filled must be whole: the
			// same bytes as a run with room gives (export writes several
			// files, each atomically).
			var whole map[string]string
			if c.name == "export" {
				ref := t.TempDir()
				if _, stderr, code := runMuarc(t, ".", c.args(fx, ref)...); code != 0 {
					t.Fatalf("export with room: %s", stderr)
				}
				whole = map[string]string{}
				for p, sum := range snapshot(t, ref) {
					rel, _ := filepath.Rel(ref, p)
					whole[filepath.Join(dir, rel)] = sum
				}
			}
			for p, sum := range snapshot(t, dir) {
				if strings.Contains(p, ".partial") {
					continue // pack's staging folder, kept to resume
				}
				if before[p] != sum && whole[p] != sum {
					t.Errorf("%s written or changed", p)
				}
			}
		})
	}
}

// fill takes every free block of the file system holding dir.
func fill(t *testing.T, dir string) {
	f, err := os.Create(filepath.Join(dir, "filler"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	buf := make([]byte, 4096)
	for {
		if _, err := f.Write(buf); err != nil {
			return
		}
	}
}

func smallFS(t *testing.T, size int64) string { return reftest.SmallFS(t, size) }

// snapshot maps every regular file under dir to its SHA-256.
func snapshot(t *testing.T, dir string) map[string]string {
	t.Helper()
	out := map[string]string{}
	filepath.Walk(dir, func(p string, fi os.FileInfo, err error) error {
		if err == nil && fi.Mode().IsRegular() && fi.Name() != "filler" {
			b, err := os.ReadFile(p)
			if err != nil {
				t.Fatal(err)
			}
			s := sha256.Sum256(b)
			out[p] = hex.EncodeToString(s[:])
		}
		return nil
	})
	return out
}

// startMuarc starts the built command without waiting for it.
func startMuarc(t *testing.T, args ...string) (*exec.Cmd, *bytes.Buffer) {
	t.Helper()
	cmd := exec.Command(muarcBin, args...)
	var errb bytes.Buffer
	cmd.Stderr = &errb
	if err := cmd.Start(); err != nil {
		t.Fatal(err)
	}
	return cmd, &errb
}

// killAt starts the command and kills it (SIGKILL) at the moment asked:
// when its first temporary file appears under dir ("temp"), or after a
// delay. It returns whether the process was still running when killed.
func killAt(t *testing.T, args []string, dir string, delay time.Duration, onTemp bool) bool {
	t.Helper()
	cmd, _ := startMuarc(t, args...)
	done := make(chan struct{})
	go func() { cmd.Wait(); close(done) }()
	deadline := time.After(60 * time.Second)
	wait := time.After(delay)
	for {
		select {
		case <-done:
			return false
		case <-deadline:
			cmd.Process.Kill()
			<-done
			t.Fatal("the command ran over a minute")
		default:
		}
		fire := false
		if onTemp {
			fire = len(tempsUnder(dir)) > 0
		} else {
			select {
			case <-wait:
				fire = true
			default:
			}
		}
		if fire {
			cmd.Process.Kill()
			<-done
			return true
		}
		time.Sleep(500 * time.Microsecond)
	}
}

// wholeOutput checks that what stands under the command's final name is
// complete: recordings read back whole, deposits verify, exported text has
// the bytes of an uninterrupted run, a key file is a key.
func wholeOutput(t *testing.T, c writingCommand, dir string, ref map[string]string, original string) {
	t.Helper()
	out := c.output(dir)
	if _, err := os.Stat(out); err != nil {
		return // nothing published: fine
	}
	switch c.name {
	case "pack", "pack --tar":
		if _, stderr, code := runMuarc(t, ".", "verify", out); code != 0 {
			t.Fatalf("%s under its final name does not verify: %s", out, stderr)
		}
		return
	case "key new":
		if _, err := deid.LoadKey(out); err != nil {
			t.Fatalf("key file under its final name: %v", err)
		}
		return
	}
	for p, sum := range snapshot(t, out) {
		if strings.Contains(filepath.Base(p), ".tmp-") {
			continue
		}
		switch {
		case c.name == "export":
			rel, _ := filepath.Rel(dir, p)
			if ref[rel] != sum {
				t.Fatalf("%s differs from an uninterrupted export", p)
			}
		case c.inPlace && sum == original:
			// the input as it was
		default:
			if _, err := recfile.ReadAll(p); err != nil {
				t.Fatalf("%s under its final name is not whole: %v", p, err)
			}
		}
	}
}

// TestKillWritingCommands kills each writing command with SIGKILL at
// several moments (when its first temporary file appears, and half way
// through a run) and checks what is left: nothing partial under a final
// name, temporary files private (0600), and a rerun of the same command
// (with --overwrite where finished outputs now exist) that succeeds,
// removes every temporary file the killed run left and says so.
func TestKillWritingCommands(t *testing.T) {
	fx := writesFixtureFor(t)
	for _, c := range writingCommands() {
		if c.name == "key new" {
			continue // a few bytes; its temp lives microseconds (see the full-disk test)
		}
		t.Run(c.name, func(t *testing.T) {
			prepare := func(dir string) string {
				if !c.inPlace {
					return ""
				}
				copyFileForTest(t, filepath.Join(fx.Recordings, firstH5(fx.Recordings)), filepath.Join(dir, "rec.h5"))
				return snapshot(t, dir)[filepath.Join(dir, "rec.h5")]
			}
			// An uninterrupted run: its time sets the kill delays, its
			// files are the reference for export.
			refDir := t.TempDir()
			prepare(refDir)
			start := time.Now()
			cmd, stderr := startMuarc(t, c.args(fx, refDir)...)
			done := make(chan error, 1)
			go func() { done <- cmd.Wait() }()
			var firstTemp time.Duration
			var err error
		poll:
			for {
				select {
				case err = <-done:
					break poll
				default:
				}
				if firstTemp == 0 && len(tempsUnder(refDir)) > 0 {
					firstTemp = time.Since(start)
				}
				time.Sleep(500 * time.Microsecond)
			}
			full := time.Since(start)
			if err != nil {
				t.Fatalf("uninterrupted run: %v: %s", err, stderr)
			}
			if firstTemp == 0 {
				firstTemp = full / 2
			}
			ref := map[string]string{}
			for p, sum := range snapshot(t, refDir) {
				rel, _ := filepath.Rel(refDir, p)
				ref[rel] = sum
			}
			moments := []struct {
				name   string
				delay  time.Duration
				onTemp bool
			}{{"first temp", 0, true}, {"half way through writing", firstTemp + (full-firstTemp)/2, false}}
			for _, m := range moments {
				dir := t.TempDir()
				original := prepare(dir)
				args := c.args(fx, dir)
				killed := killAt(t, args, dir, m.delay, m.onTemp)
				left := tempsUnder(dir)
				t.Logf("%s: killed %v at %s (uninterrupted: first temporary file at %v, end at %v); %d temporary files left",
					c.name, killed, m.name, firstTemp.Round(time.Millisecond), full.Round(time.Millisecond), len(left))
				for _, p := range left {
					if fi, err := os.Stat(p); err == nil && fi.Mode().Perm() != 0o600 {
						t.Errorf("%s: mode %v, want 0600", p, fi.Mode().Perm())
					}
				}
				wholeOutput(t, c, dir, ref, original)

				if _, err := os.Stat(c.output(dir)); err == nil && !c.inPlace {
					args = append(args, "--overwrite") // finished outputs are kept otherwise
				}
				_, stderr, code := runMuarc(t, ".", args...)
				if code != 0 {
					t.Fatalf("%s: rerun exit %d: %s", m.name, code, stderr)
				}
				for _, p := range left {
					if !strings.Contains(stderr, "removed "+p) {
						t.Errorf("%s: the rerun did not say it removed %s:\n%s", m.name, p, stderr)
					}
				}
				if rest := tempsUnder(dir); len(rest) > 0 {
					t.Errorf("%s: temporary files after the rerun: %v", m.name, rest)
				}
				if _, err := os.Stat(c.output(dir)); err != nil {
					t.Fatalf("%s: no output after the rerun: %v", m.name, err)
				}
				wholeOutput(t, c, dir, ref, "")
			}
		})
	}
}

// TestPackResumeAfterKillFindsFlippedByte kills pack once a recording is
// staged and recorded in the resume cache, flips one byte of that staged
// copy (size and time kept), and reruns: the rerun must find the damage by
// re-hashing, copy the recording again and give a deposit that verifies,
// whose copy is byte for byte the source.
func TestPackResumeAfterKillFindsFlippedByte(t *testing.T) {
	fx := writesFixtureFor(t)
	src := filepath.Join(t.TempDir(), "study")
	os.MkdirAll(src, 0o755)
	ents, _ := os.ReadDir(fx.Clean)
	for i := 0; i < 2; i++ { // more files, so the kill lands between two
		for _, e := range ents {
			copyFileForTest(t, filepath.Join(fx.Clean, e.Name()), filepath.Join(src, fmt.Sprintf("c%d_%s", i, e.Name())))
		}
	}
	dir := t.TempDir()
	out := filepath.Join(dir, "deposit")
	args := []string{"pack", src, "-o", out, "--licence", "CC-BY-4.0", "--workers", "1"}
	cache := filepath.Join(dir, ".deposit.partial", ".pack-cache.jsonl")
	var staged string
	for try := 0; try < 5 && staged == ""; try++ {
		os.RemoveAll(filepath.Join(dir, ".deposit.partial"))
		cmd, _ := startMuarc(t, args...)
		done := make(chan struct{})
		go func() { cmd.Wait(); close(done) }()
	poll:
		for {
			select {
			case <-done:
				break poll
			default:
			}
			if b, err := os.ReadFile(cache); err == nil {
				if rel := firstCopied(b); rel != "" {
					cmd.Process.Kill()
					<-done
					staged = filepath.Join(dir, ".deposit.partial", "data", "recordings", rel)
					break poll
				}
			}
			time.Sleep(200 * time.Microsecond)
		}
		if _, err := os.Stat(out); err == nil {
			os.RemoveAll(out) // finished before the kill: try again
		}
	}
	if staged == "" {
		t.Fatal("pack never stopped with a recording staged")
	}
	t.Logf("killed after %s was staged", filepath.Base(staged))
	st, err := os.Stat(staged)
	if err != nil {
		t.Fatal(err)
	}
	b, _ := os.ReadFile(staged)
	b[len(b)/3] ^= 0x10
	os.WriteFile(staged, b, 0o644)
	os.Chtimes(staged, st.ModTime(), st.ModTime())

	stdout, stderr, code := runMuarc(t, ".", args...)
	if code != 0 {
		t.Fatalf("rerun: exit %d: %s", code, stderr)
	}
	rel := filepath.Base(staged)
	if !strings.Contains(stdout, rel+": the staged copy") {
		t.Errorf("the rerun does not name the damaged staged copy:\n%s", stdout)
	}
	if _, stderr, code := runMuarc(t, ".", "verify", out); code != 0 {
		t.Fatalf("verify: %s", stderr)
	}
	got, _ := os.ReadFile(filepath.Join(out, "data", "recordings", rel))
	want, _ := os.ReadFile(filepath.Join(src, rel))
	if !bytes.Equal(got, want) {
		t.Fatal("the deposit holds the damaged copy")
	}
}

// firstCopied returns the path of the first recording the resume cache
// records as copied and hashed.
func firstCopied(cache []byte) string {
	for _, line := range bytes.Split(cache, []byte("\n")) {
		var rec struct {
			Path, Status, SHA256 string
		}
		if json.Unmarshal(line, &rec) == nil && rec.Status == "ok" && rec.SHA256 != "" {
			return rec.Path
		}
	}
	return ""
}
