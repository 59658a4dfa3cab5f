package convert

import (
	"fmt"
	"slices"
	"strings"
	"testing"
)

// want is the stored outcome of a discharge file: labels in order and each
// unit's sample indices. Expected values are worked out by hand from the
// file text and the grid (round(t * rate) for seconds, round(t / 1000 *
// rate) for ms, index - first for samples).
type want struct {
	labels []string
	trains [][]int64
}

func readDis(t *testing.T, text string, g Grid, opt DischargeOptions) (*Discharges, *ParseError) {
	t.Helper()
	if opt.FirstIndex == 0 && opt.TimeBase == "" {
		opt.FirstIndex = -1
	}
	dc, err := ReadDischarges(writeTemp(t, "d.csv", text), g, opt)
	if err != nil {
		pe := AsParseError(err)
		if pe == nil {
			t.Fatalf("not a ParseError: %v", err)
		}
		return nil, pe
	}
	return dc, nil
}

func checkUnits(t *testing.T, name string, dc *Discharges, w want) {
	t.Helper()
	if dc == nil {
		t.Errorf("%s: refused, want %d units", name, len(w.labels))
		return
	}
	if len(dc.Units) != len(w.labels) {
		t.Errorf("%s: %d units, want %d (%s)", name, len(dc.Units), len(w.labels), dc.Reading)
		return
	}
	for i, u := range dc.Units {
		if u.ID != int64(i+1) || u.Label != w.labels[i] || !slices.Equal(u.Discharges, w.trains[i]) {
			t.Errorf("%s: unit %d: id %d label %q %v, want id %d label %q %v (%s)", name, i, u.ID, u.Label, u.Discharges, i+1, w.labels[i], w.trains[i], dc.Reading)
		}
	}
}

// refused checks a refusal: exit-2 kind (a ParseError) at a line, naming
// every option in names.
func refused(t *testing.T, name string, pe *ParseError, line int, names ...string) {
	t.Helper()
	if pe == nil {
		t.Errorf("%s: read, want a refusal", name)
		return
	}
	if pe.Line != line {
		t.Errorf("%s: refused at line %d, want %d: %v", name, pe.Line, line, pe)
	}
	for _, n := range names {
		if !strings.Contains(pe.Error(), n) {
			t.Errorf("%s: refusal does not name %q: %v", name, n, pe)
		}
	}
}

var g2048 = Grid{RateHz: 2048, Samples: 20480} // 10 s at 2048 Hz

// Case 1: lines of times without labels. The first time must not become
// a unit id: either every time is kept or the file is refused.
func TestDischargeLinesWithoutLabels(t *testing.T) {
	text := "0.100098 0.2 0.35\n0.5 0.61 0.72\n"
	_, pe := readDis(t, text, g2048, DischargeOptions{})
	refused(t, "seconds", pe, 1, "--labels no", "--labels yes")
	dc, _ := readDis(t, text, g2048, DischargeOptions{Shape: ShapeLines, Labels: "no"})
	// 0.100098 s * 2048 = 205.0007, 0.2 * 2048 = 409.6, 0.35 * 2048 = 716.8 ...
	checkUnits(t, "seconds --labels no", dc, want{[]string{"", ""}, [][]int64{{205, 410, 717}, {1024, 1249, 1475}}})

	text = "205 410 615\n300 500\n"
	_, pe = readDis(t, text, g2048, DischargeOptions{})
	refused(t, "samples", pe, 1, "--labels")
	dc, _ = readDis(t, text, g2048, DischargeOptions{Shape: ShapeLines, Labels: "no", TimeBase: "samples", FirstIndex: 0})
	checkUnits(t, "samples given", dc, want{[]string{"", ""}, [][]int64{{205, 410, 615}, {300, 500}}})
}

// Case 2: lines of equal length without labels are not transposed, and
// labelled lines with more units than times keep their labels.
func TestDischargeLinesNotColumns(t *testing.T) {
	text := "0.1 0.2 0.3\n0.15 0.25 0.35\n"
	_, pe := readDis(t, text, g2048, DischargeOptions{})
	refused(t, "equal lines", pe, 1, "--shape")
	dc, _ := readDis(t, text, g2048, DischargeOptions{Shape: ShapeLines, Labels: "no"})
	checkUnits(t, "equal lines given", dc, want{[]string{"", ""}, [][]int64{{205, 410, 614}, {307, 512, 717}}})

	// 10 units of 3 times each; unit k fires at 0.9-0.05k, 1.4-0.05k and
	// 1.9-0.05k s (later units earlier, as a file sorted by label is).
	var b strings.Builder
	w := want{}
	for k := 1; k <= 10; k++ {
		fmt.Fprintf(&b, "%d", k)
		var tr []int64
		for j := 0; j < 3; j++ {
			ts := 0.9 - 0.05*float64(k) + 0.5*float64(j)
			fmt.Fprintf(&b, ",%.4f", ts)
			tr = append(tr, int64(ts*2048+0.5))
		}
		b.WriteString("\n")
		w.labels = append(w.labels, fmt.Sprint(k))
		w.trains = append(w.trains, tr)
	}
	dc, pe = readDis(t, b.String(), g2048, DischargeOptions{})
	if pe != nil {
		t.Fatalf("labelled lines: %v", pe)
	}
	checkUnits(t, "labelled lines", dc, w)
}

// Case 3: a long table without a header: labels stay labels.
func TestDischargeLongWithoutHeader(t *testing.T) {
	text := "1,0.512\n1,0.633\n2,0.301\n2,0.422\n3,1.25\n"
	dc, pe := readDis(t, text, g2048, DischargeOptions{})
	if pe != nil {
		t.Fatal(pe)
	}
	// 0.512*2048 = 1048.6, 0.633*2048 = 1296.4, 0.301*2048 = 616.4,
	// 0.422*2048 = 864.3, 1.25*2048 = 2560.
	checkUnits(t, "long seconds", dc, want{[]string{"1", "2", "3"}, [][]int64{{1049, 1296}, {616, 864}, {2560}}})
	if dc.Shape != ShapeLong {
		t.Errorf("shape %s", dc.Shape)
	}
	// In sample indices "1,205" is also a unit of two discharges: refused.
	_, pe = readDis(t, "1,205\n1,410\n2,300\n2,555\n", g2048, DischargeOptions{})
	refused(t, "long samples", pe, 1, "--shape long")
}

// Case 4: labels are kept as written and ids are 1..N in file order.
func TestDischargeLabelsAsWritten(t *testing.T) {
	text := "unit,time [s]\n1.5,0.5\n2.5,0.75\n2.0,1.0\nMU01,1.5\n1.5,0.6\n"
	dc, pe := readDis(t, text, g2048, DischargeOptions{})
	if pe != nil {
		t.Fatal(pe)
	}
	checkUnits(t, "labels", dc, want{[]string{"1.5", "2.5", "2.0", "MU01"}, [][]int64{{1024, 1229}, {1536}, {2048}, {3072}}})
}

// Case 9: whole-number milliseconds are not read as samples, and an index
// equal to the sample count does not make a file 1-based.
func TestDischargeMillisecondsAndFirstIndex(t *testing.T) {
	text := "MU1,MU2\n512,300\n1024,650\n1536,\n"
	_, pe := readDis(t, text, g2048, DischargeOptions{})
	refused(t, "whole ms", pe, 2, "--time-base ms", "--time-base samples")
	dc, _ := readDis(t, text, g2048, DischargeOptions{TimeBase: "ms"})
	// 512 ms * 2.048 = 1048.6, 300 ms = 614.4, 650 ms = 1331.2, 1536 ms = 3145.7
	checkUnits(t, "ms given", dc, want{[]string{"MU1", "MU2"}, [][]int64{{1049, 2097, 3146}, {614, 1331}}})

	text = "unit,sample\n1,100\n1,20480\n2,300\n"
	_, pe = readDis(t, text, g2048, DischargeOptions{})
	refused(t, "stray index", pe, 3, "--first-index 1")
	// An index 0 is conclusive for 0-based.
	dc, pe = readDis(t, "unit,sample\n1,0\n1,100\n2,300\n", g2048, DischargeOptions{})
	if pe != nil {
		t.Fatal(pe)
	}
	checkUnits(t, "index 0", dc, want{[]string{"1", "2"}, [][]int64{{0, 100}, {300}}})
	// Without one, both counts fit: refused.
	_, pe = readDis(t, "unit,sample\n1,5\n1,100\n2,300\n", g2048, DischargeOptions{})
	refused(t, "no index 0", pe, 2, "--first-index")
	// A header mark decides.
	dc, _ = readDis(t, "unit,sample (1-based)\n1,5\n1,100\n2,300\n", g2048, DischargeOptions{})
	checkUnits(t, "1-based mark", dc, want{[]string{"1", "2"}, [][]int64{{4, 99}, {299}}})
}

// Case 16: a lines file with decimal commas keeps its first unit.
func TestDischargeDecimalCommaLines(t *testing.T) {
	dc, pe := readDis(t, "MU13;0,0107;0,0212;0,5\nMU14;0,0301;0,0455\n", g2048, DischargeOptions{})
	if pe != nil {
		t.Fatal(pe)
	}
	// 0.0107*2048 = 21.9, 0.0212*2048 = 43.4, 0.0301*2048 = 61.6, 0.0455*2048 = 93.2
	checkUnits(t, "decimal comma", dc, want{[]string{"MU13", "MU14"}, [][]int64{{22, 43, 1024}, {62, 93}}})
}

// Case 17: one column headed with a space and a unit; labels with spaces.
func TestDischargeHeaderWithSpaces(t *testing.T) {
	dc, pe := readDis(t, "MU20 (ms)\n1.953125\n4.39453125\n100.5\n", g2048, DischargeOptions{})
	if pe != nil {
		t.Fatal(pe)
	}
	// 1.953125 ms * 2.048 = 4, 4.39453125 ms = 9, 100.5 ms = 205.8
	checkUnits(t, "MU20 (ms)", dc, want{[]string{"MU20"}, [][]int64{{4, 9, 206}}})

	text := "MU 4 [samples]\n205\n410\n"
	_, pe = readDis(t, text, g2048, DischargeOptions{})
	refused(t, "MU 4 [samples]", pe, 2, "--first-index")
	dc, _ = readDis(t, text, g2048, DischargeOptions{FirstIndex: 0, TimeBase: "samples"})
	checkUnits(t, "MU 4 given", dc, want{[]string{"MU 4"}, [][]int64{{205, 410}}})

	dc, pe = readDis(t, "MU 7,0.1,0.2\nMU 8,0.15\n", g2048, DischargeOptions{})
	if pe != nil {
		t.Fatal(pe)
	}
	checkUnits(t, "MU 7 lines", dc, want{[]string{"MU 7", "MU 8"}, [][]int64{{205, 410}, {307}}})
}

// Case 18: a lines header with ms on every time column.
func TestDischargeLinesHeaderUnits(t *testing.T) {
	dc, pe := readDis(t, "unit,t1 (ms),t2 (ms),t3 (ms)\n1,100,250,400\n2,120,300\n", g2048, DischargeOptions{})
	if pe != nil {
		t.Fatal(pe)
	}
	// 100 ms = 204.8, 250 ms = 512, 400 ms = 819.2, 120 ms = 245.8, 300 ms = 614.4
	checkUnits(t, "t1 (ms)", dc, want{[]string{"1", "2"}, [][]int64{{205, 512, 819}, {246, 614}}})
	if dc.TimeBase != "ms" {
		t.Errorf("time base %s", dc.TimeBase)
	}
}

// The common "MU1: t1 t2 ..." form, with a preamble read and named.
func TestDischargeColonForm(t *testing.T) {
	dc, pe := readDis(t, "sampling rate: 2048 Hz\n# exported by hand\nMU1: 0.1 0.2 0.3\nMU2: 0.15 0.25\r\nMU 3:\n", g2048, DischargeOptions{})
	if pe != nil {
		t.Fatal(pe)
	}
	checkUnits(t, "colon", dc, want{[]string{"MU1", "MU2", "MU 3"}, [][]int64{{205, 410, 614}, {307, 512}, {}}})
	notes := strings.Join(dc.Notes, "\n")
	if !strings.Contains(notes, `"sampling rate: 2048 Hz" read and not stored`) || !strings.Contains(notes, "1 comment lines") {
		t.Errorf("notes do not name what was not stored:\n%s", notes)
	}
	_, pe = readDis(t, "fs: 2048\nMU1: 0.1 0.2\n", g2048, DischargeOptions{})
	refused(t, "setting or unit", pe, 1, "comment")
}

func TestDischargeShapesAndBases(t *testing.T) {
	g := Grid{RateHz: 1000, Samples: 2000}
	// Times out of order within a unit: sorted, with a note.
	dc, pe := readDis(t, "unit,time [s]\n1,0.5\n1,0.25\n2,1.0\n", g, DischargeOptions{})
	if pe != nil {
		t.Fatal(pe)
	}
	checkUnits(t, "long seconds", dc, want{[]string{"1", "2"}, [][]int64{{250, 500}, {1000}}})
	if !strings.Contains(strings.Join(dc.Notes, " "), "out of order") {
		t.Errorf("notes %v", dc.Notes)
	}
	dc, _ = readDis(t, "MU1,MU2\n100.5,3.0\n200.0,\n", g, DischargeOptions{})
	checkUnits(t, "columns ms", dc, want{[]string{"MU1", "MU2"}, [][]int64{{101, 200}, {3}}})
	// 100.5 ms is half a sample off the 1 kHz grid: reported.
	if dc != nil && (dc.OffGrid != 1 || dc.WorstOffGrid != 0.5) {
		t.Errorf("off grid %d %v", dc.OffGrid, dc.WorstOffGrid)
	}
	dc, _ = readDis(t, "1,1,2000\n2,5\n", g, DischargeOptions{Labels: "yes", FirstIndex: 1})
	checkUnits(t, "lines 1-based given", dc, want{[]string{"1", "2"}, [][]int64{{0, 1999}, {4}}})
	dc, _ = readDis(t, "unit 1,unit 2\n"+strings.Repeat("0,0\n", 5)+"1,0\n0,1\n"+strings.Repeat("0,0\n", 1993), g, DischargeOptions{})
	checkUnits(t, "matrix", dc, want{[]string{"unit 1", "unit 2"}, [][]int64{{5}, {6}}})
}

func TestDischargeErrors(t *testing.T) {
	g := Grid{RateHz: 1000, Samples: 2000}
	cases := []struct {
		name, text, msg string
		opt             DischargeOptions
		line, col       int
	}{
		{"after end", "unit,time [s]\n1,0.5\n1,2.5\n", "after the end", DischargeOptions{}, 3, 2},
		{"duplicate", "1,10,20\n1,30\n", `unit label "1" also names the unit on line 1`, DischargeOptions{Shape: ShapeLines, Labels: "yes"}, 2, 1},
		{"text", "unit,time [s]\n1,abc\n", "text \"abc\"", DischargeOptions{Shape: ShapeLong}, 2, 2},
		{"ragged long", "unit,time [s]\n1,0.5,3\n", "expected 2", DischargeOptions{Shape: ShapeLong}, 2, 3},
		{"infinite", "unit,time [s]\n1,inf\n", "not a finite time", DischargeOptions{Shape: ShapeLong}, 2, 2},
		{"empty", "", "no table", DischargeOptions{}, 0, 0},
	}
	for _, c := range cases {
		_, pe := readDis(t, c.text, g, c.opt)
		if pe == nil || !strings.Contains(pe.Msg, c.msg) || pe.Line != c.line || pe.Column != c.col || pe.Hint == "" {
			t.Errorf("%s: %+v", c.name, pe)
		}
	}
}

func TestUnitTable(t *testing.T) {
	p := writeTemp(t, "u.csv", "unit,SIL,PNR [dB],accuracy [%],ISI CoV,recruitment threshold [%MVC],DERT [%MVC],IDR [pps],mean rate [pps],recruitment [N],site\n3,0.91,31.5,96.1,0.12,4.5,3.9,8.2,11.0,12.5,deep\nMU 07,0.88,,92,0.2,10,9,7.5,10.1,30,superficial\n")
	ut, err := ReadUnitTable(p, UnitTableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(ut.Units) != 2 || ut.Units[0].Label != "3" || ut.Units[1].Label != "MU 07" || ut.Units[0].PNRdB != 31.5 || ut.Units[1].PNRdB == ut.Units[1].PNRdB ||
		ut.Units[1].DerecruitPctMVC != 9 || ut.Units[0].InitialRatePPS != 8.2 || ut.Units[1].ISICoV != 0.2 {
		t.Fatalf("%+v", ut.Units)
	}
	if len(ut.Extra) != 2 || ut.Extra[0].Name != "recruitment" || ut.Extra[0].Unit != "N" || ut.Extra[0].Values[1] != 30 || ut.Extra[1].Text[1] != "superficial" {
		t.Fatalf("%+v", ut.Extra)
	}
	_, err = ReadUnitTable(writeTemp(t, "u.csv", "unit,SIL\n1,0.9\n1,0.8\n"), UnitTableOptions{})
	if pe := AsParseError(err); pe == nil || pe.Line != 3 || !strings.Contains(pe.Msg, `duplicate unit "1"`) {
		t.Fatalf("%v", err)
	}
}
