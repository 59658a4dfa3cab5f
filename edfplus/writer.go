package edfplus

import (
	"bufio"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
)

// Writer writes a header and then data records to an io.Writer.
type Writer struct {
	h       *Header
	w       *bufio.Writer
	written int
	buf     []byte
}

// FormatNumber returns the shortest decimal text of v that fits width
// characters, and the value that text reads back as. Digits are dropped
// from the end (rounding) when v needs more; an error when even the whole
// part does not fit.
func FormatNumber(v float64, width int) (string, float64, error) {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "", 0, fmt.Errorf("edfplus: %v cannot be written in a header", v)
	}
	s := strconv.FormatFloat(v, 'f', -1, 64)
	if len(s) <= width {
		return s, v, nil
	}
	for prec := width; prec >= 0; prec-- {
		s = strconv.FormatFloat(v, 'f', prec, 64)
		if len(s) <= width {
			r, _ := strconv.ParseFloat(s, 64)
			return s, r, nil
		}
	}
	return "", 0, fmt.Errorf("edfplus: %g does not fit %d characters", v, width)
}

func put(dst []byte, name, s string) error {
	if len(s) > len(dst) {
		return fmt.Errorf("edfplus: header field %s %q is longer than %d characters", name, s, len(dst))
	}
	for i := 0; i < len(s); i++ {
		if s[i] < 32 || s[i] > 126 {
			return fmt.Errorf("edfplus: header field %s %q holds a byte outside printable US-ASCII", name, s)
		}
	}
	copy(dst, s)
	for i := len(s); i < len(dst); i++ {
		dst[i] = ' '
	}
	return nil
}

// EncodeHeader returns the header bytes of h. Numbers come from the *Text
// fields when set, else the shortest text that fits.
func EncodeHeader(h *Header) ([]byte, error) {
	ns := len(h.Signals)
	if ns < 1 || ns > MaxSignals {
		return nil, fmt.Errorf("edfplus: %d signals (1..%d)", ns, MaxSignals)
	}
	b := make([]byte, 256*(ns+1))
	var errs []error
	p := func(off, width int, name, s string) {
		if err := put(b[off:off+width], name, s); err != nil {
			errs = append(errs, err)
		}
	}
	if h.Format == BDF {
		b[0] = 0xFF
		copy(b[1:8], "BIOSEMI")
	} else {
		copy(b[0:8], "0       ")
	}
	p(8, 80, "patient", h.Patient)
	p(88, 80, "recording", h.Recording)
	t := h.Start
	p(168, 8, "startdate", fmt.Sprintf("%02d.%02d.%02d", t.Day(), int(t.Month()), t.Year()%100))
	p(176, 8, "starttime", fmt.Sprintf("%02d.%02d.%02d", t.Hour(), t.Minute(), t.Second()))
	p(184, 8, "header bytes", strconv.Itoa(256*(ns+1)))
	reserved := h.Reserved
	if h.Plus {
		kind := "+C"
		if h.Discontinuous {
			kind = "+D"
		}
		reserved = h.Format.String() + kind
	} else if h.Format == BDF && reserved == "" {
		reserved = "24BIT"
	}
	p(192, 44, "reserved", reserved)
	p(236, 8, "number of data records", strconv.Itoa(h.Records))
	dur := h.RecordDurationText
	if dur == "" {
		var err error
		if dur, _, err = FormatNumber(h.RecordDurationS, 8); err != nil {
			errs = append(errs, err)
		}
	}
	p(244, 8, "duration of a data record", dur)
	p(252, 4, "number of signals", strconv.Itoa(ns))
	off := 256
	num := func(v float64, text string) string {
		if text != "" {
			return text
		}
		s, _, err := FormatNumber(v, 8)
		if err != nil {
			errs = append(errs, err)
		}
		return s
	}
	for k, f := range signalFields {
		for i, s := range h.Signals {
			name := fmt.Sprintf("%s of signal %d", f.name, i+1)
			var v string
			switch k {
			case 0:
				v = s.Label
			case 1:
				v = s.Transducer
			case 2:
				v = s.PhysicalDimension
			case 3:
				v = num(s.PhysicalMin, s.PhysicalMinText)
			case 4:
				v = num(s.PhysicalMax, s.PhysicalMaxText)
			case 5:
				v = strconv.Itoa(s.DigitalMin)
			case 6:
				v = strconv.Itoa(s.DigitalMax)
			case 7:
				v = s.Prefiltering
			case 8:
				v = strconv.Itoa(s.SamplesPerRecord)
			case 9:
				v = s.Reserved
			}
			p(off+i*f.width, f.width, name, v)
		}
		off += ns * f.width
	}
	if len(errs) > 0 {
		return nil, errs[0]
	}
	return b, nil
}

// NewWriter writes h's header to w. h.Records must already be the number
// of records that will be written. It sets each signal's Annotations flag
// from its label, as the reader does.
func NewWriter(w io.Writer, h *Header) (*Writer, error) {
	hb, err := EncodeHeader(h)
	if err != nil {
		return nil, err
	}
	// The header must read back as written: every check of the reader applies.
	if _, err := ReadHeader(strings.NewReader(string(hb))); err != nil {
		return nil, fmt.Errorf("edfplus: the header would not read back: %w", err)
	}
	for i := range h.Signals {
		s := &h.Signals[i]
		s.Annotations = h.Plus && s.Label == h.Format.AnnotationLabel()
	}
	bw := bufio.NewWriterSize(w, 1<<20)
	if _, err := bw.Write(hb); err != nil {
		return nil, err
	}
	return &Writer{h: h, w: bw, buf: make([]byte, h.RecordBytes())}, nil
}

// WriteRecord writes the next data record: digital[i] holds signal i's
// samples (ignored for annotation signals), tals[i] the TAL bytes of
// annotation signal i (the time-keeping TAL first, see TimeKeepingTAL),
// padded with zero bytes. Values outside the signal's digital range are
// refused.
func (w *Writer) WriteRecord(digital [][]int32, tals [][]byte) error {
	h := w.h
	if w.written >= h.Records {
		return fmt.Errorf("edfplus: the header declares %d data records; no more can be written", h.Records)
	}
	bps := h.Format.BytesPerSample()
	off := 0
	for i, s := range h.Signals {
		n := s.SamplesPerRecord * bps
		b := w.buf[off : off+n]
		off += n
		if s.Annotations {
			var t []byte
			if i < len(tals) {
				t = tals[i]
			}
			if len(t) > n {
				return fmt.Errorf("edfplus: record %d: %d bytes of annotations do not fit the %d bytes of signal %d", w.written, len(t), n, i+1)
			}
			copy(b, t)
			clear(b[len(t):])
			continue
		}
		d := digital[i]
		if len(d) != s.SamplesPerRecord {
			return fmt.Errorf("edfplus: record %d signal %d: %d samples, the header says %d", w.written, i+1, len(d), s.SamplesPerRecord)
		}
		for k, v := range d {
			if int(v) < s.DigitalMin || int(v) > s.DigitalMax {
				return fmt.Errorf("edfplus: record %d signal %d (%s) sample %d: digital %d outside %d..%d", w.written, i+1, s.Label, k, v, s.DigitalMin, s.DigitalMax)
			}
			u := uint32(v)
			b[bps*k] = byte(u)
			b[bps*k+1] = byte(u >> 8)
			if bps == 3 {
				b[3*k+2] = byte(u >> 16)
			}
		}
	}
	if _, err := w.w.Write(w.buf); err != nil {
		return err
	}
	w.written++
	return nil
}

// Close flushes the records and checks that as many were written as the
// header declares.
func (w *Writer) Close() error {
	if err := w.w.Flush(); err != nil {
		return err
	}
	if w.written != w.h.Records {
		return fmt.Errorf("edfplus: %d data records written, the header declares %d", w.written, w.h.Records)
	}
	return nil
}

// CheckAnnotationText refuses texts that the TAL format cannot hold (the
// bytes 0, 20 and 21 separate its parts).
func CheckAnnotationText(s string) error {
	if strings.ContainsAny(s, "\x00\x14\x15") {
		return fmt.Errorf("edfplus: annotation %q holds a byte 0, 20 or 21, which TALs use as separators", s)
	}
	return nil
}
