package synth

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"sync"

	"muarc/record"
)

// emgSource is the streaming EMG of one array in one trial: any block of rows
// is computed on demand as the sum of the units' MUAP trains plus Gaussian
// noise. The noise of sample (row, channel) comes from a counter-based
// generator keyed by the source's key and the value's linear index, so a value
// never depends on how the caller splits its reads. Values are quantised to
// 1/quant (0.01 uV for the generator), the resolution of the text exports.
//
// Memory: the templates (units x lags x channels float32) and the discharge
// lists; nothing proportional to rows x channels.
type emgSource struct {
	rows, channels int
	// firstLag is the lag of template index 0 relative to the discharge, in
	// samples (negative: before it); lags is the template length.
	firstLag, lags int
	// tmpl[u] is unit u's MUAP, laid out [lag][channel], in uV.
	tmpl [][]float32
	// disc[u] are unit u's discharge sample indices, ascending.
	disc [][]int64
	// noiseSD is the noise standard deviation per channel, uV.
	noiseSD []float64
	key     uint64
	quant   float64
}

var _ record.SampleSource = (*emgSource)(nil)

// Shape implements record.SampleSource.
func (s *emgSource) Shape() (int, int) { return s.rows, s.channels }

func (s *emgSource) span(start, n int) (int, error) {
	if s.channels <= 0 || n%s.channels != 0 {
		return 0, fmt.Errorf("synth: block of %d values is not a whole number of %d-channel rows", n, s.channels)
	}
	rows := n / s.channels
	if start < 0 || start+rows > s.rows {
		return 0, fmt.Errorf("synth: rows [%d,%d) outside 0..%d", start, start+rows, s.rows)
	}
	return rows, nil
}

// ReadFloat64 implements record.SampleSource.
func (s *emgSource) ReadFloat64(start int, dst []float64) error {
	rows, err := s.span(start, len(dst))
	if err != nil {
		return err
	}
	s.fill(start, rows, dst)
	return nil
}

// scratchRows is the row count of the float64 scratch ReadFloat32 works in.
const scratchRows = 512

var scratchPool sync.Pool

// ReadFloat32 implements record.SampleSource. Each value is the float32
// rounding of the value ReadFloat64 gives.
func (s *emgSource) ReadFloat32(start int, dst []float32) error {
	rows, err := s.span(start, len(dst))
	if err != nil {
		return err
	}
	need := scratchRows * s.channels
	bp, _ := scratchPool.Get().(*[]float64)
	if bp == nil || cap(*bp) < need {
		b := make([]float64, need)
		bp = &b
	}
	buf := (*bp)[:need]
	for r := 0; r < rows; r += scratchRows {
		n := min(scratchRows, rows-r)
		part := buf[:n*s.channels]
		s.fill(start+r, n, part)
		out := dst[r*s.channels : (r+n)*s.channels]
		for i, v := range part {
			out[i] = float32(v)
		}
	}
	scratchPool.Put(bp)
	return nil
}

// fill computes rows [start, start+rows) into dst (rows*channels values).
func (s *emgSource) fill(start, rows int, dst []float64) {
	clear(dst)
	ch := s.channels
	lo, hi := int64(start), int64(start+rows)
	for u, d := range s.disc {
		t := s.tmpl[u]
		// First discharge whose template reaches row start.
		i := sort.Search(len(d), func(i int) bool { return d[i]+int64(s.firstLag+s.lags) > lo })
		for ; i < len(d); i++ {
			r0 := d[i] + int64(s.firstLag) // row of template lag 0
			if r0 >= hi {
				break
			}
			l0 := max(0, lo-r0)
			l1 := min(int64(s.lags), hi-r0)
			for l := l0; l < l1; l++ {
				row := dst[(r0+l-lo)*int64(ch) : (r0+l-lo+1)*int64(ch)]
				tl := t[l*int64(ch) : (l+1)*int64(ch)]
				for c, v := range tl {
					row[c] += float64(v)
				}
			}
		}
	}
	// Noise: value k (linear index row*channels+channel) takes 16 bits of
	// the counter-based hash of k/4.
	k := uint64(start) * uint64(ch)
	h := mix64(s.key + (k>>2)*golden)
	q := s.quant
	sd := s.noiseSD[:ch]
	for r := range rows {
		row := dst[r*ch : (r+1)*ch]
		for c := range row {
			if k&3 == 0 {
				h = mix64(s.key + (k>>2)*golden)
			}
			v := row[c] + sd[c]*float64(normTable[(h>>(16*(k&3)))&0xffff])
			if q > 0 {
				// Round to a multiple of 1/q (half to even; magic-number
				// rounding, exact for |v q| < 2^51). The division makes
				// the value the double nearest to n/q, so its decimal text
				// reads back as the same double.
				v = ((v*q + roundMagic) - roundMagic) / q
			}
			row[c] = v
			k++
		}
	}
}

// roundMagic is 1.5 x 2^52: adding and subtracting it rounds a float64 to
// an integer (half to even).
const roundMagic = 6755399441055744.0

// golden is 2^64 / phi, the splitmix64 increment.
const golden = 0x9e3779b97f4a7c15

// mix64 is the splitmix64 finaliser: a bijective 64-bit hash.
func mix64(z uint64) uint64 {
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// normTable holds 65536 standard normal quantiles at probabilities
// (i+0.5)/65536, rescaled to unit variance: indexing it with 16 uniform bits
// gives a Gaussian variate truncated at about 4.3 SD (cheap noise).
var normTable = func() []float32 {
	const n = 1 << 16
	t := make([]float64, n)
	var ss float64
	for i := range t {
		p := (float64(i) + 0.5) / n
		t[i] = math.Sqrt2 * math.Erfinv(2*p-1)
		ss += t[i] * t[i]
	}
	sd := math.Sqrt(ss / n)
	out := make([]float32, n)
	for i, v := range t {
		out[i] = float32(v / sd)
	}
	return out
}()

// BenchSource returns a cheap, realistic-looking streaming EMG source for
// benchmarks: channels channels on a near-square grid with 8 mm spacing, eight
// motor units discharging at 10-25 pps (ISI CoV 0.15) for the whole duration,
// MUAPs of 29 ms, Gaussian noise at 10 dB SNR, in uV quantised to 0.01 uV.
// rateHz is the sampling rate in Hz, seconds the duration. The same
// arguments give the same values; memory is the templates and discharge lists
// only (under 1 MB for 64 channels x 600 s).
func BenchSource(channels int, rateHz, seconds float64, seed uint64) record.SampleSource {
	if channels < 1 {
		channels = 1
	}
	rows := int(math.Round(rateHz * seconds))
	cols := int(math.Ceil(math.Sqrt(float64(channels))))
	g := grid{rows: (channels + cols - 1) / cols, cols: cols, ied: 8}
	for k := range channels {
		g.pos = append(g.pos, [2]int{k / cols, k % cols})
	}
	rng := rand.New(rand.NewPCG(seed, 0xbe7c))
	const units = 8
	src := &emgSource{rows: rows, channels: channels, quant: 100, key: mix64(seed ^ 0x5eed)}
	sh := newTemplateShape(rateHz)
	src.firstLag, src.lags = sh.firstLag, sh.lags
	var power float64
	for u := range units {
		p := randomMUAP(rng, g, 60+40*float64(u))
		t := p.template(g, sh)
		src.tmpl = append(src.tmpl, t)
		rate := 10 + 15*rng.Float64()
		var d []int64
		for ts := rng.Float64() / rate; ts*rateHz < float64(rows); {
			d = append(d, int64(ts*rateHz))
			ts += (1 + 0.15*clampN(rng, 2.5)) / rate
		}
		src.disc = append(src.disc, d)
		var e float64
		for _, v := range t {
			e += float64(v) * float64(v)
		}
		power += e * rate / rateHz / float64(channels)
	}
	sd := math.Sqrt(power / math.Pow(10, 10.0/10))
	src.noiseSD = make([]float64, channels)
	for c := range src.noiseSD {
		src.noiseSD[c] = sd
	}
	return src
}
