package archive

import (
	"archive/tar"
	"bytes"
	"errors"
	"io"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"muarc/archive/bagit"
	"muarc/h5"
	"muarc/internal/batch"
	"muarc/recfile"
	"muarc/record"
)

var testDate = time.Date(2026, 5, 4, 0, 0, 0, 0, time.UTC)

func packTo(t *testing.T, src string, opt PackOptions) (string, *PackResult) {
	t.Helper()
	out := filepath.Join(t.TempDir(), "deposit")
	if opt.Licence == "" {
		opt.Licence = "CC-BY-4.0"
	}
	opt.Date = testDate
	res, err := Pack(src, out, opt)
	if err != nil {
		t.Fatalf("pack: %v (%+v)", err, res)
	}
	return out, res
}

// copyTree copies a folder (test helper for damaging copies).
func copyTree(t *testing.T, src string) string {
	t.Helper()
	dst := filepath.Join(t.TempDir(), filepath.Base(src))
	err := filepath.Walk(src, func(p string, info os.FileInfo, err error) error {
		if err != nil {
			return err
		}
		rel, _ := filepath.Rel(src, p)
		target := filepath.Join(dst, rel)
		if info.IsDir() {
			return os.MkdirAll(target, 0o755)
		}
		b, err := os.ReadFile(p)
		if err != nil {
			return err
		}
		return os.WriteFile(target, b, 0o644)
	})
	if err != nil {
		t.Fatal(err)
	}
	return dst
}

func TestIndexRowsAndFilters(t *testing.T) {
	src := filepath.Join(fixture(t), "clean")
	rows, err := Index(src, AnyLevel())
	if err != nil {
		t.Fatal(err)
	}
	// One row per recording, trial and array, checked against the files
	// read whole by recfile.ReadAll.
	want := 0
	for _, rel := range []string{"s1_a.h5", "visit2/s1_b.h5"} {
		rec, err := recfile.ReadAll(filepath.Join(src, filepath.FromSlash(rel)))
		if err != nil {
			t.Fatal(err)
		}
		for _, tr := range rec.Trials {
			for _, a := range tr.Arrays {
				want++
				var row *IndexRow
				for i := range rows {
					if rows[i].File == rel && rows[i].Trial == tr.Name && rows[i].Array == a.Name {
						row = &rows[i]
					}
				}
				if row == nil {
					t.Fatalf("no row for %s %s %s", rel, tr.Name, a.Name)
				}
				n, ch := a.Samples.Shape()
				if row.Channels != ch || math.Abs(row.DurationS-float64(n)/a.SamplingRateHz) > 1e-12 ||
					row.Muscle != a.Muscle || row.LevelPctMVC != tr.TargetPctMVC || row.Subject != rec.Subject.ID {
					t.Errorf("row %+v disagrees with the file", *row)
				}
				d := a.Decompositions[record.ReportedDecomposition(a.Decompositions)]
				var dis int64
				low := 0
				for _, u := range d.Units {
					dis += int64(len(u.Discharges))
					// Quality gates: silhouette < 0.90 or PNR < 30 dB
					// (common practice).
					if u.Silhouette < 0.90 || u.PNRdB < 30 {
						low++
					}
				}
				if row.Units != len(d.Units) || row.Discharges != dis || row.LowConfidenceUnits != low {
					t.Errorf("%s %s %s: units %d/%d discharges %d/%d low %d/%d", rel, tr.Name, a.Name,
						row.Units, len(d.Units), row.Discharges, dis, row.LowConfidenceUnits, low)
				}
			}
		}
	}
	if len(rows) != want {
		t.Fatalf("%d rows, want %d", len(rows), want)
	}
	muscle := rows[0].Muscle
	opt := AnyLevel()
	opt.Muscle = strings.ToUpper(muscle)
	got, _ := Index(src, opt)
	for _, r := range got {
		if r.Muscle != muscle {
			t.Fatalf("muscle filter kept %q", r.Muscle)
		}
	}
	if len(got) == 0 || len(got) == len(rows) {
		t.Fatalf("muscle filter kept %d of %d", len(got), len(rows))
	}
	opt = AnyLevel()
	opt.Level = rows[0].LevelPctMVC
	got, _ = Index(src, opt)
	if len(got) == 0 || len(got) == len(rows) {
		t.Fatalf("level filter kept %d of %d", len(got), len(rows))
	}
	opt = AnyLevel()
	opt.Subject = "nobody"
	if got, _ = Index(src, opt); len(got) != 0 {
		t.Fatalf("subject filter kept %d", len(got))
	}
	var b bytes.Buffer
	WriteIndexTSV(&b, rows)
	lines := strings.Split(strings.TrimSuffix(b.String(), "\n"), "\n")
	if len(lines) != len(rows)+1 || strings.Count(lines[1], "\t") != len(IndexColumns)-1 {
		t.Fatalf("TSV shape: %d lines, %q", len(lines), lines[1])
	}
}

func TestIndexReportsUnreadableFile(t *testing.T) {
	src := copyTree(t, filepath.Join(fixture(t), "clean"))
	os.WriteFile(filepath.Join(src, "broken.h5"), []byte("not HDF5"), 0o644)
	rows, err := Index(src, AnyLevel())
	if err == nil || !strings.Contains(err.Error(), "broken.h5") {
		t.Fatalf("error %v does not name the file", err)
	}
	if len(rows) == 0 {
		t.Fatal("good files dropped with the bad one")
	}
}

var manifestLine = regexp.MustCompile(`^[0-9a-f]{64}  data/[^\r\n]+$`)

func TestPackMakesRFC8493Bag(t *testing.T) {
	src := filepath.Join(fixture(t), "clean")
	out, res := packTo(t, src, PackOptions{Workers: 2})
	if res.Hashed != 2 || res.Reused != 0 || res.Identified {
		t.Fatalf("result %+v", res)
	}
	// RFC 8493 section 2.1.1: bagit.txt exact text.
	decl, _ := os.ReadFile(filepath.Join(out, "bagit.txt"))
	if string(decl) != "BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n" {
		t.Fatalf("bagit.txt %q", decl)
	}
	// RFC 8493 section 2.1.3: one line per payload file, "<hex>  data/<path>".
	man, _ := os.ReadFile(filepath.Join(out, "manifest-sha256.txt"))
	listed := map[string]bool{}
	for _, l := range strings.Split(strings.TrimSuffix(string(man), "\n"), "\n") {
		if !manifestLine.MatchString(l) {
			t.Errorf("manifest line %q", l)
		}
		listed[l[66:]] = true
	}
	var octets, files int64
	filepath.Walk(filepath.Join(out, "data"), func(p string, info os.FileInfo, err error) error {
		if err == nil && !info.IsDir() {
			rel, _ := filepath.Rel(out, p)
			if !listed[filepath.ToSlash(rel)] {
				t.Errorf("%s not in the manifest", rel)
			}
			octets += info.Size()
			files++
		}
		return nil
	})
	for _, want := range []string{"data/recordings/s1_a.h5", "data/recordings/visit2/s1_b.h5", "data/README.md",
		"data/layout.md", "data/LICENCE.txt", "data/data-dictionary.md", "data/data-dictionary.tsv", "data/tables/subjects.tsv", "data/tables/recordings.tsv"} {
		if !listed[want] {
			t.Errorf("%s missing from the deposit", want)
		}
	}
	if int64(len(listed)) != files {
		t.Errorf("manifest lists %d, payload has %d", len(listed), files)
	}
	// RFC 8493 section 2.2.2: Payload-Oxum "octets.streamcount"; reserved
	// labels Bagging-Date (YYYY-MM-DD), External-Description, Contact-*.
	info, _ := os.ReadFile(filepath.Join(out, "bag-info.txt"))
	fields, err := bagit.ParseInfo(bytes.NewReader(info), "bag-info.txt")
	if err != nil {
		t.Fatal(err)
	}
	if v, _ := bagit.Lookup(fields, "Payload-Oxum"); v != bagit.PayloadOxum(octets, files) {
		t.Errorf("Payload-Oxum %q, payload is %d.%d", v, octets, files)
	}
	if v, _ := bagit.Lookup(fields, "Bagging-Date"); v != "2026-05-04" {
		t.Errorf("Bagging-Date %q", v)
	}
	rec, err := recfile.ReadAll(filepath.Join(src, "s1_a.h5"))
	if err != nil {
		t.Fatal(err)
	}
	if v, _ := bagit.Lookup(fields, "External-Description"); rec.Study.Title == "" || !strings.HasPrefix(v, rec.Study.Title) {
		t.Errorf("External-Description %q, study title %q", v, rec.Study.Title)
	}
	if v, _ := bagit.Lookup(fields, "Contact-Email"); v == "" || !strings.Contains(rec.Study.Contact, v) {
		t.Errorf("Contact-Email %q, study contact %q", v, rec.Study.Contact)
	}
	if _, ok := bagit.Lookup(fields, identifyingLabel); ok {
		t.Error("clean bag marked as identified")
	}
	// The tag manifest lists the three tag files.
	tm, _ := os.ReadFile(filepath.Join(out, "tagmanifest-sha256.txt"))
	for _, n := range []string{"bagit.txt", "bag-info.txt", "manifest-sha256.txt"} {
		if !strings.Contains(string(tm), "  "+n+"\n") {
			t.Errorf("tag manifest lacks %s", n)
		}
	}
	// No staging folder or resume cache is left behind.
	if _, err := os.Stat(StagingPath(out)); !os.IsNotExist(err) {
		t.Error("staging folder left")
	}
	if _, err := os.Stat(filepath.Join(out, cacheFile)); !os.IsNotExist(err) {
		t.Error("resume cache left in the deposit")
	}
	readme, _ := os.ReadFile(filepath.Join(out, "data/README.md"))
	for _, want := range []string{"CC-BY-4.0", "## Citation", "does not certify"} {
		if !bytes.Contains(readme, []byte(want)) {
			t.Errorf("README lacks %q", want)
		}
	}
	rep, err := VerifyDeposit(out, VerifyOptions{})
	if err != nil || !rep.OK() {
		t.Fatalf("verify of a fresh deposit: %v %+v", err, rep)
	}
	if rep.Recordings != 2 || rep.Chunks == 0 {
		t.Fatalf("verify checked %d recordings, %d chunks", rep.Recordings, rep.Chunks)
	}

	// coreutils sha256sum -c, run in the bag's top folder, agrees with both
	// manifests (general-purpose reference tool).
	requireTool(t, "sha256sum")
	for _, m := range []string{"manifest-sha256.txt", "tagmanifest-sha256.txt"} {
		cmd := exec.Command("sha256sum", "--strict", "--quiet", "-c", m)
		cmd.Dir = out
		if b, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("sha256sum -c %s: %v\n%s", m, err, b)
		}
	}
}

func requireTool(t *testing.T, name string) {
	t.Helper()
	if _, err := exec.LookPath(name); err != nil {
		if os.Getenv("CI") != "" {
			t.Fatalf("%s missing under CI", name)
		}
		t.Skipf("%s not found", name)
	}
}

func TestVerifyFindsDamageByFile(t *testing.T) {
	src := filepath.Join(fixture(t), "clean")
	good, _ := packTo(t, src, PackOptions{})
	rec := "data/recordings/s1_a.h5"
	cases := []struct {
		name, kind, file string
		damage           func(dir string)
	}{
		{"byte flipped", bagit.KindMismatch, rec, func(d string) {
			p := filepath.Join(d, rec)
			at := sampleChunkByte(t, p)
			b, _ := os.ReadFile(p)
			b[at] ^= 0x20
			os.WriteFile(p, b, 0o644)
		}},
		{"file removed", bagit.KindMissing, "data/tables/subjects.tsv", func(d string) { os.Remove(filepath.Join(d, "data/tables/subjects.tsv")) }},
		{"file added", bagit.KindUnlisted, "data/recordings/extra.h5", func(d string) {
			b, _ := os.ReadFile(filepath.Join(d, rec))
			os.WriteFile(filepath.Join(d, "data/recordings/extra.h5"), b, 0o644)
		}},
		{"manifest line edited", bagit.KindMismatch, "data/README.md", func(d string) {
			p := filepath.Join(d, "manifest-sha256.txt")
			b, _ := os.ReadFile(p)
			lines := strings.Split(string(b), "\n")
			for i, l := range lines {
				if strings.HasSuffix(l, "  data/README.md") {
					lines[i] = strings.Repeat("0", 64) + l[64:]
				}
			}
			os.WriteFile(p, []byte(strings.Join(lines, "\n")), 0o644)
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := copyTree(t, good)
			c.damage(d)
			rep, err := VerifyDeposit(d, VerifyOptions{})
			if err != nil {
				t.Fatal(err)
			}
			found := false
			for _, f := range rep.Findings {
				if f.Kind == c.kind && f.File == c.file {
					found = true
				}
			}
			if !found || rep.OK() {
				t.Fatalf("want %s on %s; findings %v", c.kind, c.file, rep.Findings)
			}
			switch c.name {
			case "byte flipped":
				// Fletcher-32 locates the flip inside the recording.
				var chunk *Finding
				for i, f := range rep.Findings {
					if f.Kind == KindChunk && f.File == rec {
						chunk = &rep.Findings[i]
					}
				}
				if chunk == nil || chunk.Dataset == "" || chunk.Chunk == nil {
					t.Fatalf("no chunk finding: %v", rep.Findings)
				}
				t.Logf("located: %s", chunk)
			case "manifest line edited":
				// The tag manifest sees the edited manifest too.
				hit := false
				for _, f := range rep.Findings {
					hit = hit || f.Kind == bagit.KindMismatch && f.File == "manifest-sha256.txt"
				}
				if !hit {
					t.Fatalf("tag manifest did not catch the edit: %v", rep.Findings)
				}
			case "file added":
				hit := false
				for _, f := range rep.Findings {
					hit = hit || f.Kind == bagit.KindOxum
				}
				if !hit {
					t.Fatalf("Payload-Oxum did not catch the added file: %v", rep.Findings)
				}
			}
		})
	}
}

// The deposit's recordings read back with h5py (Debian python3-h5py), a
// general-purpose HDF5 reader: layout attribute, sample shapes, discharges.
func TestH5pyReadsDepositRecordings(t *testing.T) {
	py := "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import h5py").Run(); err != nil {
		if os.Getenv("CI") != "" {
			t.Fatalf("h5py (python3-h5py) missing under CI: %v", err)
		}
		t.Skip("h5py not available")
	}
	src := filepath.Join(fixture(t), "clean")
	out, _ := packTo(t, src, PackOptions{})
	script := `
import sys, h5py
for name in sys.argv[1:]:
    with h5py.File(name, "r") as f:
        assert f.attrs["layout"] in (b"muarc-recording", "muarc-recording"), f.attrs["layout"]
        arrays = units = 0
        for tr in f["trials"].values():
            for a in tr["arrays"].values():
                s = a["samples"]
                s[:]  # reads every chunk (Fletcher-32 checked by the HDF5 library)
                arrays += 1
                for d in a["decompositions"].values():
                    off = d["discharge_offsets"][:]
                    assert off[-1] == d["discharges"].shape[0]
                    units += len(off) - 1
        print(name.split("/recordings/")[1], arrays, units)
`
	var files []string
	filepath.Walk(filepath.Join(out, "data", "recordings"), func(p string, info os.FileInfo, err error) error {
		if err == nil && strings.HasSuffix(p, ".h5") {
			files = append(files, p)
		}
		return nil
	})
	b, err := exec.Command(py, append([]string{"-c", script}, files...)...).CombinedOutput()
	if err != nil {
		t.Fatalf("h5py: %v\n%s", err, b)
	}
	rows, _ := Index(filepath.Join(out, "data", "recordings"), AnyLevel())
	arrays := map[string]int{}
	units := map[string]int{}
	for _, r := range rows {
		arrays[r.File]++
	}
	for _, l := range strings.Split(strings.TrimSpace(string(b)), "\n") {
		var name string
		var a, u int
		if _, err := fmtSscan(l, &name, &a, &u); err != nil {
			t.Fatalf("h5py output %q", l)
		}
		if arrays[name] != a {
			t.Errorf("%s: h5py sees %d arrays, the index %d", name, a, arrays[name])
		}
		units[name] = u
	}
	if len(units) != 2 {
		t.Fatalf("h5py read %d files: %s", len(units), b)
	}
}

func TestPackRefusesIdentifiedUnlessAllowed(t *testing.T) {
	src := filepath.Join(fixture(t), "identified")
	out := filepath.Join(t.TempDir(), "deposit")
	res, err := Pack(src, out, PackOptions{Licence: "CC0-1.0"})
	if !errors.Is(err, ErrRefused) {
		t.Fatalf("identified recording packed: %v", err)
	}
	ref := res.Refused()
	if len(ref) != 1 || ref[0].Path != "subject1.h5" || !strings.Contains(ref[0].Message, "subject.name") {
		t.Fatalf("refusal %+v", ref)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Fatal("a deposit was written despite the refusal")
	}
	out2, res2 := packTo(t, src, PackOptions{AllowIdentified: true})
	if !res2.Identified {
		t.Fatal("not marked")
	}
	info, _ := os.ReadFile(filepath.Join(out2, "bag-info.txt"))
	if !regexp.MustCompile(`(?m)^Identifying-Data: PRESENT.*subject\.name`).Match(info) {
		t.Fatalf("bag-info lacks the mark:\n%s", info)
	}
}

func TestPackResumesAfterInterruption(t *testing.T) {
	src := copyTree(t, filepath.Join(fixture(t), "clean"))
	// A bad recording makes the first run stop before publishing, as an
	// interruption would; the good ones are in the staging folder.
	ident, _ := os.ReadFile(filepath.Join(fixture(t), "identified", "subject1.h5"))
	os.WriteFile(filepath.Join(src, "late.h5"), ident, 0o644)
	out := filepath.Join(t.TempDir(), "deposit")
	opt := PackOptions{Licence: "CC-BY-4.0", Date: testDate}
	res, err := Pack(src, out, opt)
	if !errors.Is(err, ErrRefused) || res.Hashed != 2 {
		t.Fatalf("first run: %v %+v", err, res)
	}
	if _, err := os.Stat(filepath.Join(StagingPath(out), cacheFile)); err != nil {
		t.Fatalf("no resume cache: %v", err)
	}
	// Fix: drop the bad file, touch nothing else; only nothing is hashed
	// again. Then change one file's time: only that one is hashed.
	os.Remove(filepath.Join(src, "late.h5"))
	// What a killed run leaves: a half-written copy, and a recording since
	// removed from the study.
	stage := filepath.Join(StagingPath(out), "data", "recordings")
	os.WriteFile(filepath.Join(stage, "s1_a.h5.copying"), []byte("half"), 0o644)
	os.MkdirAll(filepath.Join(stage, "gone"), 0o755)
	os.WriteFile(filepath.Join(stage, "gone", "old.h5"), []byte("old"), 0o644)
	res, err = Pack(src, out, opt)
	if err != nil || res.Hashed != 0 || res.Reused != 2 {
		t.Fatalf("second run: %v hashed %d reused %d", err, res.Hashed, res.Reused)
	}
	rep, _ := VerifyDeposit(out, VerifyOptions{})
	if !rep.OK() || rep.PayloadFiles != 9 {
		t.Fatalf("resumed deposit: %d files, %v", rep.PayloadFiles, rep.Findings)
	}
	if _, err := os.Stat(filepath.Join(out, "data", "recordings", "gone")); !os.IsNotExist(err) {
		t.Fatal("leftover folder kept")
	}
	// Interrupted again (staging folder left from a rerun with an extra file).
	os.WriteFile(filepath.Join(src, "late.h5"), ident, 0o644)
	out3 := filepath.Join(t.TempDir(), "deposit")
	Pack(src, out3, opt)
	os.Remove(filepath.Join(src, "late.h5"))
	later := time.Now().Add(time.Hour)
	os.Chtimes(filepath.Join(src, "s1_a.h5"), later, later)
	res, err = Pack(src, out3, opt)
	if err != nil || res.Hashed != 1 || res.Reused != 1 {
		t.Fatalf("changed-file run: %v hashed %d reused %d", err, res.Hashed, res.Reused)
	}
}

func TestPackTarStreamsBag(t *testing.T) {
	src := filepath.Join(fixture(t), "clean")
	out := filepath.Join(t.TempDir(), "study.tar")
	res, err := Pack(src, out, PackOptions{Tar: true, Licence: "CC-BY-4.0", Date: testDate})
	if err != nil {
		t.Fatal(err)
	}
	if res.Hashed != 2 {
		t.Fatalf("%+v", res)
	}
	f, _ := os.Open(out)
	defer f.Close()
	tr := tar.NewReader(f)
	names := map[string]bool{}
	for {
		h, err := tr.Next()
		if err == io.EOF {
			break
		}
		if err != nil {
			t.Fatal(err)
		}
		if h.Format != tar.FormatUSTAR && h.Format != tar.FormatPAX {
			t.Errorf("%s: tar format %v, want POSIX ustar or pax", h.Name, h.Format)
		}
		names[h.Name] = true
	}
	if !names["study/bagit.txt"] || !names["study/data/recordings/visit2/s1_b.h5"] {
		t.Fatalf("tar entries %v", names)
	}
	// GNU tar (a general-purpose reference tool) extracts it; the result
	// is a valid bag.
	requireTool(t, "tar")
	dir := t.TempDir()
	if b, err := exec.Command("tar", "-xf", out, "-C", dir).CombinedOutput(); err != nil {
		t.Fatalf("tar -xf: %v\n%s", err, b)
	}
	rep, err := VerifyDeposit(filepath.Join(dir, "study"), VerifyOptions{})
	if err != nil || !rep.OK() {
		t.Fatalf("extracted tar: %v %v", err, rep.Findings)
	}
	// VerifyTar reads the tar itself; a flipped byte in a recording is
	// found with the file named.
	if rep, err := VerifyTar(out, "", VerifyOptions{}); err != nil || !rep.OK() || rep.Recordings != 2 {
		t.Fatalf("VerifyTar: %v %+v", err, rep)
	}
	raw, _ := os.ReadFile(out)
	i := bytes.Index(raw, []byte("HDF"))
	raw[i+len(raw)/8] ^= 1
	bad := filepath.Join(t.TempDir(), "bad.tar")
	os.WriteFile(bad, raw, 0o644)
	rep, err = VerifyTar(bad, "", VerifyOptions{})
	if err != nil || rep.OK() || !strings.HasPrefix(rep.Findings[0].File, "data/recordings/") {
		t.Fatalf("damaged tar: %v %+v", err, rep)
	}
}

func tarOf(t *testing.T, entries ...*tar.Header) string {
	t.Helper()
	var b bytes.Buffer
	tw := tar.NewWriter(&b)
	for _, h := range entries {
		if h.Typeflag == tar.TypeReg {
			h.Size = 1
		}
		tw.WriteHeader(h)
		if h.Typeflag == tar.TypeReg {
			tw.Write([]byte("x"))
		}
	}
	tw.Close()
	p := filepath.Join(t.TempDir(), "t.tar")
	os.WriteFile(p, b.Bytes(), 0o644)
	return p
}

func TestVerifyTarRefusesUnsafeEntries(t *testing.T) {
	cases := map[string][]*tar.Header{
		"leaves":   {{Name: "bag/../../evil", Typeflag: tar.TypeReg, Mode: 0o644}},
		"absolute": {{Name: "/etc/evil", Typeflag: tar.TypeReg, Mode: 0o644}},
		"symlink":  {{Name: "bag/link", Typeflag: tar.TypeSymlink, Linkname: "/etc/passwd"}},
		"two tops": {{Name: "a/x", Typeflag: tar.TypeReg, Mode: 0o644}, {Name: "b/y", Typeflag: tar.TypeReg, Mode: 0o644}},
	}
	for name, hs := range cases {
		if _, err := VerifyTar(tarOf(t, hs...), t.TempDir(), VerifyOptions{}); err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
	if _, err := VerifyTar(tarOf(t), "", VerifyOptions{}); err == nil {
		t.Error("empty tar accepted")
	}
}

func FuzzUntar(f *testing.F) {
	var b bytes.Buffer
	tw := tar.NewWriter(&b)
	tw.WriteHeader(&tar.Header{Name: "bag/bagit.txt", Typeflag: tar.TypeReg, Size: 3, Mode: 0o644})
	tw.Write([]byte("abc"))
	tw.Close()
	f.Add(b.Bytes())
	f.Add([]byte("not a tar"))
	f.Fuzz(func(t *testing.T, data []byte) {
		dir := t.TempDir()
		top, err := untar(bytes.NewReader(data), dir)
		if err != nil {
			return
		}
		// Whatever was unpacked stays inside dir, under one top folder.
		entries, _ := os.ReadDir(dir)
		if len(entries) != 1 || entries[0].Name() != top {
			t.Fatalf("top %q, entries %v", top, entries)
		}
	})
}

func TestShardsMergeAndFeedPack(t *testing.T) {
	src := filepath.Join(fixture(t), "clean")
	tmp := t.TempDir()
	var reports []*ShardReport
	var names []string
	for i := 1; i <= 2; i++ {
		p := filepath.Join(tmp, "r"+string(rune('0'+i))+".json")
		res, err := Pack(src, p, PackOptions{Shard: batch.Shard{I: i, N: 2}})
		if err != nil || res.Hashed != 1 {
			t.Fatalf("shard %d: %v %+v", i, err, res)
		}
		r, err := ReadShardReport(p)
		if err != nil {
			t.Fatal(err)
		}
		reports = append(reports, r)
		names = append(names, p)
	}
	m := MergeReports(reports, names)
	if len(m.Missing) != 0 || len(m.Problems) != 0 || m.Report.Summary.OK != 2 {
		t.Fatalf("merge: %+v", m)
	}
	// The merged manifest checks with sha256sum -c in the study folder.
	requireTool(t, "sha256sum")
	os.WriteFile(filepath.Join(tmp, "m.txt"), m.Report.Manifest(), 0o644)
	cmd := exec.Command("sha256sum", "--strict", "-c", filepath.Join(tmp, "m.txt"))
	cmd.Dir = src
	if b, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("sha256sum -c: %v\n%s", err, b)
	}
	// One shard alone is incomplete; a shard twice is a problem.
	if m := MergeReports(reports[:1], names[:1]); len(m.Missing) != 1 || m.Missing[0] != "2/2" {
		t.Fatalf("missing shard not found: %+v", m.Missing)
	}
	if m := MergeReports([]*ShardReport{reports[0], reports[0]}, []string{"a", "b"}); len(m.Problems) == 0 {
		t.Fatal("shard given twice not found")
	}
	// The final pack takes the hashes and checks: nothing hashed again.
	out, res := packTo(t, src, PackOptions{Known: []*ShardReport{m.Report}})
	if res.Hashed != 0 || res.Reused != 2 {
		t.Fatalf("pack with known hashes: %+v", res)
	}
	if rep, _ := VerifyDeposit(out, VerifyOptions{}); !rep.OK() {
		t.Fatalf("%v", rep.Findings)
	}
}

// Every property of the JSON Schema appears in the data dictionary; the
// schema's fields are listed by Python's json module (a second reader).
func TestDataDictionaryCoversSchema(t *testing.T) {
	d, err := DataDictionary()
	if err != nil {
		t.Fatal(err)
	}
	have := map[string]DictEntry{}
	for _, e := range d {
		have[e.Field] = e
		if e.Meaning == "" && !strings.HasSuffix(e.Field, ".*") && e.Type != "array of object" {
			t.Errorf("%s has no meaning", e.Field)
		}
	}
	for f, unit := range map[string]string{"trials[].arrays[].sampling_rate_hz": "Hz", "subject.height_cm": "cm",
		"trials[].target_pct_mvc": "%", "trials[].arrays[].decompositions[].units[].pnr_db": "dB"} {
		if have[f].Unit != unit {
			t.Errorf("%s unit %q, want %q (UCUM)", f, have[f].Unit, unit)
		}
	}
	// Where the layout (schema/LAYOUT.md) stores them.
	for f, where := range map[string]string{
		"subject.height_cm":                 "/subject @height_cm",
		"trials":                            "/trials/ (one group each)",
		"trials[].arrays[].channels[].x_mm": "/trials/<trial>/arrays/<array>/channels/x_mm (column)",
		"trials[].arrays[].decompositions[].units[].pnr_db": "/trials/<trial>/arrays/<array>/decompositions/<decomposition>/units/pnr_db (column)",
		"trials[].arrays[].channel_count":                   "columns of /trials/<trial>/arrays/<array>/samples",
		"provenance.history[].details":                      "/provenance/history/details (column, JSON text)",
	} {
		if have[f].HDF5 != where {
			t.Errorf("%s stored at %q, want %q", f, have[f].HDF5, where)
		}
	}
	py := "/usr/bin/python3"
	if _, err := os.Stat(py); err != nil {
		t.Skip("no /usr/bin/python3")
	}
	script := `
import json, sys
s = json.load(sys.stdin)
defs = s.get("definitions", {})
def res(x):
    while "$ref" in x:
        x = dict(defs[x["$ref"].split("/")[-1]], **{k: v for k, v in x.items() if k != "$ref"})
    return x
def walk(prefix, x):
    for k, v in x.get("properties", {}).items():
        v = res(v)
        name = prefix + k
        print(name)
        if v.get("type") == "object":
            walk(name + ".", v)
        elif v.get("type") == "array" and res(v.get("items", {})).get("type") == "object":
            walk(name + "[].", res(v["items"]))
walk("", s)
`
	cmd := exec.Command(py, "-c", script)
	cmd.Stdin = strings.NewReader(schemaText())
	b, err := cmd.CombinedOutput()
	if err != nil {
		t.Fatalf("%v\n%s", err, b)
	}
	n := 0
	for _, f := range strings.Fields(string(b)) {
		n++
		if _, ok := have[f]; !ok {
			t.Errorf("schema field %s missing from the dictionary", f)
		}
	}
	if n < 50 {
		t.Fatalf("only %d schema fields seen", n)
	}
}

func TestContactFields(t *testing.T) {
	cases := []struct{ in, name, email string }{
		{"Data desk (fictional) <desk@example.org>", "Data desk (fictional)", "desk@example.org"},
		{"desk@example.org", "", "desk@example.org"},
		{"Study office, room 4", "Study office, room 4", ""},
		{"", "", ""},
	}
	for _, c := range cases {
		var name, email string
		for _, f := range contactFields(c.in) {
			switch f.Label {
			case "Contact-Name":
				name = f.Value
			case "Contact-Email":
				email = f.Value
			}
		}
		if name != c.name || email != c.email {
			t.Errorf("%q -> %q %q, want %q %q", c.in, name, email, c.name, c.email)
		}
	}
}

// The dictionary's HDF5 locations of table columns and datasets exist in a
// recording, as h5py (Debian python3-h5py) sees it.
func TestDictionaryLocationsExistForH5py(t *testing.T) {
	py := "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import h5py").Run(); err != nil {
		if os.Getenv("CI") != "" {
			t.Fatalf("h5py (python3-h5py) missing under CI: %v", err)
		}
		t.Skip("h5py not available")
	}
	d, err := DataDictionary()
	if err != nil {
		t.Fatal(err)
	}
	file := filepath.Join(fixture(t), "identified", "subject1.h5")
	rec, err := recfile.ReadAll(file)
	if err != nil {
		t.Fatal(err)
	}
	tr := rec.Trials[0]
	a := tr.Arrays[0]
	sub := strings.NewReplacer("<trial>", tr.Name, "<array>", a.Name, "<decomposition>", a.Decompositions[0].Name)
	var paths []string
	for _, e := range d {
		loc := e.HDF5
		switch {
		case strings.HasSuffix(loc, " (column)") && !strings.HasPrefix(loc, "/provenance/sources"):
			paths = append(paths, sub.Replace(strings.TrimSuffix(loc, " (column)")))
		case strings.HasSuffix(loc, " (dataset)") && !strings.Contains(loc, "force_target"):
			paths = append(paths, sub.Replace(strings.TrimSuffix(loc, " (dataset)")))
		}
	}
	if len(paths) < 20 {
		t.Fatalf("only %d locations", len(paths))
	}
	script := `
import sys, h5py
f = h5py.File(sys.argv[1], "r")
for p in sys.argv[2:]:
    if p not in f or not isinstance(f[p], h5py.Dataset):
        print("absent", p)
`
	b, err := exec.Command(py, append([]string{"-c", script, file}, paths...)...).CombinedOutput()
	if err != nil || len(b) > 0 {
		t.Fatalf("h5py: %v\n%s", err, b)
	}
}

// RFC 8493 section 2.1.3: a "%" in a payload path is written %25 in the
// manifest; the deposit still verifies.
func TestPackPercentInFileName(t *testing.T) {
	src := t.TempDir()
	b, err := os.ReadFile(filepath.Join(fixture(t), "clean", "s1_a.h5"))
	if err != nil {
		t.Fatal(err)
	}
	os.WriteFile(filepath.Join(src, "s1 100%.h5"), b, 0o644)
	out, _ := packTo(t, src, PackOptions{})
	man, _ := os.ReadFile(filepath.Join(out, "manifest-sha256.txt"))
	if !strings.Contains(string(man), "  data/recordings/s1 100%25.h5\n") {
		t.Fatalf("manifest:\n%s", man)
	}
	if rep, err := VerifyDeposit(out, VerifyOptions{}); err != nil || !rep.OK() {
		t.Fatalf("%v %v", err, rep.Findings)
	}
}

// With SHA512 the bag has both payload manifests and both tag manifests;
// coreutils sha512sum -c reads the SHA-512 ones (RFC 8493 section 2.4 asks
// tools to support SHA-256 and SHA-512, from memory).
func TestPackSHA512Manifests(t *testing.T) {
	src := filepath.Join(fixture(t), "clean")
	out, _ := packTo(t, src, PackOptions{SHA512: true})
	rep, err := VerifyDeposit(out, VerifyOptions{})
	if err != nil || !rep.OK() || len(rep.Manifests) != 4 {
		t.Fatalf("%v %+v", err, rep)
	}
	tm, _ := os.ReadFile(filepath.Join(out, "tagmanifest-sha256.txt"))
	if !strings.Contains(string(tm), "  manifest-sha512.txt\n") {
		t.Fatalf("tag manifest lacks the SHA-512 manifest:\n%s", tm)
	}
	requireTool(t, "sha512sum")
	for _, m := range []string{"manifest-sha512.txt", "tagmanifest-sha512.txt"} {
		cmd := exec.Command("sha512sum", "--strict", "--quiet", "-c", m)
		cmd.Dir = out
		if b, err := cmd.CombinedOutput(); err != nil {
			t.Fatalf("sha512sum -c %s: %v\n%s", m, err, b)
		}
	}
	// Tar mode writes the same set.
	tarOut := filepath.Join(t.TempDir(), "b.tar")
	if _, err := Pack(src, tarOut, PackOptions{Tar: true, SHA512: true, Licence: "CC0-1.0"}); err != nil {
		t.Fatal(err)
	}
	if rep, err := VerifyTar(tarOut, "", VerifyOptions{}); err != nil || !rep.OK() || len(rep.Manifests) != 4 {
		t.Fatalf("tar: %v %+v", err, rep)
	}
}

// sampleChunkByte returns the file offset of a byte in the middle of a
// stored chunk of the first samples dataset (where a flip is bit rot in
// the data, which Fletcher-32 must locate, whatever the layout puts
// around it).
func sampleChunkByte(t *testing.T, path string) int64 {
	t.Helper()
	objs, err := h5.Describe(path)
	if err != nil {
		t.Fatal(err)
	}
	hf, err := h5.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer hf.Close()
	root, err := hf.Root()
	if err != nil {
		t.Fatal(err)
	}
	defer root.Close()
	for _, o := range objs {
		if !o.IsDataset || !strings.HasSuffix(o.Path, "/samples") {
			continue
		}
		ds, err := root.OpenDataset(strings.TrimPrefix(o.Path, "/"), 0)
		if err != nil {
			t.Fatal(err)
		}
		chunks, err := ds.Chunks()
		ds.Close()
		if err != nil || len(chunks) == 0 {
			t.Fatalf("%s: chunks %v", o.Path, err)
		}
		c := chunks[len(chunks)/2]
		return c.Addr + int64(c.Bytes/2)
	}
	t.Fatal("no samples dataset")
	return 0
}
