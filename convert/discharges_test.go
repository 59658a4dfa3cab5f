package convert

import (
	"strings"
	"testing"
)

func TestDischargeShapesAndBases(t *testing.T) {
	g := Grid{RateHz: 1000, Samples: 2000}
	cases := []struct {
		name, text, shape, base string
		first                   int
		want                    map[int64][]int64
	}{
		{"long seconds", "unit,time [s]\n1,0.5\n1,0.25\n2,1.0\n", ShapeLong, "s", 0, map[int64][]int64{1: {250, 500}, 2: {1000}}},
		{"columns ms", "MU1,MU2\n100.5,3.0\n200.0,\n", ShapeColumns, "ms", 0, map[int64][]int64{1: {101, 200}, 2: {3}}},
		{"lines samples 1-based", "1,1,2000\n2,5\n", ShapeLines, "samples", 1, map[int64][]int64{1: {0, 1999}, 2: {4}}},
		{"matrix", "unit 1,unit 2\n" + strings.Repeat("0,0\n", 5) + "1,0\n" + strings.Repeat("0,1\n", 1) + strings.Repeat("0,0\n", 1993), ShapeMatrix, "samples", 0, map[int64][]int64{1: {5}, 2: {6}}},
	}
	for _, c := range cases {
		dc, err := ReadDischarges(writeTemp(t, "d.csv", c.text), g, DischargeOptions{FirstIndex: -1})
		if err != nil {
			t.Errorf("%s: %v", c.name, err)
			continue
		}
		if dc.Shape != c.shape || dc.TimeBase != c.base || (c.base == "samples" && dc.FirstIndex != c.first) {
			t.Errorf("%s: shape %s base %s first %d (%s; %s)", c.name, dc.Shape, dc.TimeBase, dc.FirstIndex, dc.ShapeWhy, dc.IndexWhy)
		}
		for _, u := range dc.Units {
			if w := c.want[u.ID]; len(w) != len(u.Discharges) || (len(w) > 0 && (w[0] != u.Discharges[0] || w[len(w)-1] != u.Discharges[len(w)-1])) {
				t.Errorf("%s: unit %d: %v want %v", c.name, u.ID, u.Discharges, w)
			}
		}
		if len(dc.Units) != len(c.want) {
			t.Errorf("%s: %d units", c.name, len(dc.Units))
		}
	}
	// 100.5 ms is half a sample off the 1 kHz grid: reported.
	dc, _ := ReadDischarges(writeTemp(t, "d.csv", "MU1,MU2\n100.5,3.0\n200.0,\n"), g, DischargeOptions{FirstIndex: -1})
	if dc.OffGrid != 1 || dc.WorstOffGrid != 0.5 {
		t.Errorf("off grid %d %v", dc.OffGrid, dc.WorstOffGrid)
	}
}

func TestDischargeErrors(t *testing.T) {
	g := Grid{RateHz: 1000, Samples: 2000}
	cases := []struct {
		name, text, msg string
		line, col       int
	}{
		{"after end", "unit,time [s]\n1,0.5\n1,2.5\n", "after the end", 3, 2},
		{"duplicate", "1,10,20\n1,30\n", "duplicate unit id 1", 2, 1},
		{"text", "unit,time [s]\n1,abc\n", "text \"abc\"", 2, 2},
		{"ragged long", "unit,time [s]\n1,0.5,3\n", "expected 2", 2, 3},
		{"empty", "", "no table", 0, 0},
	}
	for _, c := range cases {
		_, err := ReadDischarges(writeTemp(t, "d.csv", c.text), g, DischargeOptions{FirstIndex: -1})
		pe := AsParseError(err)
		if pe == nil || !strings.Contains(pe.Msg, c.msg) || pe.Line != c.line || pe.Column != c.col || pe.Hint == "" {
			t.Errorf("%s: %+v", c.name, pe)
		}
	}
}

func TestUnitTable(t *testing.T) {
	p := writeTemp(t, "u.csv", "unit,SIL,PNR [dB],accuracy [%],ISI CoV,recruitment threshold [%MVC],DERT [%MVC],IDR [pps],mean rate [pps],recruitment [N],site\n3,0.91,31.5,96.1,0.12,4.5,3.9,8.2,11.0,12.5,deep\n7,0.88,,92,0.2,10,9,7.5,10.1,30,superficial\n")
	ut, err := ReadUnitTable(p, UnitTableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(ut.Units) != 2 || ut.Units[0].ID != 3 || ut.Units[0].PNRdB != 31.5 || ut.Units[1].PNRdB == ut.Units[1].PNRdB ||
		ut.Units[1].DerecruitPctMVC != 9 || ut.Units[0].InitialRatePPS != 8.2 || ut.Units[1].ISICoV != 0.2 {
		t.Fatalf("%+v", ut.Units)
	}
	if len(ut.Extra) != 2 || ut.Extra[0].Name != "recruitment" || ut.Extra[0].Unit != "N" || ut.Extra[0].Values[1] != 30 || ut.Extra[1].Text[1] != "superficial" {
		t.Fatalf("%+v", ut.Extra)
	}
	_, err = ReadUnitTable(writeTemp(t, "u.csv", "unit,SIL\n1,0.9\n1,0.8\n"), UnitTableOptions{})
	if pe := AsParseError(err); pe == nil || pe.Line != 3 || !strings.Contains(pe.Msg, "duplicate unit id 1") {
		t.Fatalf("%v", err)
	}
}
