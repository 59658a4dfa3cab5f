package convert

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// The time column of a signal file: order, gaps and the sampling rate it
// gives.

// timeTrack follows a time column row by row: order, gaps and a running
// least-squares fit of time against grid index.
type timeTrack struct {
	file    string
	col     int
	nominal float64 // expected step in the time unit (0 = learn it)
	allow   bool
	n       int64
	k       int64 // grid index of the next row
	t0      float64
	prev    float64
	first   bool
	// Welford sums for the fit of t against k.
	mk, mt, ckt, ckk float64
	gaps             []Gap
	// hull holds the convex hull of the points (grid index, time - t0):
	// enough to test any constant step against every row.
	hull rowHull
}

func (tt *timeTrack) add(t float64, line int) error {
	if tt.n == 0 {
		tt.t0, tt.prev = t, t
		tt.push(0, 0)
		tt.n, tt.k = 1, 1
		return nil
	}
	d := t - tt.prev
	if !(d > 0) {
		return perr(tt.file, line, tt.col+1, "rows must be in time order with no repeats; if the time column is rounded coarser than the sampling step, read without it (--time-column none --rate R)", "time goes backwards or repeats (%g after %g)", t, tt.prev)
	}
	if tt.nominal == 0 {
		tt.nominal = d
	}
	steps := int64(1)
	if d > 1.5*tt.nominal {
		steps = int64(math.Round(d / tt.nominal))
		if !tt.allow {
			return perr(tt.file, line, tt.col+1, "give --allow-gaps to fill missing samples with NaN", "gap in the time column: %g to %g, about %d samples missing", tt.prev, t, steps-1)
		}
		tt.gaps = append(tt.gaps, Gap{Row: tt.k, Missing: steps - 1, Line: line})
	} else if d < 0.5*tt.nominal {
		return perr(tt.file, line, tt.col+1, "samples must be evenly spaced; check the time column", "uneven time step: %g after a step of %g", d, tt.nominal)
	}
	tt.k += steps - 1
	tt.push(float64(tt.k), t-tt.t0)
	tt.k++
	tt.n++
	tt.prev = t
	return nil
}

func (tt *timeTrack) push(k, t float64) {
	tt.hull.add(k, t)
	n := float64(tt.n + 1)
	dk := k - tt.mk
	tt.mk += dk / n
	tt.mt += (t - tt.mt) / n
	tt.ckt += dk * (t - tt.mt)
	tt.ckk += dk * (k - tt.mk)
}

// slope is the fitted step per sample in the time unit.
func (tt *timeTrack) slope() float64 {
	if tt.ckk == 0 {
		return 0
	}
	return tt.ckt / tt.ckk
}

// maxHullPoints bounds the memory of a rowHull. Rows on one grid to the
// digits written leave a hull of a few dozen points; a hull this large
// means the times do not lie on one grid, and no rate is then claimed to fit.
const maxHullPoints = 1 << 14

// rowHull is the upper and lower convex hull of points (k, t) added in
// increasing k (Andrew's monotone chain, A. M. Andrew, "Another efficient
// algorithm for convex hulls in two dimensions", Inf. Proc. Letters 9, 1979).
// max and min of t - a*k over all points, for any slope a, are reached on
// it.
type rowHull struct {
	upper, lower [][2]float64
	full         bool // more than maxHullPoints: not kept any further
}

func cross(o, a, b [2]float64) float64 {
	return (a[0]-o[0])*(b[1]-o[1]) - (a[1]-o[1])*(b[0]-o[0])
}

func (h *rowHull) add(k, t float64) {
	if h.full {
		return
	}
	p := [2]float64{k, t}
	for len(h.upper) >= 2 && cross(h.upper[len(h.upper)-2], h.upper[len(h.upper)-1], p) >= 0 {
		h.upper = h.upper[:len(h.upper)-1]
	}
	h.upper = append(h.upper, p)
	for len(h.lower) >= 2 && cross(h.lower[len(h.lower)-2], h.lower[len(h.lower)-1], p) <= 0 {
		h.lower = h.lower[:len(h.lower)-1]
	}
	h.lower = append(h.lower, p)
	if len(h.upper)+len(h.lower) > maxHullPoints {
		h.full, h.upper, h.lower = true, nil, nil
	}
}

// spread gives max and min of t - a*k over every row.
func (h *rowHull) spread(a float64) (hi, lo float64) {
	hi, lo = math.Inf(-1), math.Inf(1)
	for _, p := range h.upper {
		hi = math.Max(hi, p[1]-a*p[0])
	}
	for _, p := range h.lower {
		lo = math.Min(lo, p[1]-a*p[0])
	}
	return hi, lo
}

// fits reports whether every row lies within half the resolution res (in
// the time unit) of its place on the grid of step a that starts at the
// first row (the start time stored is the first row's time).
func (h *rowHull) fits(a, res float64) bool {
	if h.full || len(h.upper) == 0 {
		return false
	}
	hi, lo := h.spread(a)
	tol := res / 2 * (1 + 1e-6)
	return hi <= tol && lo >= -tol
}

// fitRate finds the sampling rate a time column gives: the rate with the
// fewest decimals under which every row lies within half a written digit of
// one sample grid. When several rates with that many decimals fit, or none
// with up to 6, the rows do not decide it and the error names the choices.
// scale converts the time unit to seconds; res is the resolution in the
// time unit.
func (tt *timeTrack) fitRate(scale, res float64, rows int) (float64, string, error) {
	est := 1 / (tt.slope() * scale)
	fits := func(r float64) bool { return r > 0 && tt.hull.fits(1/(r*scale), res) }
	for p := 0; p <= 6; p++ {
		m := math.Pow(10, float64(p))
		c := math.Round(est * m)
		var found []float64
		// Fitting rates form one interval (both bounds are convex in the step):
		// look around the estimate, then walk out from the first fit.
		for d := -2.0; d <= 2 && len(found) == 0; d++ {
			if fits((c + d) / m) {
				found = append(found, (c+d)/m)
			}
		}
		if len(found) == 0 {
			continue
		}
		lo, hi := found[0]*m, found[0]*m
		for i := 0; i < 100000 && fits((lo-1)/m); i++ {
			lo--
		}
		for i := 0; i < 100000 && fits((hi+1)/m); i++ {
			hi++
		}
		if lo == hi {
			r := lo / m
			return r, fmt.Sprintf("derived from the time column: %g Hz is the only rate with %d decimals under which each of the %d rows lies within half a written digit of one sample grid (mean step %.9g s)", r, p, rows, 1/est), nil
		}
		return 0, "", fmt.Errorf("every rate from %g to %g Hz fits the %d rows of the time column to the digits written, so the rows do not decide the sampling rate", lo/m, hi/m, rows)
	}
	why := "no rate with up to 6 decimals fits every row to the digits written"
	if tt.hull.full {
		why = "the rows do not lie on one sample grid to the digits written"
	}
	return 0, "", fmt.Errorf("the time column gives about %.9g Hz but %s", est, why)
}

// rateChoices names the readings for a rate the rows do not decide.
func rateChoices(err error) string {
	s := err.Error()
	if strings.Contains(s, "from ") {
		return "give the rate: --rate R (all signal files) or --read emg.rate_hz=R / --read force.rate_hz=R, or sampling_rate_hz in the metadata"
	}
	return "give the rate with --rate R (or --read ROLE.rate_hz=R, or sampling_rate_hz in the metadata); the time column is then checked against it to within half a sample"
}

// firstColumnSteps reads the first column of up to 64 rows: it looks like
// time when it rises by the same step (to the digits written) on every
// row, over at least 3 rows.
func (s *Signals) firstColumnSteps(col int) (looks bool, step, res float64, err error) {
	rows, _, err := headRows(s.lay, 64)
	if err != nil || len(rows) < 3 {
		return false, 0, 0, err
	}
	var v []float64
	dec := 0
	for _, r := range rows {
		if col >= len(r.cells) {
			return false, 0, 0, nil
		}
		n, k := parseNumber(r.cells[col], s.Dialect.DecimalComma)
		if k != cellNumber || n.rng != rangeOK {
			return false, 0, 0, nil
		}
		v = append(v, n.v)
		dec = max(dec, n.decimals)
	}
	res = math.Pow(10, -float64(dec))
	step = (v[len(v)-1] - v[0]) / float64(len(v)-1)
	for i := 1; i < len(v); i++ {
		d := v[i] - v[i-1]
		if !(d > 0) || math.Abs(d-(v[1]-v[0])) > res*(1+1e-9) {
			return false, 0, 0, nil
		}
	}
	// res becomes how far the true step may lie from the mean step: the
	// first and last cells are each within half a digit of their times.
	return true, step, res / float64(len(v)-1), nil
}

// knownRate is the rate given, on a preamble line or in the metadata (0
// when none).
func (s *Signals) knownRate(opt SignalOptions) float64 {
	if opt.RateHz > 0 {
		return opt.RateHz
	}
	if v, line, err := metaRate(s.File, s.Meta); err == nil && line > 0 {
		return v
	}
	if opt.DefaultRateHz > 0 && !math.IsInf(opt.DefaultRateHz, 0) {
		return opt.DefaultRateHz
	}
	return 0
}

// stepUnit names the time unit in which step is one sample at rate: s, ms
// or samples; "" when none or more than one fits to the resolution, and
// why in words.
func stepUnit(step, res, rate float64) (string, string) {
	var found []string
	for _, c := range []struct {
		unit string
		step float64
	}{{"s", 1 / rate}, {"ms", 1000 / rate}, {"samples", 1}} {
		if math.Abs(step-c.step) <= res*(1+1e-9) {
			found = append(found, c.unit)
		}
	}
	switch len(found) {
	case 1:
		return found[0], ""
	case 0:
		return "", fmt.Sprintf("its step %g is one sample at %g Hz in neither s, ms nor samples", step, rate)
	}
	return "", fmt.Sprintf("its step %g is one sample at %g Hz in %s alike", step, rate, strings.Join(found, " and "))
}

// headerlessTime decides whether the first column of a file without a
// header is time. A first column that does not rise by one step on every
// row is a channel. One that does is time only on conclusive evidence: a
// "channels: N" line counting the other columns, and a known rate whose
// sample step the column's step is in s, ms or samples. Anything else is
// refused naming the two readings.
func (s *Signals) headerlessTime(opt SignalOptions) error {
	looks, step, res, err := s.firstColumnSteps(0)
	if err != nil || !looks {
		return err
	}
	readings := "--time-column first --time-unit s|ms|samples (it is time) or --time-column none (it is channel 1)"
	ch := metaValue(s.Meta, "channels")
	switch ch {
	case strconv.Itoa(s.cols):
		s.Notes = append(s.Notes, fmt.Sprintf("first column kept as a channel: the line \"channels: %s\" counts it", ch))
		return nil
	case strconv.Itoa(s.cols - 1):
		rate := s.knownRate(opt)
		if rate == 0 {
			return perr(s.File, s.lay.firstRowLine, 1, "give the rate (--rate or a \"sampling rate:\" line) or "+readings, "no header; the first column rises by %g on every row and \"channels: %s\" leaves it out, but without a rate its unit is not known", step, ch)
		}
		u, why := stepUnit(step, res, rate)
		if u == "" {
			return perr(s.File, s.lay.firstRowLine, 1, readings, "no header; the first column rises by one step on every row, but %s", why)
		}
		s.tcol = 0
		s.detectedUnit = u
		s.Notes = append(s.Notes, fmt.Sprintf("no header: the first column is time in %s (\"channels: %s\" leaves it out, and it rises by one sample at %g Hz on every row)", u, ch, rate))
		return nil
	}
	return perr(s.File, s.lay.firstRowLine, 1, "give "+readings+"; or a header line, or a \"channels: N\" line above the table", "no header, and the first column rises by %g on every row like a time column: it is time or a channel, and the two readings store different values", step)
}

// timeUnitFromRate gives the unit of a time column whose header names
// none: s, ms or samples when exactly one makes its step one sample at the
// known rate; otherwise an error asking for --time-unit.
func (s *Signals) timeUnitFromRate(opt SignalOptions) (string, string, error) {
	if s.detectedUnit != "" {
		return s.detectedUnit, "from its step at the known rate", nil
	}
	hint := "give --time-unit s, ms or samples (or write the unit in the header, e.g. \"time [ms]\")"
	looks, step, res, err := s.firstColumnSteps(s.tcol)
	if err != nil {
		return "", "", err
	}
	rate := s.knownRate(opt)
	if !looks || rate == 0 {
		return "", "", perr(s.File, s.lay.headerLine, s.tcol+1, hint, "the time column %q has no unit", s.TimeLabel)
	}
	u, why := stepUnit(step, res, rate)
	if u == "" {
		return "", "", perr(s.File, s.lay.headerLine, s.tcol+1, hint, "the time column %q has no unit, and %s", s.TimeLabel, why)
	}
	return u, fmt.Sprintf("its step %g is one sample at %g Hz", step, rate), nil
}
