package recfile

import (
	"errors"
	"fmt"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"
	"time"

	"muarc/record"
	"muarc/schema"
)

// fixture builds a recording that uses every part of the layout: two trials,
// two arrays in one trial, two decompositions on one array, one with no
// units, NaN figures, extra fields and columns, MUAPs, unicode strings and
// both sample widths. Values are invented fixtures, not check values.
func fixture() *record.Recording {
	nan := math.NaN()
	mk := func(rows, cols int, f64 bool, seed float64) *record.MemSamples {
		m := &record.MemSamples{Samples: rows, Channels: cols}
		if f64 {
			m.F64 = make([]float64, rows*cols)
			for i := range m.F64 {
				m.F64[i] = math.Sin(seed+float64(i)*0.37) * 123.456789012345
			}
		} else {
			m.F32 = make([]float32, rows*cols)
			for i := range m.F32 {
				m.F32[i] = float32(math.Cos(seed+float64(i)*0.11) * 250)
			}
		}
		return m
	}
	chans := func(rows, cols int) []record.Channel {
		var out []record.Channel
		for r := 0; r < rows; r++ {
			for c := 0; c < cols; c++ {
				out = append(out, record.Channel{Label: "e" + string(rune('A'+len(out))), Row: r, Column: c, XMm: float64(c) * 8, YMm: float64(r) * 8, Usable: (r+c)%5 != 0})
			}
		}
		return out
	}
	u1 := record.NewUnit(1)
	u1.Label = "MU 1"
	u1.Discharges = []int64{10, 250, 499}
	u1.Silhouette, u1.PNRdB = 0.93, 31.5
	u2 := record.NewUnit(7)
	u2.Discharges = []int64{}
	u2.MeanRatePPS = 12.25
	u3 := record.NewUnit(3)
	u3.Label = "1.5 \"split\", é"
	u3.Discharges = []int64{5, 6000}
	return &record.Recording{
		Created:  time.Date(2026, 3, 14, 9, 30, 0, 0, time.UTC),
		Software: "muarc test",
		Study:    record.Study{ID: "STUDY-X", Title: "Dorsiflexion ramps — pilot", License: "CC-BY-4.0", Extra: record.Extra{"wave": int64(2)}},
		Subject:  record.Subject{ID: "S01", Name: "Ada Zyxwvut", BirthDate: "1990-01-02", AgeYears: 36, Sex: "female", HeightCm: nan, MassKg: 61.5, Notes: "ünïcode ✓", Extra: record.Extra{"handed_score": 0.8, "consent": true, "bands": []float64{1, 2}}},
		Session:  record.Session{ID: "V1", Date: "2026-03-14T09:30:00Z", Operator: "op"},
		Trials: []record.Trial{
			{
				Name: "ramp_30", Task: "isometric dorsiflexion", TargetPctMVC: 30, MVC: 312.5, MVCUnit: "N",
				Profile:     record.ForceProfile{Shape: "trapezoid", RestS: 1, RampUpS: 3, PlateauS: 10, RampDownS: 3},
				Force:       record.Signal{SamplingRateHz: 2048, Unit: "N", Values: []float64{0, 1.5, nan, 3}},
				ForceTarget: record.Signal{SamplingRateHz: 100, StartS: 0.5, Unit: "N", Values: []float64{0, 2}},
				Arrays: []record.Array{
					{
						Name: "ta_grid", Muscle: "tibialis anterior", Side: "right", Rows: 2, Columns: 3, IEDMm: 8,
						Gain: 150, ADCBits: 16, FilterLowHz: 10, FilterHighHz: 500, Montage: "monopolar", Reference: "ankle",
						SamplingRateHz: 2048, Unit: "uV", Channels: chans(2, 3), Samples: mk(9000, 6, false, 1),
						Decompositions: []record.Decomposition{
							{Name: "auto", Method: "blind source separation", MethodVersion: "2.1", Parameters: `{"iterations":50}`,
								Units:        []record.Unit{u1, u2, u3},
								ExtraColumns: []record.Column{{Name: "twitch_ms", Unit: "ms", Values: []float64{55, nan, 70}}, {Name: "comment", Text: []string{"a", "", "ç"}}},
								MUAPs:        &record.MUAPs{Units: 3, Channels: 6, Lags: 4, FirstLag: -2, Unit: "uV", Data: ramp(72)},
								Derived: &record.Derived{Software: "muarc test", Computed: time.Date(2026, 3, 16, 8, 0, 0, 0, time.UTC), Method: `{"plateau":"x"}`, ForceUnit: "N",
									Units: []record.DerivedUnit{{ID: 1, RecruitPctMVC: 4.5, DerecruitPctMVC: 3, RecruitForce: 14, DerecruitForce: nan, InitialRatePPS: 8, PlateauRatePPS: 14.5, PlateauISICoV: 0.12, PlateauISIs: 20},
										{ID: 7, RecruitPctMVC: nan, DerecruitPctMVC: nan, RecruitForce: nan, DerecruitForce: nan, InitialRatePPS: nan, PlateauRatePPS: nan, PlateauISICoV: nan},
										{ID: 3, RecruitPctMVC: 20, DerecruitPctMVC: 18, RecruitForce: 62.5, DerecruitForce: 56.25, InitialRatePPS: nan, PlateauRatePPS: nan, PlateauISICoV: nan, PlateauISIs: 1}},
									MUAPs: &record.MUAPs{Units: 3, Channels: 6, Lags: 3, FirstLag: -1, Unit: "uV", Data: ramp(54)}}},
							{Name: "edited", Method: "manual", EditedByHand: true, Parameters: "{}", Units: nil,
								Derived: &record.Derived{Software: "muarc test", Method: "{}"}},
						},
						Extra: record.Extra{"electrode_gel": "yes"},
					},
					{
						Name: "sol_grid", Muscle: "soleus", Rows: 1, Columns: 5, IEDMm: nan, Gain: nan, FilterLowHz: nan, FilterHighHz: nan,
						SamplingRateHz: 4096, StartS: -0.25, Unit: "mV", SampleType: record.Float64, Channels: chans(1, 5),
						Samples: mk(100, 5, true, 2),
					},
				},
			},
			{Name: "ramp_10", TargetPctMVC: nan, MVC: nan, Profile: record.ForceProfile{RestS: nan, RampUpS: nan, PlateauS: nan, RampDownS: nan},
				Arrays: []record.Array{{Name: "a", Rows: 1, Columns: 1, IEDMm: nan, Gain: nan, FilterLowHz: nan, FilterHighHz: nan, SamplingRateHz: 1000, Channels: chans(1, 1), Samples: mk(1, 1, false, 3)},
					countsArray("counts_grid", record.Int16, decimalScale(1907, -3, 4), 2000, 4),
					countsArray("bdf_grid", record.Int32, record.LinearScale(0.0596, -2.5), 700, 3)}},
		},
		Provenance: record.Provenance{
			Sources: []record.SourceFile{{Name: "S01/emg.csv", Role: "emg", SHA256: strings.Repeat("ab", 32), Bytes: 1234}},
			History: []record.Operation{{Action: "import", Software: "muarc test", Time: time.Date(2026, 3, 15, 1, 2, 3, 0, time.UTC), Details: `{"k":1}`}},
		},
	}
}

// countsArray is an array of integer samples (counts of a made-up
// quantum; fixture values, not check values).
func countsArray(name string, typ record.SampleType, sc record.CountScale, rows, cols int) record.Array {
	nan := math.NaN()
	lo, hi := typ.CountRange()
	m := &record.MemCounts{Samples: rows, Channels: cols, Counts: make([]int32, rows*cols), CountScale: sc}
	for i := range m.Counts {
		m.Counts[i] = int32(math.Round(math.Sin(float64(i)*0.013) * float64(min(hi, 1<<20))))
	}
	m.Counts[0], m.Counts[1] = int32(lo), int32(hi)
	var ch []record.Channel
	for c := 0; c < cols; c++ {
		ch = append(ch, record.Channel{Label: fmt.Sprintf("k%d", c), Row: 0, Column: c, XMm: nan, YMm: nan, Usable: true})
	}
	return record.Array{Name: name, Rows: 1, Columns: cols, IEDMm: nan, Gain: nan, FilterLowHz: nan, FilterHighHz: nan, SamplingRateHz: 2048,
		Unit: "uV", SampleType: typ, Scale: sc, Channels: ch, Samples: m}
}

func decimalScale(units, offset int64, decimals int) record.CountScale {
	s, err := record.DecimalScale(units, offset, decimals)
	if err != nil {
		panic(err)
	}
	return s
}

func ramp(n int) []float32 {
	out := make([]float32, n)
	for i := range out {
		out[i] = float32(i)*0.5 - 7
	}
	return out
}

// equalRec compares two recordings with NaN equal to NaN and samples bit
// for bit.
func equalRec(t *testing.T, want, got *record.Recording) {
	t.Helper()
	for ti := range want.Trials {
		for ai := range want.Trials[ti].Arrays {
			wa, ga := &want.Trials[ti].Arrays[ai], &got.Trials[ti].Arrays[ai]
			if wc, ok := wa.Samples.(*record.MemCounts); ok {
				gc, ok := ga.Samples.(*record.MemCounts)
				if !ok || !reflect.DeepEqual(wc, gc) || ga.SampleType != wa.SampleType {
					t.Fatalf("trial %d array %d counts differ (%s, read back %s)", ti, ai, wa.SampleType, ga.SampleType)
				}
			} else if wm, gm := wa.Samples.(*record.MemSamples), ga.Samples.(*record.MemSamples); !sameBits(wm, gm) {
				t.Fatalf("trial %d array %d samples differ", ti, ai)
			}
			for di := range wa.Decompositions {
				if !reflect.DeepEqual(wa.Decompositions[di].MUAPs, ga.Decompositions[di].MUAPs) {
					t.Fatalf("trial %d array %d decomposition %d MUAPs differ", ti, ai, di)
				}
				wd, gd := wa.Decompositions[di].Derived, ga.Decompositions[di].Derived
				if (wd == nil) != (gd == nil) {
					t.Fatalf("trial %d array %d decomposition %d derived: %v, read back %v", ti, ai, di, wd, gd)
				}
				if wd != nil {
					w, g := *wd, *gd
					if w.Units == nil {
						w.Units = []record.DerivedUnit{}
					}
					if !reflect.DeepEqual(w.MUAPs, g.MUAPs) {
						t.Fatalf("trial %d array %d decomposition %d derived MUAPs differ", ti, ai, di)
					}
					w.MUAPs, g.MUAPs = nil, nil
					if nanless(w) != nanless(g) {
						t.Fatalf("derived figures differ:\nwant %s\n got %s", nanless(w), nanless(g))
					}
				}
			}
		}
	}
	w, g := strip(want), strip(got)
	if !reflect.DeepEqual(w, g) {
		t.Fatalf("recordings differ:\nwant %+v\n got %+v", w, g)
	}
}

func sameBits(a, b *record.MemSamples) bool {
	if a.Samples != b.Samples || a.Channels != b.Channels || len(a.F32) != len(b.F32) || len(a.F64) != len(b.F64) {
		return false
	}
	for i := range a.F32 {
		if math.Float32bits(a.F32[i]) != math.Float32bits(b.F32[i]) {
			return false
		}
	}
	for i := range a.F64 {
		if math.Float64bits(a.F64[i]) != math.Float64bits(b.F64[i]) {
			return false
		}
	}
	return true
}

// strip copies a recording with samples removed and NaN replaced by a
// sentinel so reflect.DeepEqual can compare the rest.
func strip(r *record.Recording) any {
	c := *r
	c.LayoutVersion = ""
	c.Trials = nil
	for _, t := range r.Trials {
		t2 := t
		t2.Arrays = nil
		for _, a := range t.Arrays {
			a2 := a
			a2.Samples = nil
			if a2.SampleType == "" {
				a2.SampleType = record.Float32
			}
			a2.Decompositions = nil
			for _, d := range a.Decompositions {
				d2 := d
				d2.MUAPs, d2.Derived = nil, nil
				if d2.Units == nil {
					d2.Units = []record.Unit{}
				}
				for i := range d2.Units {
					if d2.Units[i].Discharges == nil {
						d2.Units[i].Discharges = []int64{}
					}
				}
				a2.Decompositions = append(a2.Decompositions, d2)
			}
			t2.Arrays = append(t2.Arrays, a2)
		}
		c.Trials = append(c.Trials, t2)
	}
	return nanless(c)
}

// nanless renders a value with fmt so NaN prints as "NaN" on both sides.
func nanless(v any) string { return strings.ReplaceAll(sprint(v), "NaN", "nan") }

func TestRoundTripModelFileModel(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "rec.h5")
	want := fixture()
	if err := Write(path, want, WriteOptions{ChunkRows: 1024, ChunkCols: 4}); err != nil {
		t.Fatal(err)
	}
	got, err := ReadAll(path)
	if err != nil {
		t.Fatal(err)
	}
	if got.LayoutVersion != schema.LayoutVersion {
		t.Fatalf("layout version %q", got.LayoutVersion)
	}
	equalRec(t, want, got)
	// Written again from what was read, the model is still the same.
	path2 := filepath.Join(dir, "rec2.h5")
	if err := Write(path2, got, WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	again, err := ReadAll(path2)
	if err != nil {
		t.Fatal(err)
	}
	equalRec(t, want, again)
}

func TestWriteRefusesExistingAndLeavesNoTemp(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "rec.h5")
	os.WriteFile(path, []byte("keep me"), 0o644)
	err := Write(path, fixture(), WriteOptions{})
	if err == nil || !strings.Contains(err.Error(), "--overwrite") {
		t.Fatalf("want refusal, got %v", err)
	}
	bad := fixture()
	bad.Trials[0].Arrays[0].Channels = bad.Trials[0].Arrays[0].Channels[:2]
	if err := Write(path, bad, WriteOptions{Overwrite: true}); !errors.Is(err, ErrInvalid) {
		t.Fatalf("want ErrInvalid, got %v", err)
	}
	// A source failing mid-stream leaves the old file and no temp file.
	fail := fixture()
	fail.Trials[0].Arrays[0].Samples = failing{}
	fail.Trials[0].Arrays[0].Channels = fail.Trials[0].Arrays[0].Channels[:6]
	if err := Write(path, fail, WriteOptions{Overwrite: true}); err == nil || !strings.Contains(err.Error(), "source broke") {
		t.Fatalf("want source error, got %v", err)
	}
	b, _ := os.ReadFile(path)
	ents, _ := os.ReadDir(dir)
	if string(b) != "keep me" || len(ents) != 1 {
		t.Fatalf("target changed or temp left: %q, %d entries", b, len(ents))
	}
}

type failing struct{}

func (failing) Shape() (int, int) { return 20000, 6 }
func (failing) ReadFloat32(start int, dst []float32) error {
	if start > 0 {
		return errors.New("source broke")
	}
	return nil
}
func (failing) ReadFloat64(int, []float64) error { return errors.New("source broke") }

func TestOpenRefusesNewerMajorVersion(t *testing.T) {
	py := needH5py(t)
	path := filepath.Join(t.TempDir(), "rec.h5")
	if err := Write(path, fixture(), WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	// h5py (Debian python3-h5py) edits the version attribute in place.
	if out, err := exec.Command(py, "-c", `import sys,h5py; f=h5py.File(sys.argv[1],"r+"); f.attrs["layout_version"]="2.0"; f.close()`, path).CombinedOutput(); err != nil {
		t.Fatalf("%v %s", err, out)
	}
	_, err := Open(path)
	if !errors.Is(err, ErrNewerLayout) || !strings.Contains(err.Error(), "upgrade muarc") {
		t.Fatalf("want a newer-layout refusal, got %v", err)
	}
}

func TestMetadataViewAndPaths(t *testing.T) {
	path := filepath.Join(t.TempDir(), "rec.h5")
	if err := Write(path, fixture(), WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	v, err := MetadataView(path)
	if err != nil {
		t.Fatal(err)
	}
	tr := v["trials"].([]any)[0].(map[string]any)
	ar := tr["arrays"].([]any)[0].(map[string]any)
	if v["layout"] != "muarc-recording" || tr["name"] != "ramp_30" || ar["channel_count"] != 6 || ar["samples"] != 9000 || ar["sample_type"] != "float32" {
		t.Fatalf("view: %v", v)
	}
	if _, ok := v["subject"].(map[string]any)["height_cm"]; ok {
		t.Fatal("NaN height should be left out of the view")
	}
	dec := ar["decompositions"].([]any)[0].(map[string]any)
	if dec["parameters"].(map[string]any)["iterations"] != 50.0 || dec["edited_by_hand"] != false {
		t.Fatalf("decomposition view: %v", dec)
	}
	u := dec["units"].([]any)[1].(map[string]any)
	if u["id"] != int64(7) || u["discharge_count"] != int64(0) || u["mean_rate_pps"] != 12.25 {
		t.Fatalf("unit row: %v", u)
	}
	if _, ok := u["silhouette"]; ok {
		t.Fatal("NaN silhouette should be left out")
	}
	for ptr, want := range map[string]string{
		"/trials/0/arrays/1/sampling_rate_hz":                "/trials/ramp_30/arrays/sol_grid@sampling_rate_hz",
		"/trials/0/arrays/0/channels/4/label":                "/trials/ramp_30/arrays/ta_grid/channels/label[4]",
		"/trials/0/arrays/0/decompositions/1/units/0/pnr_db": "/trials/ramp_30/arrays/ta_grid/decompositions/edited/units/pnr_db[0]",
		"/subject/birth_date":                                "/subject@birth_date",
		"/layout_version":                                    "/@layout_version",
		"/trials/1/force":                                    "/trials/ramp_10/force",
		"/trials/0/force/unit":                               "/trials/ramp_30/force@unit",
	} {
		if got := HDF5Path(v, ptr); got != want {
			t.Errorf("HDF5Path(%s) = %s, want %s", ptr, got, want)
		}
	}
}
