package h5

import (
	"strconv"
	"testing"

	"muarc/internal/reftest"
)

// needH5py returns Debian's python3 with h5py (fails under CI when absent).
func needH5py(t *testing.T) string { return reftest.NeedPython(t, "h5py") }

// fmtF prints a float32 as Python's repr(float(x)) does.
func fmtF(v float32) string {
	s := strconv.FormatFloat(float64(v), 'g', -1, 64)
	if _, err := strconv.Atoi(s); err == nil {
		s += ".0"
	}
	return s
}
