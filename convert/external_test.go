package convert

import (
	"fmt"
	"math/rand"
	"muarc/internal/reftest"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"muarc/recfile"
)

// needPython returns Debian's python3 when it has numpy and h5py; without
// them the test fails under CI and is skipped otherwise.
func needPython(t *testing.T) string { return reftest.NeedPython(t, "numpy", "h5py") }

// TestImportAgainstNumpyAndH5py reads the same text with numpy (loadtxt, and
// rint(t * rate) for discharge times) and the imported file with h5py; the
// samples must agree bit for bit as float32 and the discharge indices
// exactly.
func TestImportAgainstNumpyAndH5py(t *testing.T) {
	py := needPython(t)
	dir := t.TempDir()
	rng := rand.New(rand.NewSource(3))
	var b strings.Builder
	b.WriteString("# exported by a test\ntime [s],c1 [uV],c2 [uV],c3 [uV]\n")
	for i := 0; i < 3000; i++ {
		fmt.Fprintf(&b, "%.6f,%.3f,%.2f,%.4f\n", float64(i)/1000, rng.NormFloat64()*50, rng.NormFloat64()*20, rng.NormFloat64())
	}
	emg := filepath.Join(dir, "emg_arr.csv")
	os.WriteFile(emg, []byte(b.String()), 0o644)
	b.Reset()
	b.WriteString("unit,time [s]\n")
	for u := 1; u <= 3; u++ {
		for k := 0; k < 20; k++ {
			fmt.Fprintf(&b, "%d,%.6f\n", u, 0.1*float64(k)+0.0123*float64(u)+rng.Float64()*1e-5)
		}
	}
	dis := filepath.Join(dir, "discharges_arr_auto.csv")
	os.WriteFile(dis, []byte(b.String()), 0o644)
	out := filepath.Join(dir, "out.h5")
	if _, err := ImportRecording(Inputs{Dir: dir, EMG: []string{emg}, Discharges: []string{dis}}, out, recfile.WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	script := `
import sys, numpy as np, h5py
emg, dis, out = sys.argv[1:4]
want = np.loadtxt(emg, delimiter=",", comments="#", skiprows=2)[:, 1:].astype(np.float32)
with h5py.File(out, "r") as f:
    a = f["/trials/trial_1/arrays/arr"]
    got = a["samples"][()]
    assert got.dtype == np.float32, got.dtype
    assert got.shape == want.shape, (got.shape, want.shape)
    assert (got.view(np.uint32) == want.view(np.uint32)).all(), "samples differ"
    rate = a.attrs["sampling_rate_hz"]
    d = a["decompositions/auto"]
    off = d["discharge_offsets"][()]
    idx = d["discharges"][()]
    ids = d["units/id"][()]
    table = np.loadtxt(dis, delimiter=",", skiprows=1)
    for k, u in enumerate(ids):
        times = table[table[:, 0] == u, 1]
        exp = np.rint(times * rate).astype(np.int64)
        assert (idx[off[k]:off[k+1]] == np.sort(exp)).all(), ("unit", u)
print("ok")
`
	cmd := exec.Command(py, "-c", script, emg, dis, out)
	res, err := cmd.CombinedOutput()
	if err != nil || strings.TrimSpace(string(res)) != "ok" {
		t.Fatalf("numpy/h5py check: %v\n%s", err, res)
	}
}
