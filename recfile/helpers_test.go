package recfile

import (
	"fmt"
	"os"
	"os/exec"
	"testing"
)

// needH5py returns Debian's python3 with h5py. Under CI a missing h5py is a
// failure, never a skip.
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

func sprint(v any) string { return fmt.Sprintf("%+v", v) }
