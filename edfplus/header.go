package edfplus

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"
)

// Format is the sample width of a file.
type Format int

// Formats.
const (
	// EDF stores 16-bit two's complement little-endian samples.
	EDF Format = iota
	// BDF stores 24-bit two's complement little-endian samples.
	BDF
)

// String names the format as the standards do.
func (f Format) String() string {
	if f == BDF {
		return "BDF"
	}
	return "EDF"
}

// BytesPerSample is 2 for EDF and 3 for BDF.
func (f Format) BytesPerSample() int {
	if f == BDF {
		return 3
	}
	return 2
}

// DigitalRange is the widest digital range of the format: -32768..32767 for
// EDF, -8388608..8388607 for BDF.
func (f Format) DigitalRange() (min, max int) {
	if f == BDF {
		return -1 << 23, 1<<23 - 1
	}
	return -1 << 15, 1<<15 - 1
}

// MaxSignals bounds the number of signals a header may declare; far above
// any amplifier (a 256-byte header block each).
const MaxSignals = 4096

// Header is the fixed part of a file and one entry per signal.
type Header struct {
	Format Format
	// Plus is true for EDF+ and BDF+ (reserved field "EDF+C", "EDF+D",
	// "BDF+C" or "BDF+D").
	Plus bool
	// Discontinuous is true for EDF+D/BDF+D: records are not contiguous in
	// time and each record's onset comes from its time-keeping TAL.
	Discontinuous bool
	// Patient and Recording are the 80-character identification fields, with
	// trailing spaces removed. In EDF+ they hold subfields separated by
	// spaces (section 2.1.3.3 and 2.1.3.4), "X" for unknown.
	Patient, Recording string
	// Start is the start date and time of the first record (UTC is not
	// implied: EDF stores local clock time without a zone).
	Start time.Time
	// Records is the number of data records.
	Records int
	// RecordDurationS is the duration of a data record in seconds, and
	// RecordDurationText the field's text, kept for exact rewriting.
	RecordDurationS    float64
	RecordDurationText string
	// Reserved is the 44-character reserved field as read (trailing spaces
	// removed).
	Reserved string
	Signals  []Signal
}

// Signal is the header of one signal.
type Signal struct {
	Label, Transducer, PhysicalDimension string
	// PhysicalMin and PhysicalMax are the physical values of DigitalMin and
	// DigitalMax; PhysicalMinText and PhysicalMaxText their header text.
	PhysicalMin, PhysicalMax         float64
	PhysicalMinText, PhysicalMaxText string
	DigitalMin, DigitalMax           int
	Prefiltering                     string
	SamplesPerRecord                 int
	Reserved                         string
	// Annotations is true for an "EDF Annotations" / "BDF Annotations"
	// signal (EDF+/BDF+ only): its bytes are TALs, not samples.
	Annotations bool
}

// Scale is the physical value of one digital step:
// (PhysicalMax-PhysicalMin)/(DigitalMax-DigitalMin).
func (s Signal) Scale() float64 {
	return (s.PhysicalMax - s.PhysicalMin) / float64(s.DigitalMax-s.DigitalMin)
}

// Offset is the physical value of digital 0: PhysicalMin - DigitalMin*Scale.
func (s Signal) Offset() float64 { return s.PhysicalMin - float64(s.DigitalMin)*s.Scale() }

// Physical converts one digital value to its physical value. The formula
// is evaluated as PhysicalMin + (d-DigitalMin)*Scale so that DigitalMin and
// DigitalMax map exactly onto PhysicalMin and close to PhysicalMax.
func (s Signal) Physical(d int32) float64 {
	return s.PhysicalMin + float64(int64(d)-int64(s.DigitalMin))*s.Scale()
}

// Digital is the inverse of Physical: the digital value whose physical
// value is nearest to v, clamped to the digital range.
func (s Signal) Digital(v float64) int32 {
	d := math.Round((v-s.PhysicalMin)/s.Scale()) + float64(s.DigitalMin)
	if d < float64(s.DigitalMin) || math.IsNaN(d) {
		return int32(s.DigitalMin)
	}
	if d > float64(s.DigitalMax) {
		return int32(s.DigitalMax)
	}
	return int32(d)
}

// SamplingRateHz is SamplesPerRecord / RecordDurationS of signal i (0 when
// the record duration is 0).
func (h *Header) SamplingRateHz(i int) float64 {
	if h.RecordDurationS <= 0 {
		return 0
	}
	return float64(h.Signals[i].SamplesPerRecord) / h.RecordDurationS
}

// HeaderBytes is the header size: 256 bytes and 256 per signal.
func (h *Header) HeaderBytes() int { return 256 * (len(h.Signals) + 1) }

// RecordBytes is the size of one data record.
func (h *Header) RecordBytes() int {
	n := 0
	for _, s := range h.Signals {
		n += s.SamplesPerRecord
	}
	return n * h.Format.BytesPerSample()
}

// AnnotationLabel is the label of the annotation signal of the format.
func (f Format) AnnotationLabel() string { return f.String() + " Annotations" }

// HeaderError is a header field refused, with its byte offset in the file.
type HeaderError struct {
	File string
	// Offset is the byte offset of the field from the start of the file.
	Offset int64
	// Field names the header field, e.g. "number of data records" or
	// "samples per record of signal 3 (EMG12)".
	Field string
	// Value is the field's text as read.
	Value string
	Msg   string
}

func (e *HeaderError) Error() string {
	f := ""
	if e.File != "" {
		f = e.File + ": "
	}
	return fmt.Sprintf("%sbyte %d, header field %s = %q: %s", f, e.Offset, e.Field, e.Value, e.Msg)
}

// Header field widths and offsets (EDF specification, "the header record").
var fixedFields = []struct {
	name  string
	width int
}{
	{"version", 8}, {"local patient identification", 80}, {"local recording identification", 80},
	{"startdate", 8}, {"starttime", 8}, {"number of bytes in header record", 8}, {"reserved", 44},
	{"number of data records", 8}, {"duration of a data record", 8}, {"number of signals", 4},
}

var signalFields = []struct {
	name  string
	width int
}{
	{"label", 16}, {"transducer type", 80}, {"physical dimension", 8}, {"physical minimum", 8},
	{"physical maximum", 8}, {"digital minimum", 8}, {"digital maximum", 8}, {"prefiltering", 80},
	{"nr of samples in each data record", 8}, {"reserved", 32},
}

type field struct {
	off  int64
	name string
	raw  []byte
}

func (f field) err(format string, a ...any) *HeaderError {
	return &HeaderError{Offset: f.off, Field: f.name, Value: string(f.raw), Msg: fmt.Sprintf(format, a...)}
}

// text checks that the field is printable US-ASCII (EDF+ 2.1.1: bytes 32
// to 126) and returns it with trailing spaces removed.
func (f field) text() (string, *HeaderError) {
	for i, c := range f.raw {
		if c < 32 || c > 126 {
			e := f.err("byte %d of the field is 0x%02x; header fields hold printable US-ASCII only (32..126)", i, c)
			e.Offset += int64(i)
			e.Value = strings.ToValidUTF8(string(f.raw), "?")
			return "", e
		}
	}
	return strings.TrimRight(string(f.raw), " "), nil
}

// integer reads a whole number field (spaces around allowed).
func (f field) integer() (int, *HeaderError) {
	s, e := f.text()
	if e != nil {
		return 0, e
	}
	s = strings.TrimSpace(s)
	if s == "" {
		return 0, f.err("empty; a whole number is required")
	}
	for i, c := range s {
		if !(c >= '0' && c <= '9' || i == 0 && (c == '-' || c == '+')) {
			return 0, f.err("not a whole number")
		}
	}
	n, err := strconv.Atoi(s)
	if err != nil {
		return 0, f.err("not a whole number: %v", err)
	}
	return n, nil
}

// decimal reads a decimal number field: sign, digits, optional point and
// digits, optional exponent. NaN, Inf and hexadecimal are refused.
func (f field) decimal() (float64, string, *HeaderError) {
	s, e := f.text()
	if e != nil {
		return 0, "", e
	}
	s = strings.TrimSpace(s)
	if !isDecimal(s) {
		return 0, "", f.err("not a decimal number")
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil || math.IsInf(v, 0) {
		return 0, "", f.err("not a finite decimal number")
	}
	return v, s, nil
}

func isDecimal(s string) bool {
	i, digits := 0, 0
	if i < len(s) && (s[i] == '+' || s[i] == '-') {
		i++
	}
	for i < len(s) && s[i] >= '0' && s[i] <= '9' {
		i, digits = i+1, digits+1
	}
	if i < len(s) && s[i] == '.' {
		i++
		for i < len(s) && s[i] >= '0' && s[i] <= '9' {
			i, digits = i+1, digits+1
		}
	}
	if digits == 0 {
		return false
	}
	if i < len(s) && (s[i] == 'e' || s[i] == 'E') {
		i++
		if i < len(s) && (s[i] == '+' || s[i] == '-') {
			i++
		}
		d := 0
		for i < len(s) && s[i] >= '0' && s[i] <= '9' {
			i, d = i+1, d+1
		}
		if d == 0 {
			return false
		}
	}
	return i == len(s)
}

// ReadHeader reads and checks the header at the start of r. It reads
// exactly the header's bytes (256 and 256 per signal).
func ReadHeader(r io.Reader) (*Header, error) {
	fixed := make([]byte, 256)
	if n, err := io.ReadFull(r, fixed); err != nil {
		return nil, &HeaderError{Offset: int64(n), Field: "header record", Msg: fmt.Sprintf("the file ends after %d bytes; a header is at least 256 bytes", n)}
	}
	fs := make([]field, len(fixedFields))
	off := 0
	for i, d := range fixedFields {
		fs[i] = field{off: int64(off), name: d.name, raw: fixed[off : off+d.width]}
		off += d.width
	}
	h := &Header{}
	// Version: "0       " (EDF) or 0xFF "BIOSEMI" (BDF).
	switch v := fs[0].raw; {
	case string(v) == "0       ":
		h.Format = EDF
	case v[0] == 0xFF && string(v[1:]) == "BIOSEMI":
		h.Format = BDF
	default:
		return nil, fs[0].err(`not "0" (EDF) nor 0xFF "BIOSEMI" (BDF): this is not an EDF or BDF file`)
	}
	var e *HeaderError
	if h.Patient, e = fs[1].text(); e != nil {
		return nil, e
	}
	if h.Recording, e = fs[2].text(); e != nil {
		return nil, e
	}
	if h.Reserved, e = fs[6].text(); e != nil {
		return nil, e
	}
	switch {
	case strings.HasPrefix(h.Reserved, h.Format.String()+"+C"):
		h.Plus = true
	case strings.HasPrefix(h.Reserved, h.Format.String()+"+D"):
		h.Plus, h.Discontinuous = true, true
	case strings.HasPrefix(h.Reserved, "EDF+"), strings.HasPrefix(h.Reserved, "BDF+"):
		return nil, fs[6].err("a %s file must say %s+C or %s+D here", h.Format, h.Format, h.Format)
	}
	start, e := parseStart(fs[3], fs[4], h)
	if e != nil {
		return nil, e
	}
	h.Start = start
	hb, e := fs[5].integer()
	if e != nil {
		return nil, e
	}
	if h.Records, e = fs[7].integer(); e != nil {
		return nil, e
	}
	if h.Records == -1 {
		return nil, fs[7].err("-1 means the recording was not closed properly; the number of records is unknown")
	}
	if h.Records < 1 {
		return nil, fs[7].err("at least one data record is required")
	}
	if h.RecordDurationS, h.RecordDurationText, e = fs[8].decimal(); e != nil {
		return nil, e
	}
	if h.RecordDurationS < 0 {
		return nil, fs[8].err("a duration cannot be negative")
	}
	ns, e := fs[9].integer()
	if e != nil {
		return nil, e
	}
	if ns < 1 || ns > MaxSignals {
		return nil, fs[9].err("between 1 and %d signals are accepted", MaxSignals)
	}
	if hb != 256*(ns+1) {
		return nil, fs[5].err("%d signals need a header of 256*(1+%d) = %d bytes", ns, ns, 256*(ns+1))
	}
	rest := make([]byte, 256*ns)
	if n, err := io.ReadFull(r, rest); err != nil {
		return nil, &HeaderError{Offset: int64(256 + n), Field: "signal headers", Msg: fmt.Sprintf("the file ends inside the header: %d of %d bytes of signal headers", n, 256*ns)}
	}
	if err := parseSignals(h, rest, ns); err != nil {
		return nil, err
	}
	if err := checkDate(fs[2], fs[3], h); err != nil {
		return nil, err
	}
	return h, nil
}

func parseSignals(h *Header, rest []byte, ns int) *HeaderError {
	h.Signals = make([]Signal, ns)
	off := 0
	get := func(k, i int) field {
		w := signalFields[k].width
		return field{off: int64(256 + off + i*w), name: fmt.Sprintf("%s of signal %d", signalFields[k].name, i+1), raw: rest[off+i*w : off+(i+1)*w]}
	}
	seen := map[string]int{}
	annots := 0
	lo, hi := h.Format.DigitalRange()
	for k, d := range signalFields {
		for i := 0; i < ns; i++ {
			f := get(k, i)
			s := &h.Signals[i]
			var e *HeaderError
			switch k {
			case 0:
				if s.Label, e = f.text(); e == nil {
					s.Label = strings.TrimSpace(s.Label)
					switch {
					case s.Label == "":
						e = f.err("empty label; every signal needs one")
					case seen[s.Label] > 0 && !(h.Plus && s.Label == h.Format.AnnotationLabel()):
						e = f.err("the same label as signal %d; labels must tell signals apart", seen[s.Label])
					}
					seen[s.Label] = i + 1
					s.Annotations = h.Plus && s.Label == h.Format.AnnotationLabel()
					if s.Annotations {
						annots++
					}
				}
			case 1:
				s.Transducer, e = f.text()
			case 2:
				s.PhysicalDimension, e = f.text()
			case 3:
				s.PhysicalMin, s.PhysicalMinText, e = f.decimal()
			case 4:
				if s.PhysicalMax, s.PhysicalMaxText, e = f.decimal(); e == nil && s.PhysicalMax == s.PhysicalMin {
					e = f.err("equal to the physical minimum: no scaling can be derived")
				}
			case 5:
				if s.DigitalMin, e = f.integer(); e == nil && (s.DigitalMin < lo || s.DigitalMin > hi) {
					e = f.err("outside the %s range %d..%d", h.Format, lo, hi)
				}
			case 6:
				if s.DigitalMax, e = f.integer(); e == nil {
					switch {
					case s.DigitalMax < lo || s.DigitalMax > hi:
						e = f.err("outside the %s range %d..%d", h.Format, lo, hi)
					case s.DigitalMax <= s.DigitalMin:
						e = f.err("not above the digital minimum %d", s.DigitalMin)
					}
				}
			case 7:
				s.Prefiltering, e = f.text()
			case 8:
				if s.SamplesPerRecord, e = f.integer(); e == nil && s.SamplesPerRecord < 1 {
					e = f.err("at least one sample per record is required")
				} else if e == nil && s.SamplesPerRecord > 1<<24 {
					e = f.err("more than %d samples per record", 1<<24)
				}
			case 9:
				s.Reserved, e = f.text()
			}
			if e != nil {
				return e
			}
		}
		off += ns * d.width
	}
	if h.Plus && annots == 0 {
		return &HeaderError{Offset: 256, Field: "label of signal 1..", Value: "", Msg: fmt.Sprintf("an %s+ file needs a signal labelled %q", h.Format, h.Format.AnnotationLabel())}
	}
	if h.RecordDurationS == 0 {
		for i, s := range h.Signals {
			if !s.Annotations {
				return &HeaderError{Offset: 244, Field: "duration of a data record", Value: h.RecordDurationText,
					Msg: fmt.Sprintf("0 s records cannot hold samples, and signal %d (%s) has %d per record", i+1, s.Label, s.SamplesPerRecord)}
			}
		}
	}
	if int64(h.RecordBytes()) > 1<<30 {
		return &HeaderError{Offset: 256, Field: "nr of samples in each data record", Msg: fmt.Sprintf("a data record of %d bytes is more than 1 GiB", h.RecordBytes())}
	}
	return nil
}

// parseStart reads startdate dd.mm.yy and starttime hh.mm.ss. Years 85-99
// are 1985-1999 and 00-84 are 2000-2084 (EDF+ 2.1.3.2, the "clipping
// date"); checkDate replaces the year by the EDF+ recording field's
// four-digit year when there is one.
func parseStart(date, clock field, h *Header) (time.Time, *HeaderError) {
	d, e := date.text()
	if e != nil {
		return time.Time{}, e
	}
	c, e := clock.text()
	if e != nil {
		return time.Time{}, e
	}
	dd, mm, yy, ok := threeNumbers(d)
	if !ok {
		return time.Time{}, date.err("not dd.mm.yy")
	}
	hh, mi, ss, ok := threeNumbers(c)
	if !ok {
		return time.Time{}, clock.err("not hh.mm.ss")
	}
	year := 2000 + yy
	if yy >= 85 {
		year = 1900 + yy
	}
	if hh > 23 || mi > 59 || ss > 59 {
		return time.Time{}, clock.err("no such time of day")
	}
	t := time.Date(year, time.Month(mm), dd, hh, mi, ss, 0, time.UTC)
	if mm < 1 || mm > 12 || dd < 1 || t.Day() != dd || t.Month() != time.Month(mm) {
		return time.Time{}, date.err("no such date")
	}
	return t, nil
}

func threeNumbers(s string) (a, b, c int, ok bool) {
	if len(s) != 8 || s[2] != '.' || s[5] != '.' {
		return 0, 0, 0, false
	}
	var v [3]int
	for k := 0; k < 3; k++ {
		for _, ch := range s[3*k : 3*k+2] {
			if ch < '0' || ch > '9' {
				return 0, 0, 0, false
			}
			v[k] = v[k]*10 + int(ch-'0')
		}
	}
	return v[0], v[1], v[2], true
}

var months = []string{"JAN", "FEB", "MAR", "APR", "MAY", "JUN", "JUL", "AUG", "SEP", "OCT", "NOV", "DEC"}

// checkDate reads the EDF+ recording field's "Startdate dd-MMM-yyyy"
// (section 2.1.3.3) and takes its four-digit year; the day and month must
// agree with the startdate field.
func checkDate(rec, date field, h *Header) *HeaderError {
	if !h.Plus {
		return nil
	}
	parts := strings.Fields(h.Recording)
	if len(parts) < 2 || parts[0] != "Startdate" || parts[1] == "X" {
		return nil
	}
	p := strings.Split(parts[1], "-")
	if len(p) != 3 || len(p[0]) != 2 || len(p[2]) != 4 {
		return rec.err("the EDF+ startdate subfield %q is not dd-MMM-yyyy", parts[1])
	}
	day, err1 := strconv.Atoi(p[0])
	year, err2 := strconv.Atoi(p[2])
	mon := 0
	for i, m := range months {
		if strings.EqualFold(p[1], m) {
			mon = i + 1
		}
	}
	if err1 != nil || err2 != nil || mon == 0 {
		return rec.err("the EDF+ startdate subfield %q is not dd-MMM-yyyy", parts[1])
	}
	if day != h.Start.Day() || mon != int(h.Start.Month()) || year%100 != h.Start.Year()%100 {
		return date.err("disagrees with the recording field's startdate %s", parts[1])
	}
	s := h.Start
	h.Start = time.Date(year, s.Month(), s.Day(), s.Hour(), s.Minute(), s.Second(), 0, time.UTC)
	return nil
}
