package edfplus

import (
	"fmt"
	"io"
	"math"
	"os"
)

// Reader reads the data records of one file, one at a time.
type Reader struct {
	Header *Header
	name   string
	r      io.ReaderAt
	closer io.Closer
	buf    []byte
	// offsets of each signal's bytes within a record
	sigOff []int
}

// Open opens a file and checks its header and length.
func Open(path string) (*Reader, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	st, err := f.Stat()
	if err != nil {
		f.Close()
		return nil, err
	}
	r, err := NewReader(f, st.Size(), path)
	if err != nil {
		f.Close()
		return nil, err
	}
	r.closer = f
	return r, nil
}

// NewReader checks the header of r (size bytes long; name is used in
// errors) and that the file holds exactly the declared data records.
func NewReader(r io.ReaderAt, size int64, name string) (*Reader, error) {
	h, err := ReadHeader(io.NewSectionReader(r, 0, size))
	if err != nil {
		if he, ok := err.(*HeaderError); ok {
			he.File = name
		}
		return nil, err
	}
	rb := int64(h.RecordBytes())
	want := int64(h.HeaderBytes()) + int64(h.Records)*rb
	if size < want {
		full := (size - int64(h.HeaderBytes())) / rb
		return nil, &HeaderError{File: name, Offset: int64(h.HeaderBytes()) + full*rb, Field: "number of data records", Value: fmt.Sprint(h.Records),
			Msg: fmt.Sprintf("the file holds %d whole data records of %d bytes and %d bytes of a truncated one, not %d records (%d bytes expected, %d found)",
				full, rb, (size-int64(h.HeaderBytes()))%rb, h.Records, want, size)}
	}
	if size > want {
		return nil, &HeaderError{File: name, Offset: want, Field: "number of data records", Value: fmt.Sprint(h.Records),
			Msg: fmt.Sprintf("%d bytes follow the last of %d data records; the record count or the samples per record are wrong", size-want, h.Records)}
	}
	rd := &Reader{Header: h, name: name, r: r, buf: make([]byte, rb)}
	off := 0
	for _, s := range h.Signals {
		rd.sigOff = append(rd.sigOff, off)
		off += s.SamplesPerRecord * h.Format.BytesPerSample()
	}
	return rd, nil
}

// Close closes the file opened by Open.
func (r *Reader) Close() error {
	if r.closer != nil {
		return r.closer.Close()
	}
	return nil
}

// Record is one data record: the digital samples of each signal and the
// annotations. Reuse one Record across ReadRecord calls: its buffers are
// kept and memory stays flat.
type Record struct {
	Index int
	// OnsetS is the record's start in seconds after Header.Start: the
	// time-keeping TAL's onset in EDF+/BDF+, Index*RecordDurationS otherwise.
	OnsetS float64
	// Digital holds the samples of signal i; empty for annotation signals.
	Digital [][]int32
	// Annotations are the record's annotations, time-keeping TAL excluded.
	Annotations []Annotation
}

// ReadRecord reads data record i (0-based) into rec.
func (r *Reader) ReadRecord(i int, rec *Record) error {
	h := r.Header
	if i < 0 || i >= h.Records {
		return fmt.Errorf("%s: data record %d outside 0..%d", r.name, i, h.Records-1)
	}
	base := int64(h.HeaderBytes()) + int64(i)*int64(len(r.buf))
	if _, err := r.r.ReadAt(r.buf, base); err != nil {
		return fmt.Errorf("%s: data record %d at byte %d: %w", r.name, i, base, err)
	}
	if len(rec.Digital) != len(h.Signals) {
		rec.Digital = make([][]int32, len(h.Signals))
	}
	rec.Index = i
	rec.OnsetS = float64(i) * h.RecordDurationS
	rec.Annotations = rec.Annotations[:0]
	keepingSeen := false
	bps := h.Format.BytesPerSample()
	for s, sig := range h.Signals {
		b := r.buf[r.sigOff[s] : r.sigOff[s]+sig.SamplesPerRecord*bps]
		if sig.Annotations {
			rec.Digital[s] = rec.Digital[s][:0]
			anns, keep, _, err := ParseTALs(b, i, base+int64(r.sigOff[s]))
			if err != nil {
				return fmt.Errorf("%s: %w", r.name, err)
			}
			if !keepingSeen {
				if math.IsNaN(keep) {
					return fmt.Errorf("%s: %w", r.name, &TALError{i, base + int64(r.sigOff[s]), "the first annotation signal of a record must start with a time-keeping TAL (EDF+ 2.2.4)"})
				}
				rec.OnsetS = keep
				keepingSeen = true
			}
			rec.Annotations = append(rec.Annotations, anns...)
			continue
		}
		d := rec.Digital[s]
		if cap(d) < sig.SamplesPerRecord {
			d = make([]int32, sig.SamplesPerRecord)
		}
		d = d[:sig.SamplesPerRecord]
		if bps == 2 {
			for k := range d {
				d[k] = int32(int16(uint16(b[2*k]) | uint16(b[2*k+1])<<8))
			}
		} else {
			for k := range d {
				v := uint32(b[3*k]) | uint32(b[3*k+1])<<8 | uint32(b[3*k+2])<<16
				d[k] = int32(v<<8) >> 8
			}
		}
		rec.Digital[s] = d
	}
	return nil
}
