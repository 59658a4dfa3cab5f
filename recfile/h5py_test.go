package recfile

import (
	"os/exec"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"muarc/record"
	"muarc/schema"
)

// TestGeneralPurposeReaderAgrees reads a muarc file with h5py (Debian
// python3-h5py), the reference, using only what LAYOUT.md documents, and
// checks samples, force, the discharges of unit k and the unit table.
func TestGeneralPurposeReaderAgrees(t *testing.T) {
	py := needH5py(t)
	path := filepath.Join(t.TempDir(), "rec.h5")
	rec := fixture()
	if err := Write(path, rec, WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(py, "-c", `
import sys, h5py, numpy as np
f = h5py.File(sys.argv[1], "r")
a = f["trials/ramp_30/arrays/ta_grid"]
s = a["samples"]
print(s.shape[0], s.shape[1], s.dtype, a.attrs["sampling_rate_hz"])
print(" ".join(repr(float(x)) for x in s[8999, :]))
print(" ".join(repr(float(x)) for x in s[:, 4][::1000]))
fo = f["trials/ramp_30/force"]
print(" ".join(repr(float(x)) for x in fo[()]), fo.attrs["unit"])
d = a["decompositions/auto"]
off = d["discharge_offsets"][()]
k = 2
print(" ".join(str(x) for x in d["discharges"][off[k]:off[k+1]]))
u = d["units"]
print(list(u["id"][()]), list(u["discharge_count"][()]), [repr(float(x)) for x in u["silhouette"][()]])
print(list(u["label"].asstr()[()]))
print(list(f["trials"].keys()), list(a["decompositions"].keys()))
print(f.attrs["layout"], f.attrs["layout_version"], f["subject"].attrs["name"])
`, path).CombinedOutput()
	if err != nil {
		t.Fatalf("h5py: %v\n%s", err, out)
	}
	lines := strings.Split(strings.TrimSpace(string(out)), "\n")
	m := rec.Trials[0].Arrays[0].Samples.(*record.MemSamples)
	expect := []string{
		"9000 6 float32 2048.0",
		join(m.F32[8999*6 : 9000*6]),
		join(stride(m.F32, 4, 6, 1000)),
		"0.0 1.5 nan 3.0 N",
		"5 6000",
		"[1, 7, 3] [3, 0, 2] ['0.93', 'nan', 'nan']",
		`['MU 1', '', '1.5 "split", é']`, // the labels as written, unicode kept (LAYOUT.md, since 1.1)
		"['ramp_30', 'ramp_10'] ['auto', 'edited']",
		"muarc-recording " + schema.LayoutVersion + " Ada Zyxwvut", // the version this build writes
	}
	if len(lines) != len(expect) {
		t.Fatalf("h5py printed %d lines:\n%s", len(lines), out)
	}
	for i := range expect {
		if lines[i] != expect[i] {
			t.Errorf("line %d: h5py %q, want %q", i, lines[i], expect[i])
		}
	}
}

func join(v []float32) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = pyRepr(x)
	}
	return strings.Join(s, " ")
}

func stride(v []float32, col, cols, step int) []float32 {
	var out []float32
	for r := 0; r*cols+col < len(v); r += step {
		out = append(out, v[r*cols+col])
	}
	return out
}

// pyRepr prints a float32 widened to float64 as Python's repr does.
func pyRepr(x float32) string {
	s := strconv.FormatFloat(float64(x), 'g', -1, 64)
	if !strings.ContainsAny(s, ".en") {
		s += ".0"
	}
	if strings.Contains(s, "e") {
		// Python writes 1e-05 as 1e-05 and 1.5e+20 as 1.5e+20; Go agrees
		// except for the two-digit exponent minimum.
		mant, exp, _ := strings.Cut(s, "e")
		sign := exp[0]
		digits := exp[1:]
		if len(digits) < 2 {
			digits = "0" + digits
		}
		s = mant + "e" + string(sign) + digits
	}
	return s
}

// TestLayout10LabelColumnIsExtra makes a file of layout 1.0 with h5py (the
// reference writer: the version attribute set back to 1.0) and checks the
// rule of LAYOUT.md: in a 1.0 file units have no label and a column named
// label is an extra column.
func TestLayout10LabelColumnIsExtra(t *testing.T) {
	py := needH5py(t)
	path := filepath.Join(t.TempDir(), "rec.h5")
	if err := Write(path, fixture(), WriteOptions{}); err != nil {
		t.Fatal(err)
	}
	out, err := exec.Command(py, "-c", `
import sys, h5py
f = h5py.File(sys.argv[1], "r+")
f.attrs["layout_version"] = "1.0"
f.close()
`, path).CombinedOutput()
	if err != nil {
		t.Fatalf("h5py: %v\n%s", err, out)
	}
	got, err := ReadAll(path)
	if err != nil {
		t.Fatal(err)
	}
	d := got.Trials[0].Arrays[0].Decompositions[0]
	if d.Units[0].Label != "" || d.Units[0].Name() != "1" {
		t.Errorf("1.0 file: label %q name %q, want empty and the id", d.Units[0].Label, d.Units[0].Name())
	}
	found := false
	for _, c := range d.ExtraColumns {
		if c.Name == "label" && len(c.Text) == 3 && c.Text[0] == "MU 1" {
			found = true
		}
	}
	if !found {
		t.Errorf("1.0 file: label column not kept as an extra column: %+v", d.ExtraColumns)
	}
}
