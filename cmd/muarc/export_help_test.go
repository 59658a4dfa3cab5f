package main

import (
	"strings"
	"testing"

	"muarc/convert"
)

// export --help must name every part "all" writes (convert.ExportKinds,
// what Export really writes), and the file each one goes to.
func TestExportHelpNamesEveryPart(t *testing.T) {
	out, _, code := runMuarc(t, t.TempDir(), "export", "--help")
	if code != 0 {
		t.Fatalf("export --help: exit %d", code)
	}
	for _, k := range convert.ExportKinds {
		if !strings.Contains(out, k) {
			t.Errorf("export --help does not name %q, which --what all writes", k)
		}
	}
	for _, f := range []string{"force.csv", "emg_<array>.csv", "discharges_<array>_<decomposition>.csv",
		"units_<array>_<decomposition>.csv", "muaps_<array>_<decomposition>.csv", "derived_units_<array>_<decomposition>.csv",
		"derived_muaps_<array>_<decomposition>.csv", "history.csv", "metadata.json"} {
		if !strings.Contains(out, f) {
			t.Errorf("export --help does not name the file %s", f)
		}
	}
}
