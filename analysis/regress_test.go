package analysis

import (
	"encoding/json"
	"math"
	"muarc/internal/reftest"
	"os/exec"
	"strings"
	"testing"
)

// referencePython is Debian's interpreter, which has python3-numpy and
// python3-scipy (not the pyenv python3 first on PATH).
const referencePython = "/usr/bin/python3"

// needPython returns the interpreter, skipping the test when it or the
// module is missing, or failing it under CI.
func needPython(t *testing.T, module string) string { return reftest.NeedPython(t, module) }

// TestLinearFitAgainstSciPy checks slope, intercept and R^2 against
// scipy.stats.linregress (rvalue squared) and numpy.polyfit(deg=1), a
// second implementation from Debian's python3-scipy / python3-numpy, on the
// same points (a plausible rate-versus-threshold scatter, NaN pairs left
// out on both sides).
func TestLinearFitAgainstSciPy(t *testing.T) {
	py := needPython(t, "scipy.stats")
	x := []float64{2.1, 4.8, 7.5, 9.9, 13.2, 15.0, 18.7, 22.4, 25.1, math.NaN(), 28.3}
	y := []float64{24.3, 22.9, 22.5, 20.1, 19.8, 17.2, 16.9, 15.5, math.NaN(), 12.0, 13.1}
	got := LinearFit(x, y)
	var px, py2 []float64
	for i := range x {
		if !math.IsNaN(x[i]) && !math.IsNaN(y[i]) {
			px, py2 = append(px, x[i]), append(py2, y[i])
		}
	}
	in, _ := json.Marshal(map[string]any{"x": px, "y": py2})
	script := `
import json, sys, numpy, scipy.stats
d = json.load(sys.stdin)
r = scipy.stats.linregress(d["x"], d["y"])
p = numpy.polyfit(d["x"], d["y"], 1)
print(json.dumps({"slope": r.slope, "intercept": r.intercept, "r2": r.rvalue**2,
                  "pslope": p[0], "pintercept": p[1], "n": len(d["x"])}))
`
	cmd := exec.Command(py, "-c", script)
	cmd.Stdin = strings.NewReader(string(in))
	out, err := cmd.Output()
	if err != nil {
		t.Fatalf("python: %v", err)
	}
	var ref struct {
		Slope, Intercept, R2, PSlope, PIntercept float64
		N                                        int
	}
	if err := json.Unmarshal(out, &ref); err != nil {
		t.Fatalf("python output %q: %v", out, err)
	}
	if got.N != ref.N || got.N != 9 {
		t.Errorf("n %d, scipy %d", got.N, ref.N)
	}
	near(t, "slope vs linregress", got.Slope, ref.Slope, 1e-12)
	near(t, "intercept vs linregress", got.Intercept, ref.Intercept, 1e-10)
	near(t, "R^2 vs linregress", got.R2, ref.R2, 1e-12)
	near(t, "slope vs polyfit", got.Slope, ref.PSlope, 1e-10)
	near(t, "intercept vs polyfit", got.Intercept, ref.PIntercept, 1e-9)
}

func TestLinearFitDegenerate(t *testing.T) {
	if f := LinearFit([]float64{1}, []float64{2}); f.N != 1 || !math.IsNaN(f.Slope) {
		t.Errorf("one point: %+v", f)
	}
	if f := LinearFit([]float64{3, 3, 3}, []float64{1, 2, 3}); !math.IsNaN(f.Slope) {
		t.Errorf("equal x: %+v", f)
	}
	if f := LinearFit([]float64{1, 2, 3}, []float64{5, 5, 5}); f.Slope != 0 || f.Intercept != 5 || !math.IsNaN(f.R2) {
		t.Errorf("equal y: %+v", f)
	}
}
