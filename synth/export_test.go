package synth

import (
	"bufio"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"testing"

	"muarc/schema"
)

// sharedExports writes the TestConfig exports once for the tests that only
// read them; TestMain removes the folder.
var sharedExports struct {
	once sync.Once
	dir  string
	g    *Generated
	err  error
}

func exportsOnce(t *testing.T) (string, *Generated) {
	t.Helper()
	sharedExports.once.Do(func() {
		gs, err := Generate(TestConfig())
		if err != nil {
			sharedExports.err = err
			return
		}
		sharedExports.g = gs[0]
		sharedExports.dir, sharedExports.err = os.MkdirTemp("", "synth-exports-")
		if sharedExports.err == nil {
			sharedExports.err = gs[0].WriteExports(sharedExports.dir)
		}
	})
	if sharedExports.err != nil {
		t.Fatal(sharedExports.err)
	}
	return sharedExports.dir, sharedExports.g
}

func TestMain(m *testing.M) {
	code := m.Run()
	if sharedExports.dir != "" {
		os.RemoveAll(sharedExports.dir)
	}
	os.Exit(code)
}

// readTable reads an export: the "key: value" block up to the blank line
// (absent when the first line is a header), the header row and the rows.
func readTable(t *testing.T, path string, withBlock bool) (map[string]string, []string, [][]string) {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	sc := bufio.NewScanner(f)
	sc.Buffer(make([]byte, 1<<20), 1<<20)
	kv := map[string]string{}
	if withBlock {
		for sc.Scan() {
			line := sc.Text()
			if line == "" {
				break
			}
			k, v, ok := strings.Cut(line, ": ")
			if !ok {
				t.Fatalf("%s: block line %q is not key: value", path, line)
			}
			kv[k] = v
		}
	}
	if !sc.Scan() {
		t.Fatalf("%s: no header", path)
	}
	head := strings.Split(sc.Text(), ",")
	var rows [][]string
	for sc.Scan() {
		r := strings.Split(sc.Text(), ",")
		if len(r) != len(head) {
			t.Fatalf("%s line %d: %d fields, header has %d", path, len(rows)+2, len(r), len(head))
		}
		rows = append(rows, r)
	}
	if err := sc.Err(); err != nil {
		t.Fatal(err)
	}
	return kv, head, rows
}

func num(t *testing.T, s string) float64 {
	t.Helper()
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		t.Fatal(err)
	}
	return v
}

// TestExportsCarryTheRecordingExactly reads every export back with a
// plain parser and finds the recording's values exactly (the generator
// quantises EMG to 0.01 uV and force to 0.0001 N, the export resolution).
func TestExportsCarryTheRecordingExactly(t *testing.T) {
	dir, g := exportsOnce(t)
	root := filepath.Join(dir, "S01")
	rec := g.Recording

	var meta map[string]any
	b, err := os.ReadFile(filepath.Join(root, "metadata.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &meta); err != nil {
		t.Fatal(err)
	}
	sub := meta["subject"].(map[string]any)
	for k, want := range map[string]string{"name": rec.Subject.Name, "birth_date": rec.Subject.BirthDate,
		"phone": rec.Subject.Phone, "email": rec.Subject.Email, "notes": rec.Subject.Notes} {
		if sub[k] != want {
			t.Errorf("metadata subject.%s = %v, want %q", k, sub[k], want)
		}
	}
	if _, ok := meta["samples"]; ok {
		t.Error("sidecar carries samples")
	}
	trials := meta["trials"].([]any)
	if len(trials) != len(rec.Trials) {
		t.Fatalf("sidecar has %d trials", len(trials))
	}
	tr0 := trials[0].(map[string]any)
	arr1 := tr0["arrays"].([]any)[1].(map[string]any)
	if arr1["rows"] != 4.0 || arr1["ied_mm"] != 8.0 || arr1["montage"] != "monopolar" {
		t.Errorf("sidecar array %v", arr1)
	}
	ch5 := arr1["channels"].([]any)[5].(map[string]any)
	if ch5["usable"] != false || ch5["label"] != "e06" || ch5["row"] != 1.0 || ch5["column"] != 1.0 || ch5["x_mm"] != 8.0 {
		t.Errorf("sidecar channel 5 %v", ch5)
	}
	decs := tr0["arrays"].([]any)[0].(map[string]any)["decompositions"].([]any)
	if len(decs) != 2 || decs[1].(map[string]any)["edited_by_hand"] != true {
		t.Errorf("sidecar decompositions %v", decs)
	}
	if _, ok := decs[0].(map[string]any)["parameters"].(map[string]any); !ok {
		t.Error("decomposition parameters are not a JSON object")
	}

	for _, tr := range rec.Trials {
		td := filepath.Join(root, tr.Name)
		kv, head, rows := readTable(t, filepath.Join(td, "force.csv"), true)
		if kv["sampling rate"] != "1024 Hz" || kv["unit"] != "N" || kv["start"] != "0 s" || kv["samples"] != strconv.Itoa(len(tr.Force.Values)) {
			t.Errorf("force.csv block %v", kv)
		}
		if strings.Join(head, ",") != "time [s],force [N],target [N]" || len(rows) != len(tr.Force.Values) {
			t.Fatalf("force.csv header %v, %d rows", head, len(rows))
		}
		for k, r := range rows {
			if num(t, r[0]) != float64(k)/1024 || num(t, r[1]) != tr.Force.Values[k] || num(t, r[2]) != tr.ForceTarget.Values[k] {
				t.Fatalf("force.csv row %d %v: want %v %v", k, r, tr.Force.Values[k], tr.ForceTarget.Values[k])
			}
		}
		for _, a := range tr.Arrays {
			kv, head, rows := readTable(t, filepath.Join(td, "emg_"+a.Name+".csv"), true)
			n, ch := a.Samples.Shape()
			if kv["array"] != a.Name || kv["unit"] != "uV" || kv["channels"] != strconv.Itoa(ch) || kv["sampling rate"] != "1024 Hz" {
				t.Errorf("emg block %v", kv)
			}
			if head[0] != "time [s]" || head[1] != "e01 [uV]" || len(head) != ch+1 || len(rows) != n {
				t.Fatalf("emg header %v, %d rows", head, len(rows))
			}
			vals := readAll64(t, a.Samples, []int{n})
			for k, r := range rows {
				if num(t, r[0]) != float64(k)/1024 {
					t.Fatalf("emg row %d time %s", k, r[0])
				}
				for c := range ch {
					if num(t, r[c+1]) != vals[k*ch+c] {
						t.Fatalf("emg row %d channel %d: %s, want %v", k, c, r[c+1], vals[k*ch+c])
					}
				}
			}
			for _, d := range a.Decompositions {
				_, head, rows := readTable(t, filepath.Join(td, "discharges_"+a.Name+"_"+d.Name+".csv"), false)
				if strings.Join(head, ",") != "unit,time [s]" {
					t.Fatalf("discharges header %v", head)
				}
				got := map[int64][]int64{}
				for _, r := range rows {
					id, _ := strconv.ParseInt(r[0], 10, 64)
					got[id] = append(got[id], int64(math.Round(num(t, r[1])*1024)))
				}
				for _, u := range d.Units {
					if fmt.Sprint(got[u.ID]) != fmt.Sprint(u.Discharges) {
						t.Fatalf("%s/%s unit %d discharges differ", a.Name, d.Name, u.ID)
					}
				}
				_, head, rows = readTable(t, filepath.Join(td, "units_"+a.Name+"_"+d.Name+".csv"), false)
				wantHead := "unit,SIL,PNR [dB],accuracy [%],CoV ISI,recruitment [%MVC],derecruitment [%MVC],initial rate [pps],mean rate [pps],twitch time [ms]"
				if strings.Join(head, ",") != wantHead || len(rows) != len(d.Units) {
					t.Fatalf("units header %v, %d rows", head, len(rows))
				}
				for i, u := range d.Units {
					r := rows[i]
					want := []float64{float64(u.ID), u.Silhouette, u.PNRdB, u.AccuracyPct, u.ISICoV, u.RecruitPctMVC,
						u.DerecruitPctMVC, u.InitialRatePPS, u.MeanRatePPS, d.ExtraColumns[0].Values[i]}
					for c, w := range want {
						if num(t, r[c]) != w {
							t.Fatalf("units row %d column %s: %s, want %v", i, head[c], r[c], w)
						}
					}
				}
			}
		}
	}
	var truth Truth
	b, err = os.ReadFile(filepath.Join(root, "truth.json"))
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(b, &truth); err != nil || truth.Subject != "S01" || len(truth.Trials) != 2 {
		t.Fatalf("truth.json: %v %+v", err, truth.Subject)
	}
}

// TestExportsReadByNumpy reads an EMG and a force export with numpy's
// loadtxt (Debian python3-numpy, a general-purpose reader), compares the
// column sums with the recording and takes the EMG spectrum with numpy.
func TestExportsReadByNumpy(t *testing.T) {
	py := "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import numpy").Run(); err != nil {
		if os.Getenv("CI") != "" {
			t.Fatalf("CI: %s with numpy is needed (apt-get install python3-numpy): %v", py, err)
		}
		t.Skipf("%s with numpy not available: %v", py, err)
	}
	dir, g := exportsOnce(t)
	tr := g.Recording.Trials[0]
	a := tr.Arrays[1]
	td := filepath.Join(dir, "S01", tr.Name)
	script := `import sys, numpy as np
e = np.loadtxt(sys.argv[1], delimiter=",", skiprows=9)
f = np.loadtxt(sys.argv[2], delimiter=",", skiprows=8)
p0, p1 = int(sys.argv[3]), int(sys.argv[4])
sp = (np.abs(np.fft.rfft(e[p0:p1, 1:], axis=0)) ** 2).sum(axis=1)
fr = np.fft.rfftfreq(p1 - p0, 1 / 1024)
mdf = fr[np.searchsorted(np.cumsum(sp), sp.sum() / 2)]
print(e.shape[0], e.shape[1], repr(float(e[:, 1:].sum())), repr(float(e[:, 0].max())), repr(float(f[:, 1].sum())), repr(float(mdf)))`
	tt := g.Truth.Trials[0]
	out, err := exec.Command(py, "-c", script, filepath.Join(td, "emg_"+a.Name+".csv"), filepath.Join(td, "force.csv"),
		strconv.FormatInt(tt.PlateauStart, 10), strconv.FormatInt(tt.PlateauEnd, 10)).CombinedOutput()
	if err != nil {
		t.Fatalf("numpy: %v\n%s", err, out)
	}
	var rows, cols int
	var esum, tmax, fsum, mdf float64
	if _, err := fmt.Sscan(string(out), &rows, &cols, &esum, &tmax, &fsum, &mdf); err != nil {
		t.Fatalf("numpy output %q: %v", out, err)
	}
	n, ch := a.Samples.Shape()
	vals := readAll64(t, a.Samples, []int{n})
	var want float64
	for _, v := range vals {
		want += v
	}
	var wantF float64
	for _, v := range tr.Force.Values {
		wantF += v
	}
	if rows != n || cols != ch+1 || math.Abs(esum-want) > 1e-6*float64(len(vals)) || tmax != float64(n-1)/1024 || math.Abs(fsum-wantF) > 1e-6*float64(n) {
		t.Fatalf("numpy read %d x %d, sum %v (want %v), last time %v, force sum %v (want %v)", rows, cols, esum, want, tmax, fsum, wantF)
	}
	// Median frequency of the plateau EMG (numpy rfft): surface EMG has
	// its median frequency at about 50-150 Hz (common practice, from
	// memory); asserted as a property of our model.
	t.Logf("median frequency %.1f Hz", mdf)
	if mdf < 50 || mdf > 150 {
		t.Errorf("plateau EMG median frequency %.1f Hz, want 50-150", mdf)
	}
}

// TestSidecarValidatesAgainstSchema checks metadata.json against the
// layout's JSON Schema with python3-jsonschema (Debian; Draft7Validator, a
// second, general-purpose implementation of JSON Schema draft-07).
func TestSidecarValidatesAgainstSchema(t *testing.T) {
	py := "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import jsonschema").Run(); err != nil {
		if os.Getenv("CI") != "" {
			t.Fatalf("CI: %s with jsonschema is needed (apt-get install python3-jsonschema): %v", py, err)
		}
		t.Skipf("%s with jsonschema not available: %v", py, err)
	}
	dir, g := exportsOnce(t)
	sch := filepath.Join(t.TempDir(), "schema.json")
	if err := os.WriteFile(sch, []byte(schema.RecordingSchema), 0o644); err != nil {
		t.Fatal(err)
	}
	meta := filepath.Join(g.ExportDir(dir), "metadata.json")
	script := `import sys, json, jsonschema
v = jsonschema.Draft7Validator(json.load(open(sys.argv[1])))
doc = json.load(open(sys.argv[2]))
errs = [list(e.absolute_path) + [e.message] for e in v.iter_errors(doc)]
print(len(errs), errs[:5])
# A control: the sidecar without its trials must fail.
del doc["trials"]
print(len(list(v.iter_errors(doc))))`
	out, err := exec.Command(py, "-c", script, sch, meta).CombinedOutput()
	if err != nil {
		t.Fatalf("jsonschema: %v\n%s", err, out)
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	if len(lines) != 2 || !strings.HasPrefix(lines[0], "0 ") || lines[1] == "0" {
		t.Fatalf("sidecar against the schema:\n%s", out)
	}
}
