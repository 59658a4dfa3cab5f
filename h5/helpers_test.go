package h5

import (
	"os"
	"os/exec"
	"strconv"
	"testing"
)

// needH5py returns Debian's python3 with h5py. Under CI a missing h5py is a
// failure, never a skip; elsewhere the test is skipped.
func needH5py(t *testing.T) string {
	t.Helper()
	py := "/usr/bin/python3"
	if err := exec.Command(py, "-c", "import h5py").Run(); err != nil {
		if os.Getenv("CI") != "" {
			t.Fatalf("h5py (Debian python3-h5py) is required under CI: %v", err)
		}
		t.Skipf("h5py not available: %v", err)
	}
	return py
}

// fmtF prints a float32 as Python's repr(float(x)) does.
func fmtF(v float32) string {
	s := strconv.FormatFloat(float64(v), 'g', -1, 64)
	if _, err := strconv.Atoi(s); err == nil {
		s += ".0"
	}
	return s
}
