package synth

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"math/rand/v2"
	"strconv"

	"muarc/record"
)

// RealisticConfig describes the amplifier-like EMG of RealisticEMG, the data
// the storage benchmarks measure compression on (scripts/benchemg,
// scripts/bench-storage.sh). The model, a common-practice description of
// monopolar high-density surface EMG, not a physiological simulation:
//
//   - Sources independent band-limited Gaussian noises: white noise through
//     a 4th-order Butterworth high-pass at BandLowHz and low-pass at
//     BandHighHz (about 20-450 Hz, as surface EMG is usually described:
//     common practice) and a first-order low-pass at TiltHz that gives the
//     spectrum its usual slope above about 100 Hz (common practice). Each
//     source sits at a random point under or around the grid, 4-16 mm deep.
//   - Instantaneous mixing (no propagation delay): channel c gets source k
//     with weight a_k exp(-r/DecayMm), r the distance from the electrode to
//     the source, so neighbours correlate and distant electrodes less.
//   - A trapezoidal contraction envelope (rest, ramp up, plateau, ramp down,
//     rest: 1/12, 1/6, 1/2, 1/6, 1/12 of the duration) scales the mixed
//     sources to PlateauRMSuV per channel on the plateau.
//   - Amplifier noise: white Gaussian, NoiseRMSuV per channel.
//   - Line interference: a LineHz sinusoid, amplitude 0.5-1.5 x LineUV and a
//     phase within 0.3 rad of a common one per channel.
//   - Quantised by a 16-bit converter: counts = round(value / LSBuV),
//     clipped to [-32768, 32767] as a converter saturates.
//
// The output depends only on the configuration (Seed included).
type RealisticConfig struct {
	GridRows, GridColumns int     // electrodes, row-major channel order
	IEDMm                 float64 // inter-electrode distance, mm
	SamplingRateHz        float64
	Seconds               float64
	Sources               int
	BandLowHz, BandHighHz float64 // the sources' pass band, Hz
	TiltHz                float64 // corner of the first-order slope, Hz
	DecayMm               float64 // spatial decay length of the mixing, mm
	PlateauRMSuV          float64 // RMS of the mixed sources on the plateau, uV
	NoiseRMSuV            float64 // amplifier noise RMS, uV
	LineHz, LineUV        float64 // line frequency (Hz) and mean amplitude (uV)
	// LSBuV is the converter step in uV, written in the text with
	// LSBDecimals decimals; LSBuV x 10^LSBDecimals must be an integer.
	LSBuV       float64
	LSBDecimals int
	Seed        uint64
}

// DefaultRealistic is the benchmark's recording: an 8 x 8 grid at 8 mm,
// 2048 Hz, 60 s, 32 sources, 150 uV RMS on the plateau, 1.5 uV RMS noise,
// 10 uV of 50 Hz, and the step of a 16-bit converter over +-6.25 mV,
// 12.5 mV / 65536 = 0.1907 uV (common practice for HD-sEMG amplifiers).
func DefaultRealistic() RealisticConfig {
	return RealisticConfig{
		GridRows: 8, GridColumns: 8, IEDMm: 8, SamplingRateHz: 2048, Seconds: 60,
		Sources: 32, BandLowHz: 20, BandHighHz: 450, TiltHz: 100, DecayMm: 10,
		PlateauRMSuV: 150, NoiseRMSuV: 1.5, LineHz: 50, LineUV: 10,
		LSBuV: 0.1907, LSBDecimals: 4, Seed: 1,
	}
}

// RealisticSource streams the counts of a RealisticConfig. It generates
// rows in order: a read that starts before the last one ended starts over
// from row 0 (writers read from row 0 to the end, so this costs nothing
// there). It is not safe for concurrent use.
type RealisticSource struct {
	cfg            RealisticConfig
	rows, channels int
	lsbUnits       int64     // LSBuV x 10^LSBDecimals
	weight         []float64 // [channel][source]
	lineSin        []float64 // per channel: amplitude x cos(phase)
	lineCos        []float64 // per channel: amplitude x sin(phase)
	srcScale       float64   // 1 / RMS of a filtered unit source
	// streaming state
	pos   int
	rng   *rand.Rand
	chain []sourceFilter
	s     []float64
}

var _ record.CountSource = (*RealisticSource)(nil)

// biquad is one second-order section, transposed direct form II.
type biquad struct{ b0, b1, b2, a1, a2, z1, z2 float64 }

func (q *biquad) step(x float64) float64 {
	y := q.b0*x + q.z1
	q.z1 = q.b1*x - q.a1*y + q.z2
	q.z2 = q.b2*x - q.a2*y
	return y
}

// rbjBiquad is a low- or high-pass section of quality q at f0 Hz from the
// bilinear transform as given in R. Bristow-Johnson's "Audio EQ Cookbook".
func rbjBiquad(high bool, f0, fs, q float64) biquad {
	w := 2 * math.Pi * f0 / fs
	alpha := math.Sin(w) / (2 * q)
	c := math.Cos(w)
	a0 := 1 + alpha
	var b0, b1 float64
	if high {
		b0, b1 = (1+c)/2, -(1 + c)
	} else {
		b0, b1 = (1-c)/2, 1-c
	}
	return biquad{b0: b0 / a0, b1: b1 / a0, b2: b0 / a0, a1: -2 * c / a0, a2: (1 - alpha) / a0}
}

// sourceFilter is the band-pass (two 4th-order Butterworth filters, each
// two sections with Q = 1/(2 cos(pi/8)) and 1/(2 cos(3 pi/8))) and the
// first-order slope (bilinear transform).
type sourceFilter struct {
	sec        [4]biquad
	t0, t1, ty float64 // first-order coefficients b0 (= b1), a1, and state
	tx         float64
}

func newSourceFilter(cfg RealisticConfig) sourceFilter {
	fs := cfg.SamplingRateHz
	q1, q2 := 1/(2*math.Cos(math.Pi/8)), 1/(2*math.Cos(3*math.Pi/8))
	k := math.Tan(math.Pi * cfg.TiltHz / fs)
	return sourceFilter{
		sec: [4]biquad{rbjBiquad(true, cfg.BandLowHz, fs, q1), rbjBiquad(true, cfg.BandLowHz, fs, q2),
			rbjBiquad(false, cfg.BandHighHz, fs, q1), rbjBiquad(false, cfg.BandHighHz, fs, q2)},
		t0: k / (1 + k), t1: (k - 1) / (k + 1),
	}
}

func (f *sourceFilter) step(x float64) float64 {
	for i := range f.sec {
		x = f.sec[i].step(x)
	}
	y := f.t0*x + f.t0*f.tx - f.t1*f.ty
	f.tx, f.ty = x, y
	return y
}

// RealisticEMG checks cfg and returns its source.
func RealisticEMG(cfg RealisticConfig) (*RealisticSource, error) {
	ch := cfg.GridRows * cfg.GridColumns
	if ch < 1 || cfg.SamplingRateHz <= 0 || cfg.Seconds <= 0 || cfg.Sources < 1 || cfg.IEDMm <= 0 || cfg.DecayMm <= 0 {
		return nil, fmt.Errorf("synth: realistic EMG needs a grid, a rate, a duration, sources and positive distances")
	}
	if !(cfg.BandLowHz > 0 && cfg.BandLowHz < cfg.BandHighHz && cfg.BandHighHz < cfg.SamplingRateHz/2 && cfg.TiltHz > 0 && cfg.TiltHz < cfg.SamplingRateHz/2) {
		return nil, fmt.Errorf("synth: band %g-%g Hz and slope corner %g Hz must lie below half the rate %g Hz", cfg.BandLowHz, cfg.BandHighHz, cfg.TiltHz, cfg.SamplingRateHz)
	}
	scaled := cfg.LSBuV * math.Pow(10, float64(cfg.LSBDecimals))
	units := math.Round(scaled)
	if cfg.LSBuV <= 0 || cfg.LSBDecimals < 0 || cfg.LSBDecimals > 9 || math.Abs(scaled-units) > 1e-6*units {
		return nil, fmt.Errorf("synth: LSB %g uV is not a whole number of units of the %d-th decimal", cfg.LSBuV, cfg.LSBDecimals)
	}
	s := &RealisticSource{cfg: cfg, channels: ch, rows: int(math.Round(cfg.SamplingRateHz * cfg.Seconds)), lsbUnits: int64(units)}
	setup := rand.New(rand.NewPCG(cfg.Seed, 0x7ea1))
	// Sources over the grid and a margin of two electrode distances.
	w, h := float64(cfg.GridColumns-1)*cfg.IEDMm, float64(cfg.GridRows-1)*cfg.IEDMm
	margin := 2 * cfg.IEDMm
	s.weight = make([]float64, ch*cfg.Sources)
	for k := range cfg.Sources {
		sx := -margin + (w+2*margin)*setup.Float64()
		sy := -margin + (h+2*margin)*setup.Float64()
		depth := 4 + 12*setup.Float64()
		amp := math.Exp(0.5 * setup.NormFloat64())
		for c := range ch {
			dx := float64(c%cfg.GridColumns)*cfg.IEDMm - sx
			dy := float64(c/cfg.GridColumns)*cfg.IEDMm - sy
			s.weight[c*cfg.Sources+k] = amp * math.Exp(-math.Sqrt(dx*dx+dy*dy+depth*depth)/cfg.DecayMm)
		}
	}
	// Scale so the mean channel RMS of unit-variance sources is the plateau RMS.
	var mean float64
	for c := range ch {
		var e float64
		for _, v := range s.weight[c*cfg.Sources : (c+1)*cfg.Sources] {
			e += v * v
		}
		mean += math.Sqrt(e) / float64(ch)
	}
	for i := range s.weight {
		s.weight[i] *= cfg.PlateauRMSuV / mean
	}
	phase := 2 * math.Pi * setup.Float64()
	s.lineSin, s.lineCos = make([]float64, ch), make([]float64, ch)
	for c := range ch {
		a := cfg.LineUV * (0.5 + setup.Float64())
		p := phase + 0.3*(2*setup.Float64()-1)
		s.lineSin[c], s.lineCos[c] = a*math.Cos(p), a*math.Sin(p)
	}
	// The RMS of a filtered unit white noise, measured on 20 s of it.
	f := newSourceFilter(cfg)
	n := int(20 * cfg.SamplingRateHz)
	var e float64
	for i := range 2 * n {
		y := f.step(setup.NormFloat64())
		if i >= n {
			e += y * y
		}
	}
	s.srcScale = 1 / math.Sqrt(e/float64(n))
	s.restart()
	return s, nil
}

// restart sets the stream to row 0; the filters run for one second of
// noise first so row 0 has no start-up transient.
func (s *RealisticSource) restart() {
	s.pos = 0
	s.rng = rand.New(rand.NewPCG(s.cfg.Seed, 0x5a3b1e))
	s.chain = make([]sourceFilter, s.cfg.Sources)
	s.s = make([]float64, s.cfg.Sources)
	for k := range s.chain {
		s.chain[k] = newSourceFilter(s.cfg)
	}
	for range int(s.cfg.SamplingRateHz) {
		for k := range s.chain {
			s.chain[k].step(s.rng.NormFloat64())
		}
	}
}

// Shape implements record.SampleSource.
func (s *RealisticSource) Shape() (int, int) { return s.rows, s.channels }

// Scale implements record.CountSource: physical uV = count x LSBuV, a
// decimal scale of LSBDecimals decimals.
func (s *RealisticSource) Scale() record.CountScale {
	sc, err := record.DecimalScale(s.lsbUnits, 0, s.cfg.LSBDecimals)
	if err != nil {
		panic(err) // RealisticEMG checked the LSB
	}
	return sc
}

// LSBuV is the converter step in uV: every value is a whole multiple of it.
func (s *RealisticSource) LSBuV() float64 { return s.cfg.LSBuV }

// Envelope is the contraction envelope at row r, 0 at rest and 1 on the
// plateau.
func (s *RealisticSource) Envelope(r int) float64 {
	x := float64(r) / float64(s.rows) * 12 // twelfths of the duration
	switch {
	case x < 1 || x >= 11:
		return 0
	case x < 3:
		return (x - 1) / 2
	case x < 9:
		return 1
	default:
		return (11 - x) / 2
	}
}

// Channels are the grid's electrodes e01.. in channel order, row-major.
func (s *RealisticSource) Channels() []record.Channel {
	out := make([]record.Channel, s.channels)
	for c := range out {
		r, k := c/s.cfg.GridColumns, c%s.cfg.GridColumns
		out[c] = record.Channel{Label: fmt.Sprintf("e%02d", c+1), Row: r, Column: k,
			XMm: float64(k) * s.cfg.IEDMm, YMm: float64(r) * s.cfg.IEDMm, Usable: true}
	}
	return out
}

// ReadCounts fills dst with the converter counts of rows [start,
// start+len(dst)/channels), row-major; each fits in int16.
func (s *RealisticSource) ReadCounts(start int, dst []int32) error {
	if len(dst)%s.channels != 0 || start < 0 || start+len(dst)/s.channels > s.rows {
		return fmt.Errorf("synth: rows from %d, %d values: not whole %d-channel rows inside 0..%d", start, len(dst), s.channels, s.rows)
	}
	if start < s.pos {
		s.restart()
	}
	for s.pos < start {
		s.row(nil)
	}
	for i := 0; i < len(dst); i += s.channels {
		s.row(dst[i : i+s.channels])
	}
	return nil
}

// row generates the row at s.pos into dst (nil: only advance).
func (s *RealisticSource) row(dst []int32) {
	r := s.pos
	s.pos++
	for k := range s.chain {
		s.s[k] = s.chain[k].step(s.rng.NormFloat64()) * s.srcScale
	}
	env := s.Envelope(r)
	ph := 2 * math.Pi * s.cfg.LineHz * float64(r) / s.cfg.SamplingRateHz
	sn, cs := math.Sin(ph), math.Cos(ph)
	K := s.cfg.Sources
	for c := range s.channels {
		noise := s.rng.NormFloat64() * s.cfg.NoiseRMSuV
		if dst == nil {
			continue
		}
		var v float64
		if env > 0 {
			for k, wk := range s.weight[c*K : (c+1)*K] {
				v += wk * s.s[k]
			}
			v *= env
		}
		v += noise + s.lineSin[c]*sn + s.lineCos[c]*cs
		q := math.Round(v / s.cfg.LSBuV)
		dst[c] = int32(max(-32768, min(32767, q)))
	}
}

// ReadFloat64 implements record.SampleSource: counts x LSBuV.
func (s *RealisticSource) ReadFloat64(start int, dst []float64) error {
	c := make([]int32, len(dst))
	if err := s.ReadCounts(start, c); err != nil {
		return err
	}
	for i, v := range c {
		dst[i] = float64(v) * s.cfg.LSBuV
	}
	return nil
}

// ReadFloat32 implements record.SampleSource: the float32 rounding of
// ReadFloat64's values.
func (s *RealisticSource) ReadFloat32(start int, dst []float32) error {
	c := make([]int32, len(dst))
	if err := s.ReadCounts(start, c); err != nil {
		return err
	}
	for i, v := range c {
		dst[i] = float32(float64(v) * s.cfg.LSBuV)
	}
	return nil
}

// AppendCountText appends count x LSB in uV as a decimal with exactly
// LSBDecimals decimals, computed in integers so the text is exact.
func (s *RealisticSource) AppendCountText(b []byte, count int32) []byte {
	v := int64(count) * s.lsbUnits
	if v < 0 {
		b = append(b, '-')
		v = -v
	}
	d := s.cfg.LSBDecimals
	if d == 0 {
		return strconv.AppendInt(b, v, 10)
	}
	p := int64(math.Pow10(d))
	b = strconv.AppendInt(b, v/p, 10)
	b = append(b, '.')
	frac := strconv.AppendInt(nil, v%p, 10)
	for range d - len(frac) {
		b = append(b, '0')
	}
	return append(b, frac...)
}

// WriteText writes the recording as the EMG text export muarc import reads
// (EXPORTS.md, "Signal files": a key block when keys is set, a header
// `time [s],e01 [uV],...`, one row per sample) with every value written as
// count x LSB at LSBDecimals decimals. When counts is not nil it also gets
// the counts as little-endian int16, row-major (the baselines' input).
func (s *RealisticSource) WriteText(w io.Writer, counts io.Writer, keys bool) error {
	bw := bufio.NewWriterSize(w, 1<<20)
	if keys {
		s.writeKeys(bw)
	}
	bw.WriteString("time [s]")
	for _, c := range s.Channels() {
		bw.WriteString("," + c.Label + " [uV]")
	}
	bw.WriteString("\n")
	const block = 2048
	blk := make([]int32, block*s.channels)
	raw := make([]byte, 2*len(blk))
	var b []byte
	for r0 := 0; r0 < s.rows; r0 += block {
		n := min(block, s.rows-r0)
		if err := s.ReadCounts(r0, blk[:n*s.channels]); err != nil {
			return err
		}
		for r := range n {
			b = strconv.AppendFloat(b[:0], float64(r0+r)/s.cfg.SamplingRateHz, 'f', -1, 64)
			for _, v := range blk[r*s.channels : (r+1)*s.channels] {
				b = append(b, ',')
				b = s.AppendCountText(b, v)
			}
			b = append(b, '\n')
			if _, err := bw.Write(b); err != nil {
				return err
			}
		}
		if counts != nil {
			for i, v := range blk[:n*s.channels] {
				raw[2*i], raw[2*i+1] = byte(uint16(v)), byte(uint16(v)>>8)
			}
			if _, err := counts.Write(raw[:2*n*s.channels]); err != nil {
				return err
			}
		}
	}
	return bw.Flush()
}

func (s *RealisticSource) writeKeys(bw *bufio.Writer) {
	header(bw, "array", "grid",
		"sampling rate", fmtNum(s.cfg.SamplingRateHz)+" Hz",
		"start", "0 s",
		"unit", "uV",
		"channels", strconv.Itoa(s.channels),
		"samples", strconv.Itoa(s.rows))
}
