package record

import "testing"

// The rule is ours (documented in LAYOUT.md): the last decomposition
// edited by hand, else the last one.
func TestReportedDecomposition(t *testing.T) {
	for _, c := range []struct {
		edited []bool
		want   int
	}{
		{nil, -1},
		{[]bool{false}, 0},
		{[]bool{false, false}, 1},
		{[]bool{true, false}, 0},
		{[]bool{false, true, false}, 1},
		{[]bool{true, true, false}, 1},
	} {
		ds := make([]Decomposition, len(c.edited))
		for i, e := range c.edited {
			ds[i].EditedByHand = e
		}
		if got := ReportedDecomposition(ds); got != c.want {
			t.Errorf("%v: got %d, want %d", c.edited, got, c.want)
		}
	}
}
