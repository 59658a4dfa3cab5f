package convert

import (
	"math"
	"muarc/record"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
)

// FuzzParseNumber checks the fast number reader against the Go standard
// library's strconv.ParseFloat (correctly rounded, 64 and 32 bits) on every
// cell both accept.
func FuzzParseNumber(f *testing.F) {
	for _, s := range []string{"0", "-0.000488", "12.345678", "1e-45", "9007199254740993", "NaN", "", "1.5e308", "abc", "-", "0.1000"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		n, k := parseNumber([]byte(s), false)
		want, err := strconv.ParseFloat(s, 64)
		if k != cellNumber {
			return
		}
		if err != nil {
			if ne, ok := err.(*strconv.NumError); ok && ne.Err == strconv.ErrRange {
				if math.Float64bits(n.v) != math.Float64bits(want) {
					t.Fatalf("%q: %v, strconv %v", s, n.v, want)
				}
				return
			}
			// Words strconv takes (inf, infinity) we read as well; others
			// must not be accepted.
			if _, ok := infValue([]byte(s)); !ok {
				t.Fatalf("%q accepted, strconv refuses: %v", s, err)
			}
			return
		}
		if math.Float64bits(n.v) != math.Float64bits(want) && !(math.IsNaN(n.v) && math.IsNaN(want)) {
			t.Fatalf("%q: %v, strconv %v", s, n.v, want)
		}
		w32, _ := strconv.ParseFloat(s, 32)
		if got := toF32(&n, []byte(s), false); math.Float32bits(got) != math.Float32bits(float32(w32)) && !math.IsNaN(w32) {
			t.Fatalf("%q: float32 %v, strconv %v", s, got, float32(w32))
		}
		// A float32 judged exact must print back to the digits written.
		f32 := toF32(&n, []byte(s), false)
		if f32Exact(&n, f32) && n.digits > 0 && n.digits <= 19 && !math.IsInf(float64(f32), 0) && !printsBack(&n, float64(f32), 32) {
			t.Fatalf("%q: judged exact in float32 but %v does not print back", s, f32)
		}
	})
}

// FuzzScanSignals feeds arbitrary text to both passes: an error or a
// consistent result, never a panic; the second pass gives as many rows as
// the first found.
func FuzzScanSignals(f *testing.F) {
	seeds := []string{
		"time [s],a [uV],b [uV]\n0,1,2\n0.001,3,4\n",
		"\xef\xbb\xbfrate: 100 Hz\r\n\r\ntime;x\r\n0;1,5\r\n0,01;2,5\r\n",
		"# c\n1 2 3\n4 5 6\n",
		"sample\tA\n0\t1\n1\t2\n",
		"time [s],a\n0,1\n0.001,\n0.003,NaN\n",
		"a,b\n1,2\n3\n",
		"",
	}
	for _, s := range seeds {
		f.Add(s, 1000.0, true)
	}
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, text string, rate float64, gaps bool) {
		p := filepath.Join(dir, "f.csv")
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		s, err := ScanSignals(p, SignalOptions{RateHz: math.Abs(rate), AllowGaps: gaps})
		if err != nil {
			return
		}
		if s.Samples > 10_000_000 {
			return // a huge gap; too big to read back here
		}
		if err := s.Decide(); err != nil {
			if AsParseError(err) == nil {
				t.Fatalf("not a ParseError: %v", err)
			}
			return
		}
		if s.Samples > 10_000_000 {
			return // a huge gap; too big to read back here
		}
		cols, err := s.Columns()
		if err != nil {
			t.Fatalf("second pass failed after a good first pass: %v", err)
		}
		if len(cols) != len(s.Labels) || len(cols[0]) != s.Samples {
			t.Fatalf("shape %d x %d, want %d x %d", len(cols), len(cols[0]), len(s.Labels), s.Samples)
		}
	})
}

func fuzzFile(dir, text string) string {
	p := filepath.Join(dir, "f.csv")
	os.WriteFile(p, []byte(text), 0o644)
	return p
}

// FuzzReadDischarges: any text gives an error or units whose discharges are
// sorted sample indices inside the grid.
func FuzzReadDischarges(f *testing.F) {
	for _, s := range []string{
		"unit,time [s]\n1,0.5\n1,0.75\n2,0.1\n",
		"MU1,MU2\n0.1,0.2\n0.3,\n",
		"1,10,20,30\n2,15\n3,40,41\n",
		"u1,u2\n0,1\n1,0\n0,0\n",
		"unit,sample (1-based)\n1,1\n1,1000\n",
		"unit,time [ms]\n3,999.9\n",
		"",
		"MU1: 0.1 0.2 0.3\nMU 2: 0.15 0.25\n",
		"MU13;0,0107;0,0212\nMU14;0,0301\n",
		"\xef\xbb\xbf# comment\r\nsampling rate: 1000 Hz\r\n\"MU 1, left\"\t\"MU \"\"2\"\"\"\r\n0.1\t0.2\r\n\t0.3\r\n",
		"MU20 (ms)\n1.5\n4\n100.5\n",
		"unit,t1 (ms),t2 (ms)\n1,100,250\n2,120\n",
		"0.1 0.2 0.3\n0.15 0.25\n",
		"1,0.512\n1,0.633\n2,0.301\n",
		"a,b\n\"\n",
	} {
		f.Add(s)
	}
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, text string) {
		g := Grid{RateHz: 1000, Samples: 1000}
		path := fuzzFile(dir, text)
		dc, err := ReadDischarges(path, g, DischargeOptions{FirstIndex: -1})
		if err != nil {
			if AsParseError(err) == nil {
				t.Fatalf("not a ParseError: %v", err)
			}
			return
		}
		// The reading detection chose, given as options, stores the same.
		opt := DischargeOptions{TextOptions: TextOptions{Delimiter: dc.Delimiter, DecimalComma: yesNo(dc.DecimalComma), Header: yesNo(dc.Header)},
			Shape: dc.Shape, TimeBase: dc.TimeBase, FirstIndex: dc.FirstIndex}
		if dc.Shape == ShapeLines {
			opt.Labels = yesNo(dc.Labels)
		}
		again, err := ReadDischarges(path, g, opt)
		if err != nil || !sameUnits(again.Units, dc.Units) {
			t.Fatalf("given the detected reading (%s): %v", dc.Reading, err)
		}
		seen := map[int64]bool{}
		labels := map[string]bool{}
		for i, u := range dc.Units {
			if seen[u.ID] || u.ID != int64(i+1) {
				t.Fatalf("unit %d at %d", u.ID, i)
			}
			if u.Label != "" && labels[u.Label] {
				t.Fatalf("label %q twice", u.Label)
			}
			labels[u.Label] = true
			seen[u.ID] = true
			for i, k := range u.Discharges {
				if k < 0 || k >= int64(g.Samples) || i > 0 && k < u.Discharges[i-1] {
					t.Fatalf("unit %d: discharges %v", u.ID, u.Discharges)
				}
			}
		}
	})
}

// FuzzReadUnitTable: an error or one unit per row with distinct ids and
// extra columns as long as the unit list.
func FuzzReadUnitTable(f *testing.F) {
	for _, s := range []string{
		"unit,SIL,PNR [dB],accuracy [%],CoV ISI,recruitment [%MVC],mean rate [pps],notes\n1,0.9,30,95,0.1,5,12,ok\n2,0.8,,90,0.2,7,10,\n",
		"id;sil;roa [%]\n1;0,9;80\n",
		"unit,SIL\n1,0.9\n1,0.8\n",
		"SIL\n0.9\n",
	} {
		f.Add(s)
	}
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, text string) {
		ut, err := ReadUnitTable(fuzzFile(dir, text), UnitTableOptions{})
		if err != nil {
			if AsParseError(err) == nil {
				t.Fatalf("not a ParseError: %v", err)
			}
			return
		}
		seen := map[int64]bool{}
		for _, u := range ut.Units {
			if seen[u.ID] {
				t.Fatalf("unit %d twice", u.ID)
			}
			seen[u.ID] = true
		}
		for _, c := range ut.Extra {
			if len(c.Values)+len(c.Text) != len(ut.Units) {
				t.Fatalf("column %s: %d values for %d units", c.Name, len(c.Values)+len(c.Text), len(ut.Units))
			}
		}
	})
}

// FuzzReadSidecar: JSON and YAML sidecars give a sidecar or an error that
// says where; never a panic.
func FuzzReadSidecar(f *testing.F) {
	f.Add(`{"study":{"id":"X"},"subject":{"id":"S1"},"session":{},"trials":[{"name":"t1"}]}`, true)
	f.Add("study: {id: X}\nsubject: {id: S1, age_years: 31}\nsession: {date: 2026-03-14}\ntrials:\n  - name: t1\n", false)
	f.Add(`{"study":{},"subject":{},"session":{},"trials":[{"name":"bad name!"}]}`, true)
	f.Add("[1, 2", false)
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, text string, isJSON bool) {
		name := "m.yaml"
		if isJSON {
			name = "m.json"
		}
		p := filepath.Join(dir, name)
		os.WriteFile(p, []byte(text), 0o644)
		sc, err := ReadSidecar(p)
		if err != nil {
			if AsParseError(err) == nil {
				t.Fatalf("no place given: %v", err)
			}
			return
		}
		rec := &record.Recording{}
		sc.Apply(rec)
	})
}

// FuzzLoadProfile: a profile or an error, never a panic.
func FuzzLoadProfile(f *testing.F) {
	f.Add("name: x\nfiles:\n  emg: \"{trial}/e_{array}.txt\"\nsignals: {delimiter: tab, rate_hz: 2048}\n")
	f.Add("units:\n  columns: {\"my SIL\": silhouette}\n")
	f.Add("files: {emg: \"{bogus}\"}\n")
	f.Add("discharges: {shape: spiral}\n")
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, text string) {
		p := filepath.Join(dir, "p.yaml")
		os.WriteFile(p, []byte(text), 0o644)
		if _, err := LoadProfile(p); err != nil && AsParseError(err) == nil {
			t.Fatalf("not a ParseError: %v", err)
		}
	})
}

// FuzzRowCells checks the row parser (its fast path and its general path)
// against strconv.ParseFloat cell by cell, in float64 and float32, with
// comma, semicolon + decimal comma and tab delimiters.
func FuzzRowCells(f *testing.F) {
	f.Add("-0.123456", "12.5", "7", byte(0))
	f.Add("1,25", "-3,5", "", byte(1))
	f.Add("1e-3", " 2.000000 ", "NaN", byte(2))
	f.Add("9007199254740993", "0.000000000000000000001", "-0", byte(0))
	f.Fuzz(func(t *testing.T, a, b, c string, kind byte) {
		d, comma := byte(','), false
		switch kind % 3 {
		case 1:
			d, comma = ';', true
		case 2:
			d = '\t'
		}
		cells := []string{a, b, c}
		for _, x := range cells {
			if strings.ContainsAny(x, ",;\t\n\r\"") && !(comma && strings.Count(x, ",") == 1 && !strings.ContainsAny(x, ";\t\n\r\"")) {
				return
			}
		}
		line := []byte(strings.Join(cells, string(d)))
		for _, mode := range []blockMode{mode64, mode32} {
			sp := &blockSpec{file: "f", d: Dialect{Delimiter: d, DecimalComma: comma}, cols: 3, tcol: -1, mode: mode, all32: true}
			blk := &block{}
			blk.reset()
			err := sp.row(blk, trimLine(line, d), 1)
			anyText := false
			for _, x := range cells {
				// Text, and numbers float64 does not hold, are refused.
				if n, k := parseNumber([]byte(trimCell(x)), comma); k == cellText || n.rng != rangeOK {
					anyText = true
				}
			}
			if anyText != (err != nil) {
				t.Fatalf("%q: text %v, error %v", line, anyText, err)
			}
			if err != nil {
				return
			}
			for i, x := range cells {
				if i == 0 {
					x = strings.TrimLeft(x, " \t")
				}
				x = trimCell(x)
				if comma {
					x = strings.Replace(x, ",", ".", 1)
				} else if strings.Contains(x, ",") {
					return
				}
				_, kind := parseNumber([]byte(trimCell(cells[i])), comma)
				want, perr := strconv.ParseFloat(x, 64)
				if x == "" || kind == cellNaN {
					want = math.NaN()
				} else if perr != nil && perr.(*strconv.NumError).Err != strconv.ErrRange {
					if _, ok := infValue([]byte(x)); !ok {
						t.Fatalf("%q: strconv refuses %q", line, x)
					}
					continue
				}
				if mode == mode64 {
					if g := blk.f64[i]; math.Float64bits(g) != math.Float64bits(want) && !(math.IsNaN(g) && math.IsNaN(want)) {
						t.Fatalf("%q cell %d: %v, strconv %v", line, i, g, want)
					}
				} else {
					w32, _ := strconv.ParseFloat(x, 32)
					if math.IsNaN(want) {
						w32 = want
					}
					if g := blk.f32[i]; math.Float32bits(g) != math.Float32bits(float32(w32)) && !(g != g && math.IsNaN(w32)) {
						t.Fatalf("%q cell %d: %v, strconv %v", line, i, g, float32(w32))
					}
				}
			}
		}
	})
}

func trimCell(x string) string { return strings.Trim(x, " \t\r") }
