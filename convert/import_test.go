package convert

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

// synthStudy writes the generator's plain-text exports of its small test
// study into a temporary folder.
func synthStudy(t *testing.T) (string, []*synth.Generated) {
	t.Helper()
	gens, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	dir := t.TempDir()
	for _, g := range gens {
		if err := g.WriteExports(dir); err != nil {
			t.Fatal(err)
		}
	}
	return dir, gens
}

func TestImportSynthStudy(t *testing.T) {
	dir, gens := synthStudy(t)
	recs, err := FindRecordings(dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	if len(recs) != len(gens) {
		t.Fatalf("%d recordings found, %d generated", len(recs), len(gens))
	}
	out := filepath.Join(t.TempDir(), "r.h5")
	rep, err := ImportRecording(recs[0].Inputs, out, recfile.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	got, err := recfile.ReadAll(out)
	if err != nil {
		t.Fatal(err)
	}
	want := gens[0].Recording
	if got.Subject.ID != want.Subject.ID || len(got.Trials) != len(want.Trials) {
		t.Fatalf("subject %q trials %d", got.Subject.ID, len(got.Trials))
	}
	for ti, wt := range want.Trials {
		gt := got.Trials[ti]
		if gt.Name != wt.Name || len(gt.Arrays) != len(wt.Arrays) || gt.Force.SamplingRateHz != wt.Force.SamplingRateHz {
			t.Fatalf("trial %d: %q arrays %d rate %v", ti, gt.Name, len(gt.Arrays), gt.Force.SamplingRateHz)
		}
		// Force was exported with 4 decimals: compare with strconv's reading
		// of the same digits.
		for k, v := range wt.Force.Values {
			w, _ := strconv.ParseFloat(strconv.FormatFloat(v, 'f', 4, 64), 64)
			if gt.Force.Values[k] != w {
				t.Fatalf("force[%d] %v want %v", k, gt.Force.Values[k], w)
			}
		}
		for ai, wa := range wt.Arrays {
			ga := gt.Arrays[ai]
			if ga.Name != wa.Name || ga.SamplingRateHz != wa.SamplingRateHz || !ga.SampleType.IsInteger() || len(ga.Channels) != len(wa.Channels) {
				t.Fatalf("array %q rate %v type %s", ga.Name, ga.SamplingRateHz, ga.SampleType)
			}
			for c := range wa.Channels {
				if ga.Channels[c] != wa.Channels[c] && !(ga.Channels[c].Label == wa.Channels[c].Label && math.IsNaN(ga.Channels[c].XMm)) {
					t.Fatalf("channel %d: %+v want %+v", c, ga.Channels[c], wa.Channels[c])
				}
			}
			rows, ch := wa.Samples.Shape()
			gr, gc := ga.Samples.Shape()
			if rows != gr || ch != gc {
				t.Fatalf("shape %dx%d want %dx%d", gr, gc, rows, ch)
			}
			wv := make([]float64, rows*ch)
			gv := make([]float64, rows*ch)
			if err := wa.Samples.ReadFloat64(0, wv); err != nil {
				t.Fatal(err)
			}
			if err := ga.Samples.ReadFloat64(0, gv); err != nil {
				t.Fatal(err)
			}
			// The export wrote 2 decimals: stored as counts, the value read
			// is strconv's float64 of those digits exactly.
			for i := range wv {
				w, _ := strconv.ParseFloat(strconv.FormatFloat(wv[i], 'f', 2, 64), 64)
				if gv[i] != w {
					t.Fatalf("sample %d: %v want %v", i, gv[i], w)
				}
			}
			if len(ga.Decompositions) != len(wa.Decompositions) {
				t.Fatalf("decompositions %d want %d", len(ga.Decompositions), len(wa.Decompositions))
			}
			for di, wd := range wa.Decompositions {
				gd := ga.Decompositions[di]
				if gd.Name != wd.Name || len(gd.Units) != len(wd.Units) || len(gd.ExtraColumns) != len(wd.ExtraColumns) {
					t.Fatalf("decomposition %q units %d extra %d", gd.Name, len(gd.Units), len(gd.ExtraColumns))
				}
				for ui, wu := range wd.Units {
					gu := gd.Units[ui]
					// Labels as written (the synth exports its ids); ids 1..N in file order.
					if gu.Label != wu.Label || gu.ID != int64(ui+1) || len(gu.Discharges) != len(wu.Discharges) {
						t.Fatalf("unit %d: id %d label %q, %d discharges want label %q, %d", ui, gu.ID, gu.Label, len(gu.Discharges), wu.Label, len(wu.Discharges))
					}
					for k := range wu.Discharges {
						if gu.Discharges[k] != wu.Discharges[k] {
							t.Fatalf("unit %d discharge %d: %d want %d", wu.ID, k, gu.Discharges[k], wu.Discharges[k])
						}
					}
					w, _ := strconv.ParseFloat(strconv.FormatFloat(wu.Silhouette, 'f', 4, 64), 64)
					if gu.Silhouette != w {
						t.Fatalf("unit %d SIL %v want %v", wu.ID, gu.Silhouette, w)
					}
				}
			}
		}
	}
	if len(got.Provenance.Sources) == 0 || got.Provenance.History[len(got.Provenance.History)-1].Action != "import" {
		t.Errorf("provenance %+v", got.Provenance)
	}
	if len(rep.Files) == 0 {
		t.Error("empty report")
	}
	if _, err := os.Stat(out); err != nil {
		t.Fatal(err)
	}
}

// TestRoundTrip: text -> muarc -> text -> muarc gives the same recording,
// samples bit for bit, in every discharge shape.
func TestRoundTrip(t *testing.T) {
	dir, _ := synthStudy(t)
	recs, err := FindRecordings(dir, nil)
	if err != nil {
		t.Fatal(err)
	}
	tmp := t.TempDir()
	first := filepath.Join(tmp, "first.h5")
	if _, err := ImportRecording(recs[0].Inputs, first, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	a := loadComparable(t, first)
	if !strings.Contains(a, "ta_grid") || !strings.Contains(a, "Discharges:[") || len(a) < 100000 {
		t.Fatalf("comparison text too small (%d bytes)", len(a))
	}
	for _, shape := range []string{ShapeLong, ShapeColumns, ShapeLines, ShapeMatrix, ShapeLong + "/s", ShapeColumns + "/s", ShapeLines + "/s"} {
		out := filepath.Join(tmp, "text_"+strings.ReplaceAll(shape, "/", "_"))
		sh, tb, _ := strings.Cut(shape, "/")
		if _, err := Export(first, []string{"metadata", "signals", "discharges", "units"}, ExportOptions{Dir: out, Shape: sh, TimeBase: tb}); err != nil {
			t.Fatal(err)
		}
		in, err := MatchRecording(out, DefaultProfile())
		if err != nil {
			t.Fatal(err)
		}
		second := filepath.Join(tmp, "second_"+strings.ReplaceAll(shape, "/", "_")+".h5")
		if _, err := ImportRecording(in, second, recfile.WriteOptions{}); err != nil {
			t.Fatalf("%s: %v", shape, err)
		}
		if b := loadComparable(t, second); a != b {
			t.Fatalf("%s: recordings differ:\n%s\n%s", shape, firstDiff(a, b), "")
		}
	}
}

// loadComparable reads a muarc file and prints everything but the creation
// time and provenance, samples included (%v prints floats in the shortest
// form that reads back to the same bits).
func loadComparable(t *testing.T, path string) string {
	t.Helper()
	r, err := recfile.ReadAll(path)
	if err != nil {
		t.Fatal(err)
	}
	r.Created = time0
	r.Provenance = record.Provenance{}
	var s string
	for ti := range r.Trials {
		for ai := range r.Trials[ti].Arrays {
			a := &r.Trials[ti].Arrays[ai]
			rows, ch := a.Samples.Shape()
			if a.SampleType == record.Float64 {
				v := make([]float64, rows*ch)
				a.Samples.ReadFloat64(0, v)
				s += fmt.Sprint(v)
			} else {
				v := make([]float32, rows*ch)
				a.Samples.ReadFloat32(0, v)
				s += fmt.Sprint(v)
			}
			a.Samples = nil
		}
	}
	return fmt.Sprintf("%+v", *r) + s
}

func firstDiff(a, b string) string {
	for i := 0; i < len(a) && i < len(b); i++ {
		if a[i] != b[i] {
			lo := max(0, i-200)
			return a[lo:min(len(a), i+100)] + "\n---\n" + b[lo:min(len(b), i+100)]
		}
	}
	return fmt.Sprintf("lengths %d and %d", len(a), len(b))
}

var time0 time.Time

func TestDemoProfileAndSidecarLines(t *testing.T) {
	dir, _ := synthStudy(t)
	p, err := LoadProfile(td + "demo-profile.yaml")
	if err != nil {
		t.Fatal(err)
	}
	recs, err := FindRecordings(dir, p)
	if err != nil || len(recs) != 1 {
		t.Fatalf("%v %d", err, len(recs))
	}
	pl, err := Read(recs[0].Inputs)
	if err != nil {
		t.Fatal(err)
	}
	pl.Close()
	// Break the sidecar: a trial name that is not a group name, on a known
	// line; the error must give the JSON path and that line.
	meta := recs[0].Inputs.Meta
	b, _ := os.ReadFile(meta)
	lines := strings.Split(string(b), "\n")
	ln := 0
	for i, l := range lines {
		if strings.Contains(l, `"name": "ramp_20pct"`) {
			lines[i] = strings.Replace(l, "ramp_20pct", "ramp 20%", 1)
			ln = i + 1
			break
		}
	}
	bad := filepath.Join(t.TempDir(), "metadata.json")
	os.WriteFile(bad, []byte(strings.Join(lines, "\n")), 0o644)
	_, err = ReadSidecar(bad)
	pe := AsParseError(err)
	if ln == 0 || pe == nil || pe.Line != ln || !strings.Contains(pe.Msg, "/trials/0/name") {
		t.Fatalf("line %d: got %v", ln, err)
	}
	// The same in YAML: line of the value.
	y := "study: {id: X}\nsubject: {id: S1}\nsession: {}\ntrials:\n  - name: ok\n  - name: \"bad name\"\n"
	yp := writeTemp(t, "m.yaml", y)
	_, err = ReadSidecar(yp)
	if pe = AsParseError(err); pe == nil || pe.Line != 6 || !strings.Contains(pe.Msg, "/trials/1/name") {
		t.Fatalf("yaml: %v", err)
	}
}

// TestImportWidensToFloat64: a cell that float32 cannot hold, late in the
// file, makes the importer rewrite the array as float64; --dtype float32
// keeps float32 and reports the largest error.
func TestImportWidensToFloat64(t *testing.T) {
	var b strings.Builder
	b.WriteString("time [s],a [uV],b [uV]\n")
	for i := 0; i < 20000; i++ {
		fmt.Fprintf(&b, "%g,%d.25,-1.5\n", float64(i)/1000, i%100)
	}
	// 123.456789: float32 values near 123 are 2^-17 apart (IEEE 754
	// binary32), so six decimals do not read back.
	b.WriteString("20,123.456789,2\n")
	p := writeTemp(t, "emg_x.csv", b.String())
	out := filepath.Join(t.TempDir(), "x.h5")
	rep, err := ImportRecording(Inputs{EMG: []string{p}}, out, recfile.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	var fr *FileReport
	for i := range rep.Files {
		if rep.Files[i].Role == "emg" {
			fr = &rep.Files[i]
		}
	}
	if fr.DType != "float64" || !strings.Contains(fr.DTypeWhy, "line 20002, column 2") {
		t.Fatalf("%s: %s", fr.DType, fr.DTypeWhy)
	}
	r, err := recfile.ReadAll(out)
	if err != nil {
		t.Fatal(err)
	}
	a := r.Trials[0].Arrays[0]
	rows, ch := a.Samples.Shape()
	v := make([]float64, rows*ch)
	if err := a.Samples.ReadFloat64(0, v); err != nil {
		t.Fatal(err)
	}
	// strconv.ParseFloat is the reference reading of the digits.
	want, _ := strconv.ParseFloat("123.456789", 64)
	if a.SampleType != record.Float64 || rows != 20001 || v[len(v)-2] != want || v[2*37] != 37.25 {
		t.Fatalf("%s %d %v", a.SampleType, rows, v[len(v)-2])
	}
	out2 := filepath.Join(t.TempDir(), "y.h5")
	rep, err = ImportRecording(Inputs{EMG: []string{p}, DType: record.Float32}, out2, recfile.WriteOptions{})
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range rep.Files {
		if f.Role == "emg" {
			e := math.Abs(float64(float32(want)) - want)
			if f.DType != "float32" || f.LossyCells != 1 || math.Abs(f.MaxAbsError-e) > 1e-12 {
				t.Fatalf("%+v", f)
			}
		}
	}
}

// TestImportBadInputWritesNothing: a bad cell in the second pass leaves no
// output and the input as it was.
func TestImportBadInputWritesNothing(t *testing.T) {
	text := "sampling rate: 1000 Hz\ntime [s],a\n0,1\n0.001,2\n0.002,zz\n"
	p := writeTemp(t, "emg_a.csv", text)
	out := filepath.Join(t.TempDir(), "x.h5")
	_, err := ImportRecording(Inputs{EMG: []string{p}}, out, recfile.WriteOptions{})
	pe := AsParseError(err)
	if pe == nil || pe.Line != 5 || pe.Column != 2 {
		t.Fatalf("%v", err)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Fatalf("output exists: %v", err)
	}
	ents, _ := os.ReadDir(filepath.Dir(out))
	if len(ents) != 0 {
		t.Fatalf("left behind: %v", ents)
	}
	if b, _ := os.ReadFile(p); string(b) != text {
		t.Fatal("input changed")
	}
}
