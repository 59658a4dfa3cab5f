package convert

import (
	"fmt"
	"math"
	"math/rand"
	"os"
	"path/filepath"
	"runtime"
	"strconv"
	"strings"
	"testing"

	"muarc/recfile"
)

// Regression tests: each input once stored changed values with exit 0; now
// it is read exactly or refused with its place.

func scanText(t *testing.T, text string, opt SignalOptions) (*Signals, error) {
	t.Helper()
	p := writeTemp(t, "in.csv", text)
	s, err := ScanSignals(p, opt)
	if err != nil {
		return nil, err
	}
	return s, s.Decide()
}

// A sampling rate line that is not a finite positive number is refused
// naming that line (it was stored as NaN, every discharge then as the
// smallest int64).
func TestPreambleRateNotFinite(t *testing.T) {
	for _, v := range []string{"NaN Hz", "Inf Hz", "-Inf Hz", "nan", "0 Hz", "-2048 Hz", "2048 kHz"} {
		_, err := scanText(t, "subject: S1\nsampling rate: "+v+"\na,b\n1,2\n3,4\n", SignalOptions{})
		pe := AsParseError(err)
		if pe == nil || pe.Line != 2 || !strings.Contains(pe.Msg, strconv.Quote(v)) || !strings.Contains(pe.Hint, "--rate") {
			t.Errorf("%q: got %v", v, err)
		}
	}
	_, err := scanText(t, "a,b\n1,2\n", SignalOptions{RateHz: math.NaN()})
	if pe := AsParseError(err); pe == nil || !strings.Contains(pe.Msg, "--rate") {
		t.Errorf("NaN --rate: %v", err)
	}
}

// A start line is honoured in its unit or refused, never ignored (500 ms
// was stored as 0 s).
func TestPreambleStart(t *testing.T) {
	for _, c := range []struct {
		line string
		want float64
	}{{"start: 500 ms", 0.5}, {"start: 0.5 s", 0.5}, {"start: 0.5s", 0.5}, {"start [ms]: 250", 0.25}, {"start_s: 1.25", 1.25}, {"start: 0", 0}, {"start time: -20 ms", -0.02}} {
		s, err := scanText(t, c.line+"\nsampling rate: 2048 Hz\na,b\n1,2\n3,4\n", SignalOptions{})
		if err != nil || s.StartS != c.want {
			t.Errorf("%q: start %v, %v", c.line, s, err)
		}
	}
	for _, bad := range []string{"start: 500", "start: soon", "start: NaN s", "start [ms]: 5 s"} {
		_, err := scanText(t, bad+"\nsampling rate: 2048 Hz\na,b\n1,2\n", SignalOptions{})
		if pe := AsParseError(err); pe == nil || pe.Line != 1 || !strings.Contains(pe.Hint, "500 ms") {
			t.Errorf("%q: got %v", bad, err)
		}
	}
	// A start line and a time column that disagree are refused.
	_, err := scanText(t, "start: 500 ms\nsampling rate: 1000 Hz\ntime [s],a\n0,1\n0.001,2\n", SignalOptions{})
	if pe := AsParseError(err); pe == nil || pe.Line != 1 || !strings.Contains(pe.Msg, "starts at 0 s") {
		t.Errorf("disagreeing start: %v", err)
	}
	s, err := scanText(t, "start: 500 ms\nsampling rate: 1000 Hz\ntime [s],a\n0.5,1\n0.501,2\n", SignalOptions{})
	if err != nil || s.StartS != 0.5 {
		t.Errorf("agreeing start: %v %v", s, err)
	}
}

// Infinity words, overflow and underflow are refused with the cell's place
// unless AllowOutOfRange (1e400 was stored as +Inf, 1e-400 as 0).
func TestOutOfRangeCells(t *testing.T) {
	for _, c := range []struct {
		cell, msg string
		want      float64
	}{
		{"1e400", "beyond the largest float64", math.Inf(1)},
		{"-1e400", "beyond the largest float64", math.Inf(-1)},
		{"1e-400", "below the smallest float64", 0},
		{"inf", "an infinity", math.Inf(1)},
		{"-Infinity", "an infinity", math.Inf(-1)},
	} {
		text := "sampling rate: 100 Hz\na,b\n1,2\n3," + c.cell + "\n"
		_, err := scanText(t, text, SignalOptions{})
		pe := AsParseError(err)
		if pe == nil || pe.Line != 4 || pe.Column != 2 || !strings.Contains(pe.Msg, c.msg) || !strings.Contains(pe.Hint, "--allow-out-of-range") {
			t.Errorf("%s: got %v", c.cell, err)
			continue
		}
		s, err := scanText(t, text, SignalOptions{AllowOutOfRange: true})
		if err != nil {
			t.Fatal(err)
		}
		cols, err := s.Columns()
		if err != nil || cols[1][1] != c.want {
			t.Errorf("%s allowed: %v %v", c.cell, cols, err)
		}
	}
	// A time cell is never allowed out of range.
	_, err := scanText(t, "time [s],a\n0,1\ninf,2\n", SignalOptions{AllowOutOfRange: true, RateHz: 10})
	if pe := AsParseError(err); pe == nil || pe.Line != 3 || pe.Column != 1 {
		t.Errorf("inf time: %v", err)
	}
	// 1e-320 is a subnormal float64, not zero: it is kept.
	s, err := scanText(t, "sampling rate: 100 Hz\na\n1e-320\n", SignalOptions{})
	if err != nil {
		t.Fatal(err)
	}
	cols, _ := s.Columns()
	if want, _ := strconv.ParseFloat("1e-320", 64); cols[0][0] != want {
		t.Errorf("subnormal %v", cols[0][0])
	}
}

// timeRows writes n rows k/rate seconds to dec decimals.
func timeRows(n int, rate float64, dec int) string {
	var b strings.Builder
	b.WriteString("time [s],a\n")
	for k := 0; k < n; k++ {
		fmt.Fprintf(&b, "%.*f,%d\n", dec, float64(k)/rate, k%7)
	}
	return b.String()
}

// 26 rows at 4096 Hz to 5 decimals were stored as 4095 Hz with a report
// claiming a fit that three rows contradict. The grid starts at the first
// row (the start time stored), and on it only 4096 Hz puts every row
// within half a written digit (checked row by row below, outside the
// hull); a time column that fits several rates is refused naming them.
func TestRateFromShortTimeColumn(t *testing.T) {
	text := timeRows(26, 4096, 5)
	fitsRows := func(r float64) bool {
		for k := 0; k < 26; k++ {
			w, _ := strconv.ParseFloat(fmt.Sprintf("%.5f", float64(k)/4096), 64)
			if math.Abs(w-float64(k)/r) > 0.5e-5*(1+1e-6) {
				return false
			}
		}
		return true
	}
	if !fitsRows(4096) || fitsRows(4095) || fitsRows(4097) {
		t.Fatal("the rows do not single out 4096 Hz; the test premise is wrong")
	}
	s, err := scanText(t, text, SignalOptions{})
	if err != nil || s.RateHz != 4096 || !strings.Contains(s.RateWhy, "only rate with 0 decimals") {
		t.Fatalf("%v %v", s, err)
	}
	_, err = scanText(t, timeRows(5, 4096, 5), SignalOptions{})
	if pe := AsParseError(err); pe == nil || !strings.Contains(pe.Msg, "fits the 5 rows") || !strings.Contains(pe.Hint, "--rate") {
		t.Fatalf("5 rows: %v", err)
	}
	s, err = scanText(t, text, SignalOptions{DefaultRateHz: 4096})
	if err != nil || s.RateHz != 4096 || !strings.Contains(s.RateWhy, "metadata") {
		t.Fatalf("with the metadata's rate: %v %v", s, err)
	}
	_, err = scanText(t, text, SignalOptions{DefaultRateHz: 4000})
	if pe := AsParseError(err); pe == nil || !strings.Contains(pe.Msg, "metadata says 4000 Hz") {
		t.Fatalf("wrong metadata rate: %v", err)
	}
	s, err = scanText(t, timeRows(8192, 4096, 6), SignalOptions{})
	if err != nil || s.RateHz != 4096 {
		t.Fatalf("two seconds: %v %v", s, err)
	}
}

// Property of the rule: whenever a rate is derived, every row lies within
// half a written digit of its place on that grid (checked row by row).
func TestDerivedRateFitsEveryRow(t *testing.T) {
	rng := rand.New(rand.NewSource(7))
	rates := []float64{512, 1000, 2000, 2048, 2222, 4096, 5000, 10240, 1234.5}
	derived := 0
	for i := 0; i < 60; i++ {
		rate := rates[rng.Intn(len(rates))]
		n := 2 + rng.Intn(3000)
		dec := 3 + rng.Intn(5)
		text := timeRows(n, rate, dec)
		s, err := scanText(t, text, SignalOptions{})
		if err != nil {
			if AsParseError(err) == nil {
				t.Fatal(err)
			}
			continue
		}
		derived++
		half := 0.5 * math.Pow(10, -float64(dec)) * (1 + 1e-6)
		for k, line := range strings.Split(strings.TrimSpace(text), "\n")[1:] {
			w, _ := strconv.ParseFloat(line[:strings.IndexByte(line, ',')], 64)
			if math.Abs(w-(s.StartS+float64(k)/s.RateHz)) > half {
				t.Fatalf("rate %v (true %v, %d rows, %d decimals) misses row %d: %s", s.RateHz, rate, n, dec, k, s.RateWhy)
			}
		}
	}
	if derived == 0 {
		t.Fatal("no rate derived at all")
	}
}

// Quoted cells in a unit table follow RFC 4180 (section 2.6-2.7): they
// were cut at the first quote, and a line break or "" with a delimiter
// inside quotes was refused as a ragged row. Export writes them back so
// that they read the same again.
func TestUnitTableQuotedCells(t *testing.T) {
	text := "unit,sil,comment,site\r\n" +
		"1,0.9,\"box 3 said \"\"ok\"\" twice\",a\r\n" +
		"2,0.8,\"two\nlines, and \"\"a;b\"\"\",\"b, c\"\r\n" +
		"# a comment between rows\r\n" +
		"3,,  plain text  ,\"\"\r\n"
	p := writeTemp(t, "units.csv", text)
	ut, err := ReadUnitTable(p, UnitTableOptions{})
	if err != nil {
		t.Fatal(err)
	}
	// Python's csv module reads the same text to these cells (checked with
	// /usr/bin/python3 -c 'import csv; print(list(csv.reader(open(p, newline=""))))').
	want := [][]string{{"box 3 said \"ok\" twice", "two\nlines, and \"a;b\"", "  plain text  "}, {"a", "b, c", ""}}
	if len(ut.Units) != 3 || len(ut.Extra) != 2 {
		t.Fatalf("%d units, extra %+v", len(ut.Units), ut.Extra)
	}
	for k, c := range ut.Extra {
		for i, w := range want[k] {
			if c.Text[i] != w {
				t.Errorf("column %s row %d: %q, want %q", c.Name, i, c.Text[i], w)
			}
		}
	}
	for _, bad := range []struct{ text, msg string }{
		{"unit,c\n1,\"open\n2,x\n", "never closed"},
		{"unit,c\n1,\"a\"b\n", "after a closing quote"},
		{"unit,c\n1,a\"b\n", "inside an unquoted cell"},
	} {
		_, err := ReadUnitTable(writeTemp(t, "u.csv", bad.text), UnitTableOptions{})
		if pe := AsParseError(err); pe == nil || pe.Line != 2 || pe.Column != 2 || !strings.Contains(pe.Msg, bad.msg) {
			t.Errorf("%q: %v", bad.text, err)
		}
	}
}

// A sidecar nested 40,000 deep (an 80 KB file) took about 1.7 GB before it
// was refused; now it is refused at the stated depth having allocated far
// less than 64 MiB (runtime.MemStats.TotalAlloc bounds the peak).
func TestSidecarNestingBounded(t *testing.T) {
	for _, c := range []struct{ name, text string }{
		{"deep.json", `{"study": ` + strings.Repeat("[", 40000) + strings.Repeat("]", 40000) + "}"},
		{"deep.yaml", "study: " + strings.Repeat("[", 40000) + strings.Repeat("]", 40000) + "\n"},
		{"deepmap.json", strings.Repeat(`{"a":`, 20000) + "1" + strings.Repeat("}", 20000)},
	} {
		p := writeTemp(t, c.name, c.text)
		var before, after runtime.MemStats
		runtime.GC()
		runtime.ReadMemStats(&before)
		_, err := ReadSidecar(p)
		runtime.ReadMemStats(&after)
		if err == nil || !strings.Contains(err.Error(), "nested deeper than 64 levels") {
			t.Errorf("%s: %v", c.name, err)
		}
		if got := after.TotalAlloc - before.TotalAlloc; got > 64<<20 {
			t.Errorf("%s: allocated %d MiB", c.name, got>>20)
		}
	}
}

// A headerless EMG file whose first column is time was stored with the time
// as channel 1. Now a first column rising by one step on every row is time
// only on conclusive evidence, else refused naming both readings.
func TestHeaderlessFirstColumnTime(t *testing.T) {
	rows := "0.000,5,6\n0.001,7,8\n0.002,9,1\n0.003,2,3\n"
	_, err := scanText(t, rows, SignalOptions{RateHz: 1000})
	pe := AsParseError(err)
	if pe == nil || pe.Line != 1 || pe.Column != 1 || !strings.Contains(pe.Hint, "--time-column first") || !strings.Contains(pe.Hint, "--time-column none") {
		t.Fatalf("got %v", err)
	}
	// "channels: 2" leaves the first column out and 0.001 s is one sample
	// at 1000 Hz: time in seconds.
	s, err := scanText(t, "channels: 2\n"+rows, SignalOptions{RateHz: 1000})
	if err != nil || s.tcol != 0 || s.TimeUnit != "s" || len(s.Labels) != 2 || s.StartS != 0 {
		t.Fatalf("%v %v", s, err)
	}
	// The same in ms at 500 Hz; at 1000 Hz a step of 1 is one sample in
	// ms and in samples alike, so it is refused.
	s, err = scanText(t, "channels: 2\nsampling rate: 500 Hz\n0,5,6\n2,7,8\n4,9,1\n", SignalOptions{})
	if err != nil || s.TimeUnit != "ms" {
		t.Fatalf("%v %v", s, err)
	}
	_, err = scanText(t, "channels: 2\nsampling rate: 1000 Hz\n0,5,6\n1,7,8\n2,9,1\n", SignalOptions{})
	if pe := AsParseError(err); pe == nil || !strings.Contains(pe.Msg, "in ms and samples alike") {
		t.Fatalf("%v", err)
	}
	// "channels: 3" counts it: a channel.
	s, err = scanText(t, "channels: 3\n"+rows, SignalOptions{RateHz: 1000})
	if err != nil || s.tcol != -1 || len(s.Labels) != 3 {
		t.Fatalf("%v %v", s, err)
	}
	// Given: no question.
	s, err = scanText(t, rows, SignalOptions{RateHz: 1000, TimeColumn: "none"})
	if err != nil || len(s.Labels) != 3 {
		t.Fatalf("%v %v", s, err)
	}
	s, err = scanText(t, rows, SignalOptions{RateHz: 1000, TimeColumn: "first", TimeUnit: "s"})
	if err != nil || len(s.Labels) != 2 {
		t.Fatalf("%v %v", s, err)
	}
	// A first column that does not step evenly is a channel.
	s, err = scanText(t, "0.5,5\n0.2,7\n0.9,9\n", SignalOptions{RateHz: 1000})
	if err != nil || len(s.Labels) != 2 {
		t.Fatalf("%v %v", s, err)
	}
	// A time column whose header gives no unit: s, ms or samples by its
	// step at the known rate, else refused (it was assumed to be seconds).
	s, err = scanText(t, "sampling rate: 500 Hz\nZeit,a\n0,1\n2,2\n4,3\n", SignalOptions{TimeColumn: "Zeit"})
	if err != nil || s.TimeUnit != "ms" {
		t.Fatalf("%v %v", s, err)
	}
	_, err = scanText(t, "Zeit,a\n0,1\n2,2\n4,3\n", SignalOptions{TimeColumn: "Zeit"})
	if pe := AsParseError(err); pe == nil || !strings.Contains(pe.Hint, "--time-unit") {
		t.Fatalf("%v", err)
	}
}

// Found by the differential test: one column of decimal-comma numbers
// without a header ("-14,5") was read as two whole-number columns.
func TestCommaOrDecimalComma(t *testing.T) {
	text := "sampling rate: 100 Hz\n-14,5\n81,76044\n-1,9066516e+03\n"
	_, err := scanText(t, text, SignalOptions{})
	if pe := AsParseError(err); pe == nil || pe.Line != 2 || !strings.Contains(pe.Msg, `"-14,5"`) || !strings.Contains(pe.Hint, "--decimal-comma yes") {
		t.Fatalf("%v", err)
	}
	s, err := scanText(t, text, SignalOptions{TextOptions: TextOptions{Delimiter: ' ', DecimalComma: "yes"}})
	if err != nil || len(s.Labels) != 1 {
		t.Fatalf("%v %v", s, err)
	}
	if cols, _ := s.Columns(); cols[0][0] != -14.5 || cols[0][2] != -1906.6516 {
		t.Errorf("%v", cols)
	}
	s, err = scanText(t, text, SignalOptions{TextOptions: TextOptions{Delimiter: ','}})
	if err != nil || len(s.Labels) != 2 {
		t.Fatalf("%v %v", s, err)
	}
	// A tab-delimited row of empty cells is a row, not a blank line.
	s, err = scanText(t, "sampling rate: 100 Hz\na\tb\n1\t2\n\t\n3\t4\n", SignalOptions{})
	if err != nil || s.Rows != 3 {
		t.Fatalf("%v %v", s, err)
	}
}

// The example printed by muarc schema --example is a valid sidecar.
func TestExampleSidecarIsValid(t *testing.T) {
	p := writeTemp(t, "metadata.json", string(ExampleSidecar))
	sc, err := ReadSidecar(p)
	if err != nil {
		t.Fatal(err)
	}
	for _, k := range []string{"study", "subject", "session", "trials"} {
		if sc.View[k] == nil {
			t.Errorf("no %s", k)
		}
	}
}

// Sidecar problems come in file order, a missing top-level part first.
func TestSidecarProblemOrder(t *testing.T) {
	p := writeTemp(t, "metadata.json", "{\n \"study\": {\"id\": \"S\"},\n \"subject\": {\"sex\": \"F\",\n  \"birth_date\": \"14.03.1990\"},\n \"session\": {\"date\": \"2026/03/14\"}\n}\n")
	_, err := ReadSidecar(p)
	se, ok := err.(*SidecarError)
	if !ok || len(se.Problems) != 4 {
		t.Fatalf("%v", err)
	}
	want := []string{"/trials", "/subject/sex", "/subject/birth_date", "/session/date"}
	for i, w := range want {
		if !strings.HasPrefix(se.Problems[i].Msg, w+":") {
			t.Errorf("problem %d: %s, want %s first", i, se.Problems[i].Msg, w)
		}
	}
	if se.Problems[1].Line != 3 || se.Problems[2].Line != 4 {
		t.Errorf("lines %d %d", se.Problems[1].Line, se.Problems[2].Line)
	}
}

// One trial, one array, one EMG file whose name follows no template: that
// array (it was refused as "no EMG file was given for it"). A discharge
// file whose name gives no decomposition goes to the metadata's only one
// (it went to a new "imported" decomposition without a word); with two it
// is refused naming them; a named decomposition no file fills is not
// stored and the report says so.
func TestUnnamedFilesTakeTheOnlyChoice(t *testing.T) {
	dir := t.TempDir()
	write := func(name, text string) string {
		p := filepath.Join(dir, name)
		if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	meta := func(decs string) string {
		return write("metadata.json", `{"study": {"id": "S"}, "subject": {"id": "P1"}, "session": {"date": "2026-03-14"},
 "trials": [{"name": "t1", "arrays": [{"name": "ta", "sampling_rate_hz": 1000, "decompositions": [`+decs+`]}]}]}`)
	}
	emg := write("emg.csv", "sampling rate: 1000 Hz\na [uV],b [uV]\n1,2\n3,4\n5,6\n7,8\n")
	dis := write("spikes.csv", "unit,sample (0-based)\n1,1\n1,3\n2,2\n")
	out := filepath.Join(dir, "out.h5")
	rep, err := ImportRecording(Inputs{Meta: meta(`{"name": "auto", "method": "m"}`), EMG: []string{emg}, Discharges: []string{dis}}, out, recfile.WriteOptions{Overwrite: true})
	if err != nil {
		t.Fatal(err)
	}
	r, err := recfile.ReadAll(out)
	if err != nil {
		t.Fatal(err)
	}
	a := r.Trials[0].Arrays[0]
	if a.Name != "ta" || len(a.Decompositions) != 1 || a.Decompositions[0].Name != "auto" || len(a.Decompositions[0].Units) != 2 {
		t.Fatalf("%+v", a.Decompositions)
	}
	notes := fmt.Sprint(rep.Files)
	if !strings.Contains(notes, `the only EMG file given, for the metadata's only array "ta"`) || !strings.Contains(notes, `decomposition "auto": the metadata's only decomposition`) {
		t.Errorf("report does not say how the names were decided: %s", notes)
	}
	_, err = ImportRecording(Inputs{Meta: meta(`{"name": "auto"}, {"name": "edited"}`), EMG: []string{emg}, Discharges: []string{dis}}, out, recfile.WriteOptions{Overwrite: true})
	if pe := AsParseError(err); pe == nil || !strings.Contains(pe.Msg, `"auto", "edited"`) || !strings.Contains(pe.Hint, "{decomposition}") {
		t.Fatalf("two decompositions: %v", err)
	}
	rep, err = ImportRecording(Inputs{Meta: meta(`{"name": "auto"}`), EMG: []string{emg}}, out, recfile.WriteOptions{Overwrite: true})
	if err != nil || !strings.Contains(strings.Join(rep.Notes, "\n"), `decomposition "auto" of trial "t1" array "ta" is in the metadata but no discharge or unit file was read for it: not stored`) {
		t.Fatalf("%v %v", rep, err)
	}
}

// TestStreamedCellRefusalNamesTheInput: an EMG cell refused while the
// samples stream into the file is reported as the input's problem, with
// file, line, column and the line as written, not behind the output's
// path; and no output is left.
func TestStreamedCellRefusalNamesTheInput(t *testing.T) {
	dir := t.TempDir()
	emg := filepath.Join(dir, "emg.csv")
	os.WriteFile(emg, []byte("e1,e2,e3\n1.5,2.5,3.5\n1.25,inf,2\n0.5,0.25,1\n"), 0o644)
	out := filepath.Join(dir, "rec.h5")
	_, err := ImportRecording(Inputs{EMG: []string{emg}, Profile: DefaultProfile(), RateHz: 2048}, out, recfile.WriteOptions{})
	pe := AsParseError(err)
	if pe == nil || pe.File != emg || pe.Line != 3 || pe.Column != 2 || pe.Example != "1.25,inf,2" || strings.Contains(err.Error(), "rec.h5") {
		t.Fatalf("got %v (%+v)", err, pe)
	}
	if _, err := os.Stat(out); !os.IsNotExist(err) {
		t.Fatalf("an output was left: %v", err)
	}
}
