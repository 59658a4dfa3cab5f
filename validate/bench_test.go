package validate

import (
	"math"
	"os"
	"path/filepath"
	"strconv"
	"testing"

	"muarc/recfile"
	"muarc/record"
)

// noiseSamples is a streamed SampleSource of EMG-like values: a few
// sinusoids plus xorshift noise, rounded to 0.01 uV steps as an ADC would
// give; shuffle + deflate store it at about 1.5 : 1, as the demo's
// synthetic EMG. Nothing is held in memory, so a benchmark file can be any size.
type noiseSamples struct{ rows, cols int }

func (n *noiseSamples) Shape() (int, int) { return n.rows, n.cols }

func (n *noiseSamples) ReadFloat32(start int, dst []float32) error {
	x := uint64(start)*0x9E3779B97F4A7C15 | 1
	for i := range dst {
		r, c := start+i/n.cols, i%n.cols
		x ^= x << 13
		x ^= x >> 7
		x ^= x << 17
		v := 40*math.Sin(float64(r)*0.031+float64(c)) + 15*math.Sin(float64(r)*0.17) + float64(int64(x>>40)%20000-10000)*0.004
		dst[i] = float32(math.Round(v*100) / 100)
	}
	return nil
}

func (n *noiseSamples) ReadFloat64(start int, dst []float64) error {
	tmp := make([]float32, len(dst))
	if err := n.ReadFloat32(start, tmp); err != nil {
		return err
	}
	for i, v := range tmp {
		dst[i] = float64(v)
	}
	return nil
}

// bigRecording is goodRecording with one 8 x 8 array of seconds s at
// 2048 Hz, streamed, and 20 units firing at 12 pps.
func bigRecording(seconds int) *record.Recording {
	rec := goodRecording()
	const fs = 2048
	rows := seconds * fs
	a := &rec.Trials[0].Arrays[0]
	a.Rows, a.Columns = 8, 8
	a.Channels = nil
	for r := 0; r < 8; r++ {
		for c := 0; c < 8; c++ {
			a.Channels = append(a.Channels, record.Channel{Label: "e" + strconv.Itoa(r*8+c+1), Row: r, Column: c, XMm: 8 * float64(c), YMm: 8 * float64(r), Usable: true})
		}
	}
	a.Samples = &noiseSamples{rows: rows, cols: 64}
	var units []record.Unit
	for k := 0; k < 20; k++ {
		u := record.NewUnit(int64(k + 1))
		for t := 50 + 7*k; t < rows; t += 170 {
			u.Discharges = append(u.Discharges, int64(t))
		}
		u.Silhouette, u.PNRdB = 0.95, 35
		units = append(units, u)
	}
	a.Decompositions[0].Units = units
	force := make([]float64, rows/8)
	for i := range force {
		force[i] = 40 * math.Sin(float64(i)/float64(len(force))*math.Pi)
	}
	rec.Trials[0].Force = record.Signal{SamplingRateHz: fs / 8, Unit: "N", Values: force}
	return rec
}

// BenchmarkValidateLarge validates one generated recording per iteration
// (structure, schema, content and the Fletcher-32 scan of every chunk).
// MUARC_BENCH_SECONDS sets its length (default 60 s of 64 channels at
// 2048 Hz, about 21 MB on disk; 2900 s give about 1 GB). With
// MUARC_BENCH_OUT the file is written there and kept, for comparison with
// the h5py baseline in testdata/read_all_h5py.py (see
// testdata/bench_validate.sh).
func BenchmarkValidateLarge(b *testing.B) {
	seconds := 60
	if s, err := strconv.Atoi(os.Getenv("MUARC_BENCH_SECONDS")); err == nil && s > 0 {
		seconds = s
	}
	p := os.Getenv("MUARC_BENCH_OUT")
	if p == "" {
		p = filepath.Join(b.TempDir(), "big.h5")
	}
	if err := recfile.Write(p, bigRecording(seconds), recfile.WriteOptions{Overwrite: true}); err != nil {
		b.Fatal(err)
	}
	fi, err := os.Stat(p)
	if err != nil {
		b.Fatal(err)
	}
	b.SetBytes(fi.Size())
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		r := File(p, DefaultOptions())
		if r.Failed() || len(r.Findings) != 0 {
			b.Fatalf("generated file does not validate clean: %s %v", r.ReadError, r.Findings)
		}
	}
}
