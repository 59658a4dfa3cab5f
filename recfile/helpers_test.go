package recfile

import (
	"fmt"
	"testing"

	"muarc/internal/reftest"
)

// needH5py returns Debian's python3 with h5py (fails under CI when absent).
func needH5py(t *testing.T) string { return reftest.NeedPython(t, "h5py") }

func sprint(v any) string { return fmt.Sprintf("%+v", v) }
