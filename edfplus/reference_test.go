package edfplus

import (
	"encoding/json"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"testing"
	"time"

	"muarc/internal/reftest"
)

// TestEDFlibFixtures has EDFlib (Debian libedf-dev) write EDF+ and BDF+
// files with known digital values and annotations (testdata/edflib_writer.c)
// and checks that muarc reads exactly those.
func TestEDFlibFixtures(t *testing.T) {
	gcc := reftest.NeedTool(t, "gcc", "gcc")
	if _, err := os.Stat("/usr/include/edflib.h"); err != nil {
		reftest.NeedTool(t, "edflib.h", "libedf-dev")
	}
	dir := t.TempDir()
	bin := filepath.Join(dir, "edflib_writer")
	if out, err := exec.Command(gcc, "-O1", "-o", bin, "testdata/edflib_writer.c", "-ledf").CombinedOutput(); err != nil {
		t.Fatalf("gcc: %v\n%s", err, out)
	}
	for _, kind := range []string{"edf", "bdf"} {
		path := filepath.Join(dir, "fixture."+kind)
		if out, err := exec.Command(bin, path, kind).CombinedOutput(); err != nil {
			t.Fatalf("edflib_writer: %v\n%s", err, out)
		}
		r, err := Open(path)
		if err != nil {
			t.Fatal(err)
		}
		h := r.Header
		wantFormat, dmin, dmax := EDF, -32768, 32767
		if kind == "bdf" {
			wantFormat, dmin, dmax = BDF, -8388608, 8388607
		}
		// Values set in edflib_writer.c.
		if h.Format != wantFormat || !h.Plus || h.Records != 4 || h.RecordDurationS != 1 || len(h.Signals) != 4 {
			t.Fatalf("%s: header %+v", kind, h)
		}
		if !h.Start.Equal(time.Date(2026, 3, 14, 9, 30, 5, 0, time.UTC)) {
			t.Errorf("%s: start %v, edflib_writer.c sets 2026-03-14 09:30:05", kind, h.Start)
		}
		rates := []int{256, 512, 100}
		labels := []string{"EMG r1c1", "EMG r1c2", "Force"}
		pmins := []float64{-3276.8, -8000, -50}
		// EDFlib cuts 3276.7 to the 8 characters "3276.699" (its number
		// formatting truncates), so the maximum is compared within 0.0011.
		pmaxs := []float64{3276.7, 8000, 950}
		for s := 0; s < 3; s++ {
			sg := h.Signals[s]
			if sg.Label != labels[s] || sg.SamplesPerRecord != rates[s] || sg.DigitalMin != dmin || sg.DigitalMax != dmax ||
				sg.PhysicalMin != pmins[s] || math.Abs(sg.PhysicalMax-pmaxs[s]) > 0.0011 || sg.Prefiltering != "HP:20Hz LP:500Hz" {
				t.Errorf("%s signal %d: %+v", kind, s, sg)
			}
		}
		var rec Record
		var anns []Annotation
		n := make([]int64, 3)
		for i := 0; i < h.Records; i++ {
			if err := r.ReadRecord(i, &rec); err != nil {
				t.Fatal(err)
			}
			if rec.OnsetS != float64(i) {
				t.Errorf("%s record %d onset %g", kind, i, rec.OnsetS)
			}
			for s := 0; s < 3; s++ {
				for _, d := range rec.Digital[s] {
					want := int64(dmin) + (n[s]*7919+int64(s)*104729)%(int64(dmax)-int64(dmin)+1)
					if int64(d) != want {
						t.Fatalf("%s signal %d sample %d: digital %d, edflib wrote %d", kind, s, n[s], d, want)
					}
					n[s]++
				}
			}
			anns = append(anns, rec.Annotations...)
		}
		r.Close()
		want := []struct {
			on, dur float64
			text    string
		}{{0.5, 1.25, "ramp up"}, {1.0001, math.NaN(), "unit 3"}, {2.5, math.NaN(), "Plateau µV"}}
		if len(anns) != len(want) {
			t.Fatalf("%s: annotations %+v", kind, anns)
		}
		for i, w := range want {
			a := anns[i]
			if a.OnsetS != w.on || a.Text != w.text || !(a.DurationS == w.dur || math.IsNaN(w.dur) && (math.IsNaN(a.DurationS) || a.DurationS == -1)) {
				t.Errorf("%s annotation %d: %+v, edflib wrote %+v", kind, i, a, w)
			}
		}
	}
}

// TestMNEReadsOurFiles writes generated EDF+ and BDF+ files with muarc and
// reads them with MNE-Python (Debian python3-mne): the same physical
// values within a millionth of a digital step (MNE computes the same
// linear scaling in float64) and the same annotations.
func TestMNEReadsOurFiles(t *testing.T) {
	py := reftest.NeedPython(t, "mne", "numpy")
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(21, 4))
	type want struct {
		Path  string      `json:"path"`
		Kind  string      `json:"kind"`
		Scale []float64   `json:"scale"`
		Phys  [][]float64 `json:"phys"`
		On    []float64   `json:"onsets"`
		Dur   []float64   `json:"durations"`
		Text  []string    `json:"texts"`
	}
	var cases []want
	for n := 0; n < 8; n++ {
		f := []Format{EDF, BDF}[n%2]
		g := generate(rng, f, true)
		// MNE resamples signals of unequal rates; give all one rate.
		for i := range g.h.Signals {
			if !g.h.Signals[i].Annotations {
				g.h.Signals[i].SamplesPerRecord = 32
			}
		}
		g2 := regenerate(rng, g)
		path := filepath.Join(dir, fmt.Sprintf("case%d.%s", n, []string{"edf", "bdf"}[n%2]))
		if err := os.WriteFile(path, g2.bytes(t), 0o644); err != nil {
			t.Fatal(err)
		}
		w := want{Path: path, Kind: f.String()}
		for i, s := range g2.h.Signals {
			if s.Annotations {
				continue
			}
			w.Scale = append(w.Scale, math.Abs(s.Scale())*1e-6) // MNE gives volts for uV
			var p []float64
			for r := range g2.dig {
				for _, d := range g2.dig[r][i] {
					p = append(p, s.Physical(d)*1e-6)
				}
			}
			w.Phys = append(w.Phys, p)
		}
		for _, as := range g2.anns {
			for _, a := range as {
				d := a.DurationS
				if math.IsNaN(d) {
					d = 0
				}
				w.On, w.Dur, w.Text = append(w.On, a.OnsetS), append(w.Dur, d), append(w.Text, a.Text)
			}
		}
		cases = append(cases, w)
	}
	js, _ := json.Marshal(cases)
	inp := filepath.Join(dir, "cases.json")
	os.WriteFile(inp, js, 0o644)
	script := `
import json, sys, numpy as np, mne
mne.set_log_level("ERROR")
bad = []
for c in json.load(open(sys.argv[1])):
    read = mne.io.read_raw_bdf if c["kind"] == "BDF" else mne.io.read_raw_edf
    raw = read(c["path"], preload=True)
    data = raw.get_data()
    for i, want in enumerate(c["phys"]):
        err = np.max(np.abs(data[i] - np.array(want)))
        if not err <= 1e-6 * c["scale"][i] + 1e-15 or len(want) != data.shape[1]:
            bad.append("%s signal %d: max error %g, step %g" % (c["path"], i, err, c["scale"][i]))
    a = raw.annotations
    got = sorted(zip(a.onset, a.duration, a.description))
    # MNE crops annotations at the end of the data: do the same to the expected.
    end = raw.n_times / raw.info["sfreq"]
    want = sorted((o, min(d, end - o), x) for o, d, x in zip(c["onsets"] or [], c["durations"] or [], c["texts"] or []))
    if len(got) != len(want) or any(g[2] != w[2] or abs(g[0] - w[0]) > 1e-9 or abs(g[1] - w[1]) > 1e-9 for g, w in zip(got, want)):
        bad.append("%s annotations %s, want %s" % (c["path"], got, want))
print(json.dumps(bad))
`
	out, err := exec.Command(py, "-c", script, inp).CombinedOutput()
	if err != nil {
		t.Fatalf("mne: %v\n%s", err, out)
	}
	var bad []string
	if err := json.Unmarshal(out[lastLine(out):], &bad); err != nil {
		t.Fatalf("mne output %s", out)
	}
	for _, b := range bad {
		t.Error(b)
	}
}

func lastLine(b []byte) int {
	i := len(b) - 1
	for i > 0 && b[i-1] != '\n' {
		i--
	}
	if i < 0 {
		return 0
	}
	return i
}

// regenerate draws fresh digital values for g's (changed) header.
func regenerate(rng *rand.Rand, g *genFile) *genFile {
	out := &genFile{h: g.h, anns: g.anns}
	for range g.dig {
		var rec [][]int32
		for _, s := range g.h.Signals {
			var d []int32
			if !s.Annotations {
				for k := 0; k < s.SamplesPerRecord; k++ {
					d = append(d, int32(s.DigitalMin+rng.IntN(s.DigitalMax-s.DigitalMin+1)))
				}
			}
			rec = append(rec, d)
		}
		out.dig = append(out.dig, rec)
	}
	return out
}

// TestBiosigReadsOurFiles has biosig's save2gdf (Debian biosig-tools) read
// generated EDF+ and BDF+ files: the same labels, units, rates, physical
// and digital ranges (its JSON header), the same annotations (its events
// are placed on a time grid of its own, so onsets and durations are
// compared within one sampling interval of the slowest signal).
func TestBiosigReadsOurFiles(t *testing.T) {
	tool := reftest.NeedTool(t, "save2gdf", "biosig-tools")
	dir := t.TempDir()
	rng := rand.New(rand.NewPCG(77, 7))
	for n := 0; n < 6; n++ {
		f := []Format{EDF, BDF}[n%2]
		g := generate(rng, f, true)
		// biosig places events on a grid of its own; high rates keep it fine.
		for k := range g.h.Signals {
			if !g.h.Signals[k].Annotations {
				g.h.Signals[k].SamplesPerRecord = 100 + 50*k
			}
		}
		g = regenerate(rng, g)
		path := filepath.Join(dir, fmt.Sprintf("case%d.%s", n, []string{"edf", "bdf"}[n%2]))
		if err := os.WriteFile(path, g.bytes(t), 0o644); err != nil {
			t.Fatal(err)
		}
		out, err := exec.Command(tool, "-JSON", path).Output()
		if err != nil {
			t.Fatalf("save2gdf: %v\n%s", err, out)
		}
		i := 0
		for i < len(out) && out[i] != '{' {
			i++
		}
		var js struct {
			Channel []struct {
				Label                            string
				Samplingrate                     float64
				PhysicalMaximum, PhysicalMinimum float64
				DigitalMaximum, DigitalMinimum   float64
				PhysicalUnit                     string
			} `json:"CHANNEL"`
			Event []struct {
				POS, DUR    float64
				Description string
			} `json:"EVENT"`
		}
		if err := json.Unmarshal(out[i:], &js); err != nil {
			t.Fatalf("save2gdf JSON: %v\n%s", err, out)
		}
		if len(js.Channel) != len(g.h.Signals) {
			t.Fatalf("%s: %d channels, wrote %d", path, len(js.Channel), len(g.h.Signals))
		}
		step := 0.0
		for k, s := range g.h.Signals {
			c := js.Channel[k]
			step = math.Max(step, 1/g.h.SamplingRateHz(k))
			if s.Annotations {
				continue
			}
			if c.Label != s.Label || c.PhysicalUnit != s.PhysicalDimension || c.Samplingrate != g.h.SamplingRateHz(k) ||
				c.PhysicalMaximum != s.PhysicalMax || c.PhysicalMinimum != s.PhysicalMin || int(c.DigitalMinimum) != s.DigitalMin || int(c.DigitalMaximum) != s.DigitalMax {
				t.Errorf("%s signal %d: biosig %+v, wrote %+v", path, k, c, s)
			}
		}
		var want []Annotation
		for _, as := range g.anns {
			want = append(want, as...)
		}
		if len(js.Event) != len(want) {
			t.Fatalf("%s: biosig %d events %+v, wrote %+v", path, len(js.Event), js.Event, want)
		}
		// biosig lists events by onset.
		sort.SliceStable(want, func(a, b int) bool { return want[a].OnsetS < want[b].OnsetS })
		for k, e := range js.Event {
			w := want[k]
			d := w.DurationS
			if math.IsNaN(d) {
				d = 0
			}
			if e.Description != w.Text || math.Abs(e.POS-w.OnsetS) > step+1e-6 || math.Abs(e.DUR-d) > step+1e-6 {
				t.Errorf("%s event %d: biosig %+v, wrote %+v (step %g s)", path, k, e, w, step)
			}
		}
	}
}
