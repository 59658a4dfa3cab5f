package deid

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"fmt"
	"hash"
	"math"

	"muarc/recfile"
	"muarc/record"
)

// Checksums of the recorded data, to prove an output carries them bit-exact.

// DataDigests returns the SHA-256 (hex) of the values of every data block of
// a recording, keyed by metadata-view path: force and force_target values,
// EMG samples (in their stored width), discharges per unit, the unit
// figures, extra unit columns and MUAP templates. Values are hashed as their
// IEEE 754 bits, little-endian, so two recordings agree only when every
// value is bit-identical (NaN payloads included). Samples are read in blocks.
func DataDigests(rec *record.Recording) (map[string]string, error) {
	return dataDigests(rec, nil)
}

// dataDigests is DataDigests taking the digests in known as given.
func dataDigests(rec *record.Recording, known map[string]string) (map[string]string, error) {
	out := map[string]string{}
	put := func(k string, h hash.Hash) { out[k] = hex.EncodeToString(h.Sum(nil)) }
	f64 := func(h hash.Hash, v ...float64) {
		var b [8]byte
		for _, x := range v {
			binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
			h.Write(b[:])
		}
	}
	i64 := func(h hash.Hash, v ...int64) {
		var b [8]byte
		for _, x := range v {
			binary.LittleEndian.PutUint64(b[:], uint64(x))
			h.Write(b[:])
		}
	}
	for ti, t := range rec.Trials {
		p := fmt.Sprintf("trials[%d]", ti)
		for name, s := range map[string]record.Signal{"force": t.Force, "force_target": t.ForceTarget} {
			if s.Present() {
				h := sha256.New()
				f64(h, s.Values...)
				put(p+"."+name, h)
			}
		}
		for ai, a := range t.Arrays {
			q := fmt.Sprintf("%s.arrays[%d]", p, ai)
			if d, ok := known[q+".samples"]; ok && a.Samples != nil {
				out[q+".samples"] = d
			} else if a.Samples != nil {
				h := sha256.New()
				if err := hashSamples(h, a); err != nil {
					return nil, fmt.Errorf("%s.samples: %w", q, err)
				}
				put(q+".samples", h)
			}
			for di, d := range a.Decompositions {
				dp := fmt.Sprintf("%s.decompositions[%d]", q, di)
				hd, hu := sha256.New(), sha256.New()
				for _, u := range d.Units {
					i64(hd, u.ID, int64(len(u.Discharges)))
					i64(hd, u.Discharges...)
					i64(hu, u.ID)
					f64(hu, u.Silhouette, u.PNRdB, u.AccuracyPct, u.ISICoV, u.RecruitPctMVC, u.DerecruitPctMVC, u.InitialRatePPS, u.MeanRatePPS)
				}
				put(dp+".discharges", hd)
				put(dp+".units", hu)
				for _, c := range d.ExtraColumns {
					h := sha256.New()
					f64(h, c.Values...)
					for _, s := range c.Text {
						i64(h, int64(len(s)))
						h.Write([]byte(s))
					}
					put(dp+".units[].extra."+c.Name, h)
				}
				if d.MUAPs != nil {
					h := sha256.New()
					i64(h, int64(d.MUAPs.Units), int64(d.MUAPs.Channels), int64(d.MUAPs.Lags), int64(d.MUAPs.FirstLag))
					var b [4]byte
					for _, x := range d.MUAPs.Data {
						binary.LittleEndian.PutUint32(b[:], math.Float32bits(x))
						h.Write(b[:])
					}
					put(dp+".muaps", h)
				}
			}
		}
	}
	return out, nil
}

// hashSamples hashes an array's samples block by block in their stored width.
func hashSamples(h hash.Hash, a record.Array) error {
	rows, ch := a.Samples.Shape()
	if ch <= 0 {
		return nil
	}
	block := max(1, (1<<20)/ch)
	var b [8]byte
	if cs, ok := a.Samples.(record.CountSource); ok && a.SampleType.IsInteger() {
		hashScale(h, cs.Scale())
		buf := make([]int32, block*ch)
		for r := 0; r < rows; r += block {
			n := min(block, rows-r)
			if err := cs.ReadCounts(r, buf[:n*ch]); err != nil {
				return err
			}
			hashCounts(h, buf[:n*ch])
		}
		return nil
	}
	if a.SampleType == record.Float64 {
		buf := make([]float64, block*ch)
		for r := 0; r < rows; r += block {
			n := min(block, rows-r)
			if err := a.Samples.ReadFloat64(r, buf[:n*ch]); err != nil {
				return err
			}
			for _, x := range buf[:n*ch] {
				binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
				h.Write(b[:])
			}
		}
		return nil
	}
	buf := make([]float32, block*ch)
	for r := 0; r < rows; r += block {
		n := min(block, rows-r)
		if err := a.Samples.ReadFloat32(r, buf[:n*ch]); err != nil {
			return err
		}
		for _, x := range buf[:n*ch] {
			binary.LittleEndian.PutUint32(b[:4], math.Float32bits(x))
			h.Write(b[:4])
		}
	}
	return nil
}

// hashingSource hashes the values a sequential reader takes from src, as
// hashSamples would. A read out of order spoils the sum (ok false).
type hashingSource struct {
	src  record.SampleSource
	rec  *record.Array
	h    hash.Hash
	next int
	bad  bool
	b    [8]byte
}

func (s *hashingSource) Shape() (int, int) { return s.src.Shape() }

func (s *hashingSource) ReadFloat32(start int, dst []float32) error {
	if err := s.src.ReadFloat32(start, dst); err != nil {
		return err
	}
	_, ch := s.src.Shape()
	if start != s.next || s.rec.SampleType == record.Float64 || ch == 0 {
		s.bad = true
		return nil
	}
	for _, x := range dst {
		binary.LittleEndian.PutUint32(s.b[:4], math.Float32bits(x))
		s.h.Write(s.b[:4])
	}
	s.next += len(dst) / ch
	return nil
}

func (s *hashingSource) ReadFloat64(start int, dst []float64) error {
	if err := s.src.ReadFloat64(start, dst); err != nil {
		return err
	}
	_, ch := s.src.Shape()
	if start != s.next || s.rec.SampleType != record.Float64 || ch == 0 {
		s.bad = true
		return nil
	}
	for _, x := range dst {
		binary.LittleEndian.PutUint64(s.b[:], math.Float64bits(x))
		s.h.Write(s.b[:])
	}
	s.next += len(dst) / ch
	return nil
}

// sum returns the digest when every row was read once, in order.
func (s *hashingSource) sum() (string, bool) {
	rows, ch := s.src.Shape()
	if s.bad || s.next != rows || ch == 0 {
		return "", false
	}
	return hex.EncodeToString(s.h.Sum(nil)), true
}

// hashScale hashes a count scale: scale_factor, add_offset and decimals.
func hashScale(h hash.Hash, sc record.CountScale) {
	var b [8]byte
	for _, v := range []uint64{math.Float64bits(sc.ScaleFactor), math.Float64bits(sc.AddOffset), uint64(int64(sc.Decimals))} {
		binary.LittleEndian.PutUint64(b[:], v)
		h.Write(b[:])
	}
}

// hashCounts hashes counts as little-endian int32.
func hashCounts(h hash.Hash, k []int32) {
	var b [4]byte
	for _, x := range k {
		binary.LittleEndian.PutUint32(b[:], uint32(x))
		h.Write(b[:])
	}
}

// hashingCounts is a hashingSource for integer samples: the writer takes
// the counts (ReadCounts) and they are hashed as hashSamples does, so the
// copy keeps counts and scale bit for bit.
type hashingCounts struct {
	*hashingSource
	cs record.CountSource
}

func (s *hashingCounts) Scale() record.CountScale { return s.cs.Scale() }

func (s *hashingCounts) ReadCounts(start int, dst []int32) error {
	if err := s.cs.ReadCounts(start, dst); err != nil {
		return err
	}
	_, ch := s.src.Shape()
	if start != s.next || ch == 0 {
		s.bad = true
		return nil
	}
	hashCounts(s.h, dst)
	s.next += len(dst) / ch
	return nil
}

func (s *hashingCounts) ReadFloat32(start int, dst []float32) error {
	s.bad = true // counts are copied as counts
	return s.src.ReadFloat32(start, dst)
}

func (s *hashingCounts) ReadFloat64(start int, dst []float64) error {
	s.bad = true
	return s.src.ReadFloat64(start, dst)
}

// wrapSamples puts a hashingSource in front of every array's samples that
// the writer decodes (those it copies chunk by chunk are compared with
// the input's stored chunks instead, sameStored).
func wrapSamples(rec *record.Recording, opt recfile.WriteOptions) map[string]*hashingSource {
	out := map[string]*hashingSource{}
	for ti := range rec.Trials {
		for ai := range rec.Trials[ti].Arrays {
			a := &rec.Trials[ti].Arrays[ai]
			if a.Samples == nil || recfile.CopiesSamplesRaw(a, opt) {
				continue
			}
			hs := &hashingSource{src: a.Samples, rec: a, h: sha256.New()}
			a.Samples = hs
			if cs, ok := hs.src.(record.CountSource); ok && a.SampleType.IsInteger() {
				hashScale(hs.h, cs.Scale())
				a.Samples = &hashingCounts{hashingSource: hs, cs: cs}
			}
			out[fmt.Sprintf("trials[%d].arrays[%d].samples", ti, ai)] = hs
		}
	}
	return out
}

// copiedRaw stands for the digest of samples copied chunk by chunk
// (recfile.SamplesCopied): they are compared with the input's stored
// chunks directly (sameStored), never with a digest of values.
const copiedRaw = "stored chunks copied"

// sameStored returns copiedRaw for every samples path of known marked so
// whose output chunks are the input's, byte for byte
// (recfile.SameStoredSamples). A path whose chunks differ, or cannot be
// compared, is left out (and then hashed by value, which cannot match
// copiedRaw: the check fails).
func sameStored(in, out *record.Recording, known map[string]string) map[string]string {
	got := map[string]string{}
	for ti := range out.Trials {
		for ai, a := range out.Trials[ti].Arrays {
			path := fmt.Sprintf("trials[%d].arrays[%d].samples", ti, ai)
			if known[path] != copiedRaw || a.Samples == nil || ti >= len(in.Trials) || ai >= len(in.Trials[ti].Arrays) {
				continue
			}
			if same, ok, err := recfile.SameStoredSamples(in.Trials[ti].Arrays[ai].Samples, a.Samples); same && ok && err == nil {
				got[path] = copiedRaw
			}
		}
	}
	return got
}
