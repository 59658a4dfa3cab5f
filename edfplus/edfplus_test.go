package edfplus

import (
	"bytes"
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"
)

// genFile is a generated file: header, digital samples per record and
// annotations, written with Writer.
type genFile struct {
	h    *Header
	dig  [][][]int32 // [record][signal][sample]
	anns [][]Annotation
}

// generate builds a random valid file (a property of our generator: every
// digital value lies in the signal's range; annotations fit their signal).
func generate(rng *rand.Rand, f Format, plus bool) *genFile {
	ns := 1 + rng.IntN(5)
	lo, hi := f.DigitalRange()
	h := &Header{Format: f, Plus: plus, Patient: "X X X X", Recording: "Startdate X X X X",
		Start:   time.Date(1985+rng.IntN(99), time.Month(1+rng.IntN(12)), 1+rng.IntN(28), rng.IntN(24), rng.IntN(60), rng.IntN(60), 0, time.UTC),
		Records: 1 + rng.IntN(6), RecordDurationS: []float64{1, 0.5, 0.25, 2, 0.1}[rng.IntN(5)]}
	if !plus {
		h.Patient, h.Recording = "lab subject 7", "bench test"
	}
	for i := 0; i < ns; i++ {
		dmin := lo + rng.IntN(100)
		dmax := hi - rng.IntN(100)
		pmin := math.Round((rng.Float64()*2000-1000)*100) / 100
		pmax := math.Round((pmin+float64(1+rng.IntN(20000))/10)*100) / 100
		if rng.IntN(2) == 0 {
			pmin, pmax = pmax, pmin // inverted polarity is allowed
		}
		h.Signals = append(h.Signals, Signal{Label: fmt.Sprintf("EMG %d", i+1), Transducer: "surface electrode",
			PhysicalDimension: "uV", PhysicalMin: pmin, PhysicalMax: pmax, DigitalMin: dmin, DigitalMax: dmax,
			Prefiltering: "HP:10Hz LP:500Hz", SamplesPerRecord: 1 + rng.IntN(40)})
	}
	if plus {
		h.Signals = append(h.Signals, Signal{Label: f.AnnotationLabel(), PhysicalMin: -1, PhysicalMax: 1, DigitalMin: lo, DigitalMax: hi, SamplesPerRecord: 60, Annotations: true})
	}
	g := &genFile{h: h}
	for r := 0; r < h.Records; r++ {
		var rec [][]int32
		for _, s := range h.Signals {
			var d []int32
			if !s.Annotations {
				for k := 0; k < s.SamplesPerRecord; k++ {
					d = append(d, int32(s.DigitalMin+rng.IntN(s.DigitalMax-s.DigitalMin+1)))
				}
			}
			rec = append(rec, d)
		}
		g.dig = append(g.dig, rec)
		var anns []Annotation
		if plus && rng.IntN(2) == 0 {
			on := float64(r)*h.RecordDurationS + float64(rng.IntN(1000))/1000*h.RecordDurationS
			anns = append(anns, Annotation{OnsetS: on, DurationS: math.NaN(), Text: fmt.Sprintf("unit %d", rng.IntN(50))})
		}
		if plus && rng.IntN(3) == 0 {
			anns = append(anns, Annotation{OnsetS: float64(r) * h.RecordDurationS, DurationS: 0.125, Text: "plateau Ω"})
		}
		g.anns = append(g.anns, anns)
	}
	return g
}

func (g *genFile) bytes(t testing.TB) []byte {
	var buf bytes.Buffer
	w, err := NewWriter(&buf, g.h)
	if err != nil {
		t.Fatal(err)
	}
	for r := range g.dig {
		tals := make([][]byte, len(g.h.Signals))
		for i, s := range g.h.Signals {
			if s.Annotations {
				b := TimeKeepingTAL(float64(r) * g.h.RecordDurationS)
				for _, a := range g.anns[r] {
					b = AppendTAL(b, a.OnsetS, a.DurationS, a.Text)
				}
				tals[i] = b
			}
		}
		if err := w.WriteRecord(g.dig[r], tals); err != nil {
			t.Fatal(err)
		}
	}
	if err := w.Close(); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// TestRoundTripGenerated writes thousands of generated files and reads
// them back: every digital value, annotation and header field identical
// (a property of our reader and writer together; the outside references
// are in reference_test.go).
func TestRoundTripGenerated(t *testing.T) {
	rng := rand.New(rand.NewPCG(14, 1))
	for n := 0; n < 2000; n++ {
		f := []Format{EDF, BDF}[n%2]
		g := generate(rng, f, n%4 < 2)
		b := g.bytes(t)
		r, err := NewReader(bytes.NewReader(b), int64(len(b)), "gen")
		if err != nil {
			t.Fatalf("case %d: %v", n, err)
		}
		h := r.Header
		if h.Format != f || h.Plus != g.h.Plus || h.Records != g.h.Records || h.RecordDurationS != g.h.RecordDurationS ||
			!h.Start.Equal(g.h.Start) || h.Patient != g.h.Patient || len(h.Signals) != len(g.h.Signals) {
			t.Fatalf("case %d: header %+v, wrote %+v", n, h, g.h)
		}
		for i, s := range h.Signals {
			w := g.h.Signals[i]
			if s.PhysicalMin != w.PhysicalMin || s.PhysicalMax != w.PhysicalMax || s.DigitalMin != w.DigitalMin || s.Label != w.Label || s.Prefiltering != w.Prefiltering {
				t.Fatalf("case %d signal %d: %+v, wrote %+v", n, i, s, w)
			}
		}
		var rec Record
		for k := 0; k < h.Records; k++ {
			if err := r.ReadRecord(k, &rec); err != nil {
				t.Fatalf("case %d: %v %q", n, err, b[h.HeaderBytes():])
			}
			if rec.OnsetS != float64(k)*h.RecordDurationS {
				t.Fatalf("case %d record %d onset %g", n, k, rec.OnsetS)
			}
			for i := range h.Signals {
				if fmt.Sprint(rec.Digital[i]) != fmt.Sprint(g.dig[k][i]) {
					t.Fatalf("case %d record %d signal %d: %v, wrote %v", n, k, i, rec.Digital[i], g.dig[k][i])
				}
			}
			if len(rec.Annotations) != len(g.anns[k]) {
				t.Fatalf("case %d record %d: %d annotations, wrote %d", n, k, len(rec.Annotations), len(g.anns[k]))
			}
			for j, a := range rec.Annotations {
				w := g.anns[k][j]
				if a.OnsetS != w.OnsetS || a.Text != w.Text || !(a.DurationS == w.DurationS || math.IsNaN(a.DurationS) && math.IsNaN(w.DurationS)) {
					t.Fatalf("case %d record %d: annotation %+v, wrote %+v", n, k, a, w)
				}
			}
		}
	}
}

// TestPhysicalDeterminesDigital proves that storing physical values as
// float64 loses nothing: for every digital value of the whole range, the
// physical value digital -> Physical -> Digital gives the digital value
// back, for 16-bit and 24-bit ranges and scales from 1e-9 to 1e6 per step.
// (Reason: float64 carries 53 significant bits, a 24-bit count and the
// scale's rounding error stay many orders below half a step.)
func TestPhysicalDeterminesDigital(t *testing.T) {
	type cal struct {
		pmin, pmax float64
		dmin, dmax int
	}
	cals := []cal{
		{-3200, 3200, -32768, 32767},            // EDF, 0.0977 per step
		{-0.001, 0.001, -32768, 32767},          // EDF in V
		{12.5, -99999.9, -32000, 31000},         // inverted, uneven
		{-262144, 262143.97, -8388608, 8388607}, // BDF, 1/32 uV per step (a common amplifier range)
		{-1e-2, 1e-2, -8388608, 8388607},        // BDF in V
		{99999999, -9999999, -8388608, 8388607},
	}
	for _, c := range cals {
		s := Signal{PhysicalMin: c.pmin, PhysicalMax: c.pmax, DigitalMin: c.dmin, DigitalMax: c.dmax}
		step := 1
		if c.dmax-c.dmin > 1<<16 && c.pmin != -262144 {
			step = 7 // one 24-bit calibration runs whole, the others every 7th value
		}
		for d := c.dmin; d <= c.dmax; d += step {
			if got := s.Digital(s.Physical(int32(d))); got != int32(d) {
				t.Fatalf("%+v: digital %d -> %.17g -> %d", c, d, s.Physical(int32(d)), got)
			}
		}
	}
}

// hostile returns a valid EDF+ file's bytes for the header tests.
func valid(t testing.TB) []byte {
	rng := rand.New(rand.NewPCG(3, 3))
	g := generate(rng, EDF, true)
	g.h.Records = 2
	g.dig, g.anns = g.dig[:2], g.anns[:2]
	return g.bytes(t)
}

func setField(b []byte, off, width int, s string) []byte {
	c := append([]byte(nil), b...)
	copy(c[off:off+width], (s + strings.Repeat(" ", width))[:width])
	return c
}

// TestHostileHeaders refuses each broken field with its name and offset
// (offsets from the EDF specification's header table).
func TestHostileHeaders(t *testing.T) {
	b := valid(t)
	h, err := ReadHeader(bytes.NewReader(b))
	if err != nil {
		t.Fatal(err)
	}
	ns := len(h.Signals)
	sig := func(k int) int { // offset of signal field k for signal 1
		off := 256
		for j := 0; j < k; j++ {
			off += ns * signalFields[j].width
		}
		return off
	}
	cases := []struct {
		name  string
		bytes []byte
		field string
		off   int64
	}{
		{"version", setField(b, 0, 8, "1"), "version", 0},
		{"non-ASCII patient", setField(b, 8, 80, "Zoë"), "local patient identification", 10},
		{"impossible date", setField(b, 168, 8, "31.02.20"), "startdate", 168},
		{"date form", setField(b, 168, 8, "1.2.2020"), "startdate", 168},
		{"impossible time", setField(b, 176, 8, "24.00.00"), "starttime", 176},
		{"header bytes", setField(b, 184, 8, "512"), "number of bytes in header record", 184},
		{"EDF+ kind", setField(b, 192, 44, "EDF+X"), "reserved", 192},
		{"records unknown", setField(b, 236, 8, "-1"), "number of data records", 236},
		{"records zero", setField(b, 236, 8, "0"), "number of data records", 236},
		{"records text", setField(b, 236, 8, "two"), "number of data records", 236},
		{"too many records", setField(b, 236, 8, "3"), "number of data records", int64(len(b))},
		{"too few records", setField(b, 236, 8, "1"), "number of data records", int64(len(b) - h.RecordBytes())},
		{"truncated last record", b[:len(b)-5], "number of data records", int64(len(b) - h.RecordBytes())},
		{"duration NaN", setField(b, 244, 8, "NaN"), "duration of a data record", 244},
		{"duration negative", setField(b, 244, 8, "-1"), "duration of a data record", 244},
		{"signals zero", setField(b, 252, 4, "0"), "number of signals", 252},
		{"empty label", setField(b, sig(0), 16, ""), "label of signal 1", int64(sig(0))},
		{"duplicate label", setField(b, sig(0)+16, 16, h.Signals[0].Label), "label of signal 2", int64(sig(0) + 16)},
		{"physical max = min", setField(b, sig(4), 8, h.Signals[0].PhysicalMinText), "physical maximum of signal 1", int64(sig(4))},
		{"physical min Inf", setField(b, sig(3), 8, "1e999"), "physical minimum of signal 1", int64(sig(3))},
		{"digital max <= min", setField(b, sig(6), 8, "-32768"), "digital maximum of signal 1", int64(sig(6))},
		{"digital min beyond 16 bits", setField(b, sig(5), 8, "-40000"), "digital minimum of signal 1", int64(sig(5))},
		{"non-integer samples per record", setField(b, sig(8), 8, "2.5"), "nr of samples in each data record of signal 1", int64(sig(8))},
		{"zero samples per record", setField(b, sig(8), 8, "0"), "nr of samples in each data record of signal 1", int64(sig(8))},
		{"short header", b[:200], "header record", 200},
	}
	for _, c := range cases {
		_, err := NewReader(bytes.NewReader(c.bytes), int64(len(c.bytes)), "x.edf")
		var he *HeaderError
		if !errors.As(err, &he) {
			t.Errorf("%s: got %v, want a HeaderError", c.name, err)
			continue
		}
		if he.Field != c.field || he.Offset != c.off {
			t.Errorf("%s: field %q at %d, want %q at %d (%v)", c.name, he.Field, he.Offset, c.field, c.off, err)
		}
		if !strings.Contains(err.Error(), "x.edf: byte ") {
			t.Errorf("%s: message %q names no file and byte", c.name, err)
		}
	}
}

// TestBadTAL refuses annotation signals that break EDF+ 2.2.
func TestBadTAL(t *testing.T) {
	for _, c := range []struct{ tal, want string }{
		{"12\x14\x14\x00", "onset"},
		{"+1\x14\x14", "0 byte"},
		{"+1\x14\x14\x00\x00x", "after the last TAL"},
		{"+1\x15-2\x14\x14\x00", "duration"},
		{"+1\x14abc\x00", "0x14"},
	} {
		_, _, _, err := ParseTALs([]byte(c.tal), 0, 0)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%q: %v, want %q", c.tal, err, c.want)
		}
	}
	anns, keep, _, err := ParseTALs([]byte("+3.5\x14\x14\x00+3.75\x150.5\x14up\x14down\x14\x00\x00\x00"), 0, 0)
	if err != nil || keep != 3.5 || len(anns) != 2 || anns[1].Text != "down" || anns[0].DurationS != 0.5 || anns[0].OnsetS != 3.75 {
		t.Fatalf("%v %v %+v", err, keep, anns)
	}
}

func TestWriterRefuses(t *testing.T) {
	h := &Header{Format: EDF, Records: 1, RecordDurationS: 1, Signals: []Signal{{Label: strings.Repeat("L", 17), PhysicalMin: -1, PhysicalMax: 1, DigitalMin: -100, DigitalMax: 100, SamplesPerRecord: 2}}}
	if _, err := NewWriter(&bytes.Buffer{}, h); err == nil || !strings.Contains(err.Error(), "longer than 16") {
		t.Fatalf("17-character label: %v", err)
	}
	h.Signals[0].Label = "ok"
	var buf bytes.Buffer
	w, err := NewWriter(&buf, h)
	if err != nil {
		t.Fatal(err)
	}
	if err := w.WriteRecord([][]int32{{0, 101}}, nil); err == nil {
		t.Fatal("a digital value above the maximum was written")
	}
	if err := w.Close(); err == nil {
		t.Fatal("Close accepted a file with fewer records than declared")
	}
}

func TestFormatNumber(t *testing.T) {
	for _, c := range []struct {
		v    float64
		want string
	}{{-3276.8, "-3276.8"}, {0.000123456789, "0.000123"}, {-262144.03125, "-262144"}, {1e7, "10000000"}} {
		s, _, err := FormatNumber(c.v, 8)
		if err != nil || s != c.want {
			t.Errorf("%g: %q %v, want %q", c.v, s, err, c.want)
		}
	}
	if _, _, err := FormatNumber(-1e9, 8); err == nil {
		t.Error("-1e9 fitted 8 characters")
	}
}

// FuzzReadHeader feeds arbitrary bytes to the header parser and reader:
// an error or a header that writes back to the same checks, never a panic.
// The seed corpus (valid EDF+ and BDF+ files and the hostile cases) runs in
// make test.
func FuzzReadHeader(f *testing.F) {
	b := valid(f)
	f.Add(b)
	f.Add(setField(b, 236, 8, "-1"))
	f.Add(setField(b, 168, 8, "31.02.20"))
	f.Add(b[:300])
	rng := rand.New(rand.NewPCG(9, 9))
	f.Add(generate(rng, BDF, true).bytes(f))
	f.Add(generate(rng, BDF, false).bytes(f))
	if seeds, _ := filepath.Glob("testdata/*.edf"); len(seeds) > 0 {
		for _, p := range seeds {
			if d, err := os.ReadFile(p); err == nil {
				f.Add(d)
			}
		}
	}
	f.Fuzz(func(t *testing.T, data []byte) {
		r, err := NewReader(bytes.NewReader(data), int64(len(data)), "fuzz")
		if err != nil {
			return
		}
		var rec Record
		for i := 0; i < r.Header.Records && i < 4; i++ {
			if err := r.ReadRecord(i, &rec); err != nil {
				return
			}
		}
		if _, err := EncodeHeader(r.Header); err != nil && !strings.Contains(err.Error(), "characters") {
			t.Fatalf("a header that read cannot be encoded: %v", err)
		}
	})
}
