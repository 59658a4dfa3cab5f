package analysis

import (
	"encoding/json"
	"math"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"muarc/recfile"
	"muarc/synth"
)

// TestStoredFiguresReadBackByH5py stores the figures and templates of a
// generated recording (StoreDerived) with recfile and reads the derived
// table and templates back with h5py (Debian python3-h5py), a
// general-purpose HDF5 reader; the lab's unit table is read back unchanged.
func TestStoredFiguresReadBackByH5py(t *testing.T) {
	py := needPython(t, "h5py")
	gs, err := synth.Generate(synth.TestConfig())
	if err != nil {
		t.Fatal(err)
	}
	rec := gs[0].Recording
	tr := &rec.Trials[1]
	arr := &tr.Arrays[0]
	labRates := []float64{}
	for _, u := range arr.Decompositions[0].Units {
		labRates = append(labRates, u.MeanRatePPS)
	}
	res, tpl, err := ComputeFile(rec, true)
	if err != nil {
		t.Fatal(err)
	}
	st := make([]DecompositionStats, len(res))
	for i := range res {
		st[i] = res[i].DecompositionStats
	}
	if n, err := StoreDerived(rec, st, tpl, time.Now()); err != nil || n == 0 {
		t.Fatalf("stored %d templates: %v", n, err)
	}
	path := filepath.Join(t.TempDir(), "stored.h5")
	if err := recfile.Write(path, rec, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	dec := &arr.Decompositions[0]
	base := "/trials/" + tr.Name + "/arrays/" + arr.Name + "/decompositions/" + dec.Name
	out, err := exec.Command(py, "-c", `
import h5py, json, sys
f = h5py.File(sys.argv[1], "r")
g = f[sys.argv[2]]["derived"]
u = g["units"]
m = g["muaps"]
print(json.dumps({
  "recruit": [float(v) for v in u["recruit_pct_mvc"][:]],
  "mean_rate": [float(v) for v in u["plateau_rate_pps"][:]],
  "lab_rate": [float(v) for v in f[sys.argv[2]]["units/mean_rate_pps"][:]],
  "method": json.loads(g.attrs["method"]),
  "recruit_force_unit": u["recruit_force"].attrs["unit"].decode() if isinstance(u["recruit_force"].attrs["unit"], bytes) else str(u["recruit_force"].attrs["unit"]),
  "shape": list(m.shape), "first_lag": int(m.attrs["first_lag"]),
  "peak": float(m[0, :, -int(m.attrs["first_lag"])].max())}))
`, path, base).Output()
	if err != nil {
		t.Fatalf("h5py: %v", err)
	}
	var got struct {
		Recruit          []float64 `json:"recruit"`
		MeanRate         []float64 `json:"mean_rate"`
		LabRate          []float64 `json:"lab_rate"`
		Method           map[string]any
		RecruitForceUnit string `json:"recruit_force_unit"`
		Shape            []int
		FirstLag         int `json:"first_lag"`
		Peak             float64
	}
	if err := json.Unmarshal(out, &got); err != nil {
		t.Fatalf("%s: %v", out, err)
	}
	if len(got.Recruit) != len(dec.Units) || len(got.MeanRate) != len(dec.Units) {
		t.Fatalf("h5py sees %d units, want %d", len(got.Recruit), len(dec.Units))
	}
	for i, u := range dec.Derived.Units {
		if math.Abs(got.Recruit[i]-u.RecruitPctMVC) > 1e-12 || math.Abs(got.MeanRate[i]-u.PlateauRatePPS) > 1e-12 {
			t.Errorf("unit %d: h5py %v/%v, stored %v/%v", u.ID, got.Recruit[i], got.MeanRate[i], u.RecruitPctMVC, u.PlateauRatePPS)
		}
		if got.LabRate[i] != labRates[i] && !(math.IsNaN(labRates[i]) && math.IsNaN(got.LabRate[i])) {
			t.Errorf("unit %d: the lab's mean rate became %v, was %v", u.ID, got.LabRate[i], labRates[i])
		}
	}
	if got.Method["plateau_rate"] == nil {
		t.Errorf("method beside the figures: %v", got.Method)
	}
	if !strings.EqualFold(got.RecruitForceUnit, "N") {
		t.Errorf("recruit_force unit %q", got.RecruitForceUnit)
	}
	m := dec.Derived.MUAPs
	if len(got.Shape) != 3 || got.Shape[0] != m.Units || got.Shape[1] != m.Channels || got.Shape[2] != m.Lags || got.FirstLag != m.FirstLag {
		t.Errorf("muaps shape %v first_lag %d, want [%d %d %d] %d", got.Shape, got.FirstLag, m.Units, m.Channels, m.Lags, m.FirstLag)
	}
	var want float64 = math.Inf(-1)
	for c := 0; c < m.Channels; c++ {
		want = math.Max(want, float64(m.At(0, c, -m.FirstLag)))
	}
	if math.Abs(got.Peak-want) > 1e-4 {
		t.Errorf("template peak via h5py %v, want %v", got.Peak, want)
	}
}
