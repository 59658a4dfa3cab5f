package convert

import (
	"errors"
	"fmt"
	"math"
	"regexp"
	"strconv"
	"strings"

	"muarc/edfplus"
	"muarc/record"
)

var prefilterRe = regexp.MustCompile(`(?i)\b(HP|LP):\s*([0-9.]+)\s*(k?Hz)`)

var notchRe = regexp.MustCompile(`(?i)\bN:\s*([0-9.]+)\s*Hz`)

// prefilterNotes says what an array's EDF prefiltering text gave: the
// band-pass corners, where the text is kept, and that a notch does not set
// the mains frequency.
func prefilterNotes(a *record.Array) []string {
	pre, _ := a.Extra[ExtraEDFPrefilter].(string)
	notes := []string{fmt.Sprintf("array %s: prefiltering %q (its HP and LP corners fill filter_low_hz and filter_high_hz where the metadata gives none: now %g and %g Hz, NaN when not known); the text is kept in %s", a.Name, pre, a.FilterLowHz, a.FilterHighHz, ExtraEDFPrefilter)}
	if m := notchRe.FindStringSubmatch(pre); m != nil {
		notes = append(notes, fmt.Sprintf("array %s: the prefiltering names a notch at %s Hz; session.power_line_hz is not set from it (a notch is a filter, not a statement of the mains frequency): give it in the metadata", a.Name, m[1]))
	}
	return notes
}

// parsePrefilter reads the EDF+ prefiltering convention "HP:0.1Hz LP:75Hz"
// (EDF+ 2.1.3.5); NaN for a corner not given.
func parsePrefilter(s string) (lowHz, highHz float64) {
	lowHz, highHz = math.NaN(), math.NaN()
	for _, m := range prefilterRe.FindAllStringSubmatch(s, -1) {
		v, err := strconv.ParseFloat(m[2], 64)
		if err != nil {
			continue
		}
		if strings.EqualFold(m[3], "kHz") {
			v *= 1000
		}
		if strings.EqualFold(m[1], "HP") {
			lowHz = v
		} else {
			highHz = v
		}
	}
	return lowHz, highHz
}

// edfSource streams an array's physical values from the file, record by
// record: one record's digital values in memory whatever the length.
type edfSource struct {
	path       string
	sigs       []int
	rows, spr  int
	r          *edfplus.Reader
	rec        edfplus.Record
	cur        int
	calibrated []edfplus.Signal
	// counts: the array is stored as the digital values with scale.
	counts bool
	scale  record.CountScale
}

// Scale implements record.CountSource (for an array stored as counts).
func (s *edfSource) Scale() record.CountScale { return s.scale }

// ReadCounts implements record.CountSource: the digital values.
func (s *edfSource) ReadCounts(start int, dst []int32) error {
	return s.each(start, len(dst), func(i int, d int32, _ int) { dst[i] = d })
}

func (s *edfSource) Shape() (int, int) { return s.rows, len(s.sigs) }

func (s *edfSource) ReadFloat64(start int, dst []float64) error {
	return s.each(start, len(dst), func(i int, d int32, c int) {
		if s.counts {
			dst[i] = s.scale.Physical(int64(d))
		} else {
			dst[i] = s.calibrated[c].Physical(d)
		}
	})
}

// each calls fn with the digital value of every cell of rows
// [start, start+n/channels), in row-major order.
func (s *edfSource) each(start, n int, fn func(i int, d int32, c int)) error {
	ch := len(s.sigs)
	if n%ch != 0 {
		return errors.New("convert: block is not a whole number of rows")
	}
	n /= ch
	if start < 0 || start+n > s.rows {
		return fmt.Errorf("convert: rows [%d,%d) outside 0..%d", start, start+n, s.rows)
	}
	if s.r == nil {
		r, err := edfplus.Open(s.path)
		if err != nil {
			return err
		}
		s.r = r
		for _, i := range s.sigs {
			s.calibrated = append(s.calibrated, r.Header.Signals[i])
		}
	}
	for row := 0; row < n; row++ {
		ri, k := (start+row)/s.spr, (start+row)%s.spr
		if ri != s.cur {
			if err := s.r.ReadRecord(ri, &s.rec); err != nil {
				return err
			}
			s.cur = ri
		}
		for c, i := range s.sigs {
			fn(row*ch+c, s.rec.Digital[i][k], c)
		}
	}
	if start+n == s.rows {
		s.r.Close()
		s.r, s.cur, s.calibrated = nil, -1, nil
	}
	return nil
}

func (s *edfSource) ReadFloat32(start int, dst []float32) error {
	buf := make([]float64, len(dst))
	if err := s.ReadFloat64(start, buf); err != nil {
		return err
	}
	for i, v := range buf {
		dst[i] = float32(v)
	}
	return nil
}
