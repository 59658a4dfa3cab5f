// Package examples_test runs the job-array scripts of this folder under a
// real single-node Slurm cluster (Debian slurm-wlm with munge) that the
// test starts in a temporary folder and stops afterwards.
package examples_test

import (
	"bytes"
	"encoding/json"
	"fmt"
	"net"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"muarc/internal/reftest"
	"muarc/synth"
)

// sbinTool finds a daemon (Debian installs them in /usr/sbin, which is not
// on every PATH).
func sbinTool(t *testing.T, name, pkg string) string {
	t.Helper()
	if p, err := exec.LookPath(name); err == nil {
		return p
	}
	if p := "/usr/sbin/" + name; fileExists(p) {
		return p
	}
	return reftest.NeedTool(t, name, pkg)
}

func fileExists(p string) bool { _, err := os.Stat(p); return err == nil }

func freePort(t *testing.T) int {
	t.Helper()
	l, err := net.Listen("tcp", "127.0.0.1:0")
	if err != nil {
		t.Fatal(err)
	}
	defer l.Close()
	return l.Addr().(*net.TCPAddr).Port
}

// cluster is a single-node Slurm with its own munge daemon, all in dir.
type cluster struct {
	dir, conf string
	env       []string
}

func startCluster(t *testing.T, dir string) *cluster {
	t.Helper()
	munged := sbinTool(t, "munged", "munge")
	ctld := sbinTool(t, "slurmctld", "slurm-wlm")
	slurmd := sbinTool(t, "slurmd", "slurm-wlm")
	reftest.NeedTool(t, "sbatch", "slurm-wlm")
	if os.Geteuid() != 0 {
		msg := "slurmd runs jobs as their user only when started as root"
		if os.Getenv("CI") != "" {
			t.Fatal(msg)
		}
		t.Skip(msg)
	}
	host, err := os.Hostname()
	if err != nil {
		t.Fatal(err)
	}
	c := &cluster{dir: dir, conf: filepath.Join(dir, "slurm.conf")}
	for _, d := range []string{"state", "spool", "log"} {
		if err := os.MkdirAll(filepath.Join(dir, d), 0o755); err != nil {
			t.Fatal(err)
		}
	}
	key := make([]byte, 128)
	for i := range key {
		key[i] = byte(i*73 + 11) // a test key: any 32 to 1024 bytes do
	}
	if err := os.WriteFile(filepath.Join(dir, "munge.key"), key, 0o600); err != nil {
		t.Fatal(err)
	}
	sock := filepath.Join(dir, "munge.sock")
	conf := fmt.Sprintf(`ClusterName=muarctest
SlurmctldHost=%[1]s(127.0.0.1)
SlurmUser=root
SlurmdUser=root
SlurmctldPort=%[3]d
SlurmdPort=%[4]d
AuthType=auth/munge
AuthInfo=socket=%[2]s/munge.sock
CredType=cred/munge
StateSaveLocation=%[2]s/state
SlurmdSpoolDir=%[2]s/spool
SlurmctldPidFile=%[2]s/slurmctld.pid
SlurmdPidFile=%[2]s/slurmd.pid
SlurmctldLogFile=%[2]s/log/slurmctld.log
SlurmdLogFile=%[2]s/log/slurmd.log
ProctrackType=proctrack/linuxproc
TaskPlugin=task/none
JobAcctGatherType=jobacct_gather/none
AccountingStorageType=accounting_storage/none
JobCompType=jobcomp/none
SchedulerType=sched/builtin
SelectType=select/cons_tres
SelectTypeParameters=CR_Core
ReturnToService=2
MpiDefault=none
SwitchType=switch/none
NodeName=%[1]s NodeAddr=127.0.0.1 CPUs=2 RealMemory=1000 State=UNKNOWN
PartitionName=test Nodes=ALL Default=YES MaxTime=INFINITE State=UP OverSubscribe=FORCE
`, host, dir, freePort(t), freePort(t))
	if err := os.WriteFile(c.conf, []byte(conf), 0o644); err != nil {
		t.Fatal(err)
	}
	c.env = append(os.Environ(), "SLURM_CONF="+c.conf)
	start := func(name string, args ...string) {
		cmd := exec.Command(name, args...)
		cmd.Env = c.env
		logf, err := os.Create(filepath.Join(dir, "log", filepath.Base(name)+".out"))
		if err != nil {
			t.Fatal(err)
		}
		cmd.Stdout, cmd.Stderr = logf, logf
		if err := cmd.Start(); err != nil {
			t.Fatalf("starting %s: %v", name, err)
		}
		// Stopped in reverse order of starting (t.Cleanup is LIFO).
		t.Cleanup(func() {
			cmd.Process.Signal(os.Interrupt)
			done := make(chan struct{})
			go func() { cmd.Wait(); close(done) }()
			select {
			case <-done:
			case <-time.After(10 * time.Second):
				cmd.Process.Kill()
				<-done
			}
			logf.Close()
		})
	}
	start(munged, "-F", "-f", "--socket="+sock, "--key-file="+filepath.Join(dir, "munge.key"),
		"--pid-file="+filepath.Join(dir, "munged.pid"), "--log-file="+filepath.Join(dir, "log", "munged.log"),
		"--seed-file="+filepath.Join(dir, "munged.seed"))
	waitFor(t, 10*time.Second, "munge socket", func() bool { return fileExists(sock) })
	start(ctld, "-D", "-i", "-f", c.conf)
	start(slurmd, "-D", "-f", c.conf, "-N", host)
	waitFor(t, 40*time.Second, "the node to be idle", func() bool {
		out, _ := c.run("sinfo", "-h", "-o", "%t")
		return strings.TrimSpace(out) == "idle"
	})
	return c
}

func (c *cluster) run(name string, args ...string) (string, error) {
	cmd := exec.Command(name, args...)
	cmd.Env = c.env
	out, err := cmd.CombinedOutput()
	return string(out), err
}

func (c *cluster) logs() string {
	var b strings.Builder
	for _, f := range []string{"slurmctld.log", "slurmd.log", "munged.log"} {
		data, _ := os.ReadFile(filepath.Join(c.dir, "log", f))
		if len(data) > 3000 {
			data = data[len(data)-3000:]
		}
		fmt.Fprintf(&b, "--- %s\n%s\n", f, data)
	}
	return b.String()
}

func waitFor(t *testing.T, limit time.Duration, what string, ok func() bool) {
	t.Helper()
	end := time.Now().Add(limit)
	for !ok() {
		if time.Now().After(end) {
			t.Fatalf("waited %v for %s", limit, what)
		}
		time.Sleep(200 * time.Millisecond)
	}
}

// shardReport is the part of a muarc-shard-report a merge must reproduce.
type shardReport struct {
	Command string            `json:"command"`
	Files   []json.RawMessage `json:"files"`
	Summary json.RawMessage   `json:"summary"`
}

func readReport(t *testing.T, path string) shardReport {
	t.Helper()
	data, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var r shardReport
	if err := json.Unmarshal(data, &r); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return r
}

// The study job of archive/examples (import, validate, deidentify, pack as
// job arrays of 3 tasks, then study_finish.sh) under a real Slurm gives the
// reports and manifest of one unsharded run of each step on the same inputs.
func TestStudyJobArrayUnderSlurm(t *testing.T) {
	if testing.Short() {
		t.Skip("starts a Slurm cluster")
	}
	dir, err := os.MkdirTemp("", "muarc-slurm-")
	if err != nil {
		t.Fatal(err)
	}
	t.Cleanup(func() { os.RemoveAll(dir) })
	c := startCluster(t, filepath.Join(dir, "cluster"))

	bin := filepath.Join(dir, "bin")
	if out, err := exec.Command("go", "build", "-o", filepath.Join(bin, "muarc"), "muarc/cmd/muarc").CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	muarc := filepath.Join(bin, "muarc")
	c.env = append(c.env, "PATH="+bin+string(os.PathListSeparator)+os.Getenv("PATH"))
	// The demo study (three subjects, two 64-electrode grids, three
	// levels) with shorter trials.
	cfg := synth.DemoConfig()
	cfg.RestS, cfg.RampS, cfg.PlateauS = 0.25, 0.75, 1
	gens, err := synth.Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	exports := filepath.Join(dir, "exports")
	for _, g := range gens {
		if err := g.WriteExportsOpt(exports, synth.ExportOptions{}); err != nil {
			t.Fatal(err)
		}
	}
	key := filepath.Join(dir, "study.key")
	if out, err := c.run(muarc, "key", "new", key); err != nil {
		t.Fatalf("key: %v\n%s", err, out)
	}

	work, logs := filepath.Join(dir, "work"), filepath.Join(dir, "joblogs")
	os.MkdirAll(logs, 0o755)
	here, _ := os.Getwd()
	env := "ALL,EXPORTS=" + exports + ",WORK=" + work + ",KEY=" + key
	var prev string
	for _, step := range []string{"import", "validate", "deidentify", "pack"} {
		args := []string{"--parsable", "--array=1-3", "-D", dir, "-o", filepath.Join(logs, step+"-%a.log"),
			"--export=" + env + ",STEP=" + step}
		if prev != "" {
			args = append(args, "--dependency=afterany:"+prev)
		}
		out, err := c.run("sbatch", append(args, filepath.Join(here, "study_shards.sh"))...)
		if err != nil {
			t.Fatalf("sbatch %s: %v\n%s\n%s", step, err, out, c.logs())
		}
		prev = strings.TrimSpace(out)
	}
	out, err := c.run("sbatch", "--parsable", "-D", dir, "-o", filepath.Join(logs, "finish.log"),
		"--dependency=afterany:"+prev, "--export=ALL,WORK="+work+",SHARD_COUNT=3", filepath.Join(here, "study_finish.sh"))
	if err != nil {
		t.Fatalf("sbatch finish: %v\n%s", err, out)
	}
	waitFor(t, 150*time.Second, "the jobs to end", func() bool {
		q, err := c.run("squeue", "-h")
		return err == nil && strings.TrimSpace(q) == ""
	})
	finish, _ := os.ReadFile(filepath.Join(logs, "finish.log"))
	if !fileExists(filepath.Join(work, "deposit", "bagit.txt")) {
		var all bytes.Buffer
		ls, _ := filepath.Glob(filepath.Join(logs, "*.log"))
		for _, l := range ls {
			b, _ := os.ReadFile(l)
			fmt.Fprintf(&all, "--- %s\n%s\n", filepath.Base(l), b)
		}
		t.Fatalf("no deposit; job logs:\n%s\n%s", all.String(), c.logs())
	}

	// One unsharded run of each step on the same inputs.
	u := filepath.Join(dir, "unsharded")
	for _, args := range [][]string{
		{"import", exports, "-o", filepath.Join(u, "recordings"), "--shard-report", filepath.Join(u, "import.json")},
		{"validate", filepath.Join(work, "recordings"), "--shard-report", filepath.Join(u, "validate.json")},
		{"deidentify", filepath.Join(work, "recordings"), "-o", filepath.Join(u, "shared"), "--key", key, "--shard-report", filepath.Join(u, "deidentify.json")},
		{"pack", filepath.Join(work, "shared"), "-o", filepath.Join(u, "deposit")},
	} {
		if out, err := c.run(muarc, args...); err != nil {
			t.Fatalf("muarc %s: %v\n%s", strings.Join(args, " "), err, out)
		}
	}
	for _, step := range []string{"import", "validate", "deidentify"} {
		got, want := readReport(t, filepath.Join(work, "merged", step+".json")), readReport(t, filepath.Join(u, step+".json"))
		if len(want.Files) != 3 || !reflect.DeepEqual(got, want) {
			t.Errorf("%s: merged shard reports differ from the unsharded run:\n%+v\nwant\n%+v", step, got, want)
		}
	}
	// The merged manifest is what coreutils' sha256sum says of the
	// de-identified recordings, and the payload manifests of the deposit
	// built from the shards and of one unsharded pack list the same sums.
	gotM, _ := os.ReadFile(filepath.Join(work, "merged", "manifest-sha256.txt"))
	names := strings.Fields(strings.ReplaceAll(string(gotM), "  ", " "))
	var files []string
	for i := 1; i < len(names); i += 2 {
		files = append(files, names[i])
	}
	sha := exec.Command(reftest.NeedTool(t, "sha256sum", "coreutils"), files...)
	sha.Dir = filepath.Join(work, "shared")
	wantM, err := sha.Output()
	if err != nil || len(files) != 3 || !bytes.Equal(gotM, wantM) {
		t.Errorf("manifest (%v):\n%s\nsha256sum:\n%s", err, gotM, wantM)
	}
	if a, b := payloadSums(t, filepath.Join(work, "deposit")), payloadSums(t, filepath.Join(u, "deposit")); !reflect.DeepEqual(a, b) || len(a) < 3 {
		t.Errorf("deposit payload manifests differ:\n%v\n%v", a, b)
	}
	for _, line := range strings.Split(strings.TrimSpace(string(wantM)), "\n") {
		sum, _, _ := strings.Cut(line, "  ")
		if !payloadSums(t, filepath.Join(u, "deposit"))[sum] {
			t.Errorf("the unsharded deposit lacks %s", line)
		}
	}
	if !strings.Contains(string(finish), "valid") {
		t.Errorf("finish log:\n%s", finish)
	}
	// The sharded and the unsharded import give the same recordings (their
	// index rows, sizes aside: each file carries its own creation time).
	idx := func(d string) string {
		out, err := c.run(muarc, "index", "--json", "--no-catalogue", d)
		if err != nil {
			t.Fatalf("index %s: %v\n%s", d, err, out)
		}
		var v struct{ Rows []map[string]any }
		json.Unmarshal([]byte(out), &v)
		for _, r := range v.Rows {
			delete(r, "bytes")
		}
		b, _ := json.Marshal(v.Rows)
		return string(b)
	}
	if a, b := idx(filepath.Join(work, "recordings")), idx(filepath.Join(u, "recordings")); a != b || len(a) < 100 {
		t.Errorf("imported recordings differ:\n%s\n%s", a, b)
	}
	if a, b := idx(filepath.Join(work, "shared")), idx(filepath.Join(u, "shared")); a != b || len(a) < 100 {
		t.Errorf("de-identified recordings differ:\n%s\n%s", a, b)
	}
}

// payloadSums is the set of SHA-256 sums in a bag's payload manifest.
func payloadSums(t *testing.T, bag string) map[string]bool {
	t.Helper()
	b, err := os.ReadFile(filepath.Join(bag, "manifest-sha256.txt"))
	if err != nil {
		t.Fatal(err)
	}
	m := map[string]bool{}
	for _, line := range strings.Split(strings.TrimSpace(string(b)), "\n") {
		sum, _, _ := strings.Cut(line, " ")
		m[sum] = true
	}
	return m
}
