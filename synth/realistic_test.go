package synth

import (
	"bytes"
	"encoding/binary"
	"math"
	"math/cmplx"
	"strconv"
	"strings"
	"testing"
)

func realisticForTest(t *testing.T, seconds float64, seed uint64) *RealisticSource {
	t.Helper()
	cfg := DefaultRealistic()
	cfg.Seconds, cfg.Seed = seconds, seed
	s, err := RealisticEMG(cfg)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// plateauCounts reads rows [from, from+n) as float64 uV, channel-major.
func plateauCounts(t *testing.T, s *RealisticSource, from, n int) [][]float64 {
	t.Helper()
	_, ch := s.Shape()
	buf := make([]float64, n*ch)
	if err := s.ReadFloat64(from, buf); err != nil {
		t.Fatal(err)
	}
	out := make([][]float64, ch)
	for c := range out {
		out[c] = make([]float64, n)
		for r := range n {
			out[c][r] = buf[r*ch+c]
		}
	}
	return out
}

// fft is an in-place radix-2 transform (len(x) a power of two).
func fft(x []complex128) {
	n := len(x)
	for i, j := 1, 0; i < n; i++ {
		bit := n >> 1
		for ; j&bit != 0; bit >>= 1 {
			j ^= bit
		}
		j ^= bit
		if i < j {
			x[i], x[j] = x[j], x[i]
		}
	}
	for size := 2; size <= n; size <<= 1 {
		w := cmplx.Exp(complex(0, -2*math.Pi/float64(size)))
		for start := 0; start < n; start += size {
			wk := complex(1, 0)
			for k := range size / 2 {
				a, b := x[start+k], x[start+k+size/2]*wk
				x[start+k], x[start+k+size/2] = a+b, a-b
				wk *= w
			}
		}
	}
}

// A property of our model: on the contraction plateau at least 95 % of the
// power (mean removed) lies in the sources' band, 20-450 Hz, and the median
// frequency is where surface EMG usually has it, 50-150 Hz (common practice).
func TestRealisticSpectrumInBand(t *testing.T) {
	s := realisticForTest(t, 12, 3)
	const n = 4096 // 2 s at 2048 Hz, inside the plateau (3-9 s)
	x := plateauCounts(t, s, 4*2048, n)
	for _, c := range []int{0, 27, 63} {
		buf := make([]complex128, n)
		var mean float64
		for _, v := range x[c] {
			mean += v / n
		}
		for i, v := range x[c] {
			buf[i] = complex(v-mean, 0)
		}
		fft(buf)
		var in, total float64
		power := make([]float64, n/2)
		for k := 1; k < n/2; k++ {
			p := real(buf[k])*real(buf[k]) + imag(buf[k])*imag(buf[k])
			power[k] = p
			total += p
			if f := float64(k) * 2048 / n; f >= 20 && f <= 450 {
				in += p
			}
		}
		t.Logf("channel %d: %.4f of the power in 20-450 Hz", c, in/total)
		if in/total < 0.95 {
			t.Errorf("channel %d: %.3f of the power in 20-450 Hz, want at least 0.95", c, in/total)
		}
		var cum float64
		for k := 1; k < n/2; k++ {
			cum += power[k]
			if cum >= total/2 {
				f := float64(k) * 2048 / n
				t.Logf("channel %d: median frequency %.1f Hz", c, f)
				if f < 50 || f > 150 {
					t.Errorf("channel %d: median frequency %.1f Hz, want 50-150 Hz", c, f)
				}
				break
			}
		}
	}
}

// A property of our model: neighbouring electrodes (8 mm) correlate more
// than electrodes 5 or more columns (40 mm) apart in the same row, and the
// contraction plateau carries far more power than the rest at the start.
func TestRealisticSpatialDecayAndEnvelope(t *testing.T) {
	s := realisticForTest(t, 12, 4)
	x := plateauCounts(t, s, 4*2048, 4096)
	var near, far float64
	var nn, nf int
	for r := range 8 {
		for c := range 8 {
			for d := 1; c+d < 8; d++ {
				p := pearson(x[r*8+c], x[r*8+c+d])
				switch {
				case d == 1:
					near += p
					nn++
				case d >= 5:
					far += p
					nf++
				}
			}
		}
	}
	near, far = near/float64(nn), far/float64(nf)
	t.Logf("mean correlation: neighbours %.3f, 40+ mm apart %.3f", near, far)
	if near < 0.5 || near < far+0.2 {
		t.Errorf("mean correlation of neighbours %.3f, of electrodes 40+ mm apart %.3f: want neighbours at least 0.5 and 0.2 above", near, far)
	}
	rest := plateauCounts(t, s, 0, 1024)
	var pr, pp float64
	for c := range rest {
		for _, v := range rest[c] {
			pr += v * v / 1024
		}
		for _, v := range x[c][:1024] {
			pp += v * v / 1024
		}
	}
	t.Logf("power summed over channels: plateau %.0f uV^2, rest %.1f uV^2", pp, pr)
	if pp < 100*pr {
		t.Errorf("plateau power %.1f, rest power %.1f (uV^2 summed over channels): want the plateau 100 times the rest", pp, pr)
	}
}

// A property of our model: every value written is an exact multiple of the
// LSB (0.1907 uV) at the 4 decimals written, checked in integers on the
// text, and the raw counts beside it are the same numbers. The same seed
// gives the same bytes, another seed others, and reading backwards starts
// over without changing a value.
func TestRealisticTextIsWholeLSBs(t *testing.T) {
	s := realisticForTest(t, 1, 5)
	var text, raw bytes.Buffer
	if err := s.WriteText(&text, &raw, true); err != nil {
		t.Fatal(err)
	}
	rows, ch := s.Shape()
	counts := make([]int16, rows*ch)
	if err := binary.Read(bytes.NewReader(raw.Bytes()), binary.LittleEndian, counts); err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimSuffix(text.String(), "\n"), "\n")
	head := 0
	for lines[head] != "" {
		head++
	}
	table := lines[head+2:] // blank line, header
	if len(table) != rows {
		t.Fatalf("%d table rows, want %d", len(table), rows)
	}
	nonzero := 0
	for r, line := range table {
		cells := strings.Split(line, ",")
		if len(cells) != ch+1 {
			t.Fatalf("row %d: %d cells", r, len(cells))
		}
		for c, cell := range cells[1:] {
			dot := strings.IndexByte(cell, '.')
			if dot < 0 || len(cell)-dot-1 != 4 {
				t.Fatalf("row %d channel %d: %q is not written with 4 decimals", r, c, cell)
			}
			units, err := strconv.ParseInt(cell[:dot]+cell[dot+1:], 10, 64)
			if err != nil {
				t.Fatal(err)
			}
			if units%1907 != 0 || units/1907 != int64(counts[r*ch+c]) {
				t.Fatalf("row %d channel %d: %q is not %d x 0.1907", r, c, cell, counts[r*ch+c])
			}
			if units != 0 {
				nonzero++
			}
		}
	}
	if nonzero < rows*ch/2 {
		t.Errorf("only %d of %d values differ from zero", nonzero, rows*ch)
	}
	var again bytes.Buffer
	if err := realisticForTest(t, 1, 5).WriteText(&again, nil, true); err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(again.Bytes(), text.Bytes()) {
		t.Error("the same seed wrote different text")
	}
	var other bytes.Buffer
	if err := realisticForTest(t, 1, 6).WriteText(&other, nil, true); err != nil {
		t.Fatal(err)
	}
	if bytes.Equal(other.Bytes(), text.Bytes()) {
		t.Error("seeds 5 and 6 wrote the same text")
	}
	late := make([]int32, 10*ch)
	if err := s.ReadCounts(100, late); err != nil {
		t.Fatal(err)
	}
	for i, v := range late {
		if v != int32(counts[100*ch+i]) {
			t.Fatalf("rows 100-109 read again differ at value %d: %d, first %d", i, v, counts[100*ch+i])
		}
	}
	// The scale says what the text says: 0.1907 written as 1907 units of
	// the 4th decimal (the config's LSB), no offset.
	sc := s.Scale()
	if sc.ScaleUnits != 1907 || sc.Decimals != 4 || sc.OffsetUnits != 0 || sc.ScaleFactor != 0.1907 {
		t.Errorf("scale %+v, want 1907 units at 4 decimals (0.1907 uV), no offset", sc)
	}
}

func TestRealisticRefusesBadConfig(t *testing.T) {
	for name, edit := range map[string]func(*RealisticConfig){
		"band above Nyquist":  func(c *RealisticConfig) { c.BandHighHz = 1500 },
		"LSB not at decimals": func(c *RealisticConfig) { c.LSBuV = 0.19071 },
		"no grid":             func(c *RealisticConfig) { c.GridRows = 0 },
	} {
		cfg := DefaultRealistic()
		edit(&cfg)
		if _, err := RealisticEMG(cfg); err == nil {
			t.Errorf("%s: no error", name)
		}
	}
}
