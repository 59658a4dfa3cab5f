package synth

import (
	"bytes"
	"compress/flate"
	"encoding/binary"
	"math"
	"testing"

	"muarc/record"
)

// Benchmarks only; no timing is asserted anywhere.

// BenchmarkGenerateDemo builds the demo study (pools, discharges, force,
// decompositions; EMG stays virtual).
func BenchmarkGenerateDemo(b *testing.B) {
	for b.Loop() {
		if _, err := Generate(DemoConfig()); err != nil {
			b.Fatal(err)
		}
	}
}

const benchBlockRows = 4096

func readBlocks32(b *testing.B, s record.SampleSource) {
	rows, ch := s.Shape()
	buf := make([]float32, benchBlockRows*ch)
	for r := 0; r < rows; r += benchBlockRows {
		n := min(benchBlockRows, rows-r)
		if err := s.ReadFloat32(r, buf[:n*ch]); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkBenchSource60s reads BenchSource(64, 2048, 60 s) whole as float32
// in 4096-row blocks, the way the file writer reads it.
func BenchmarkBenchSource60s(b *testing.B) {
	s := BenchSource(64, 2048, 60, 1)
	b.SetBytes(64 * 2048 * 60 * 4)
	for b.Loop() {
		readBlocks32(b, s)
	}
}

// BenchmarkDemoEMG reads all EMG of the first demo subject (3 trials x 2
// arrays x 64 channels x 12 s) as float32 in 4096-row blocks.
func BenchmarkDemoEMG(b *testing.B) {
	gs, err := Generate(DemoConfig())
	if err != nil {
		b.Fatal(err)
	}
	var bytes int64
	for _, t := range gs[0].Recording.Trials {
		for _, a := range t.Arrays {
			n, ch := a.Samples.Shape()
			bytes += int64(n * ch * 4)
		}
	}
	b.SetBytes(bytes)
	for b.Loop() {
		for _, t := range gs[0].Recording.Trials {
			for _, a := range t.Arrays {
				readBlocks32(b, a.Samples)
			}
		}
	}
}

// BenchmarkDeflateBaseline is the baseline the source is measured against:
// byte shuffle + deflate level 4 (what the file writer does) of the same
// 60 s of BenchSource EMG, block by block. Compare its MB/s with
// BenchmarkBenchSource60s.
func BenchmarkDeflateBaseline(b *testing.B) {
	s := BenchSource(64, 2048, 60, 1)
	rows, ch := s.Shape()
	vals := make([]float32, rows*ch)
	if err := s.ReadFloat32(0, vals); err != nil {
		b.Fatal(err)
	}
	raw := make([]byte, benchBlockRows*ch*4)
	shuf := make([]byte, len(raw))
	var out bytes.Buffer
	w, _ := flate.NewWriter(&out, 4)
	b.SetBytes(int64(rows * ch * 4))
	var in, compressed int64
	for b.Loop() {
		in, compressed = 0, 0
		for r := 0; r < rows; r += benchBlockRows {
			n := min(benchBlockRows, rows-r)
			blk := vals[r*ch : (r+n)*ch]
			for i, v := range blk {
				binary.LittleEndian.PutUint32(raw[4*i:], math.Float32bits(v))
			}
			m := len(blk)
			for i := range m {
				for k := range 4 {
					shuf[k*m+i] = raw[4*i+k]
				}
			}
			out.Reset()
			w.Reset(&out)
			w.Write(shuf[:4*m])
			w.Close()
			in += int64(4 * m)
			compressed += int64(out.Len())
		}
	}
	b.ReportMetric(float64(in)/float64(compressed), "ratio")
}

// BenchmarkWriteExportsDemo writes the text exports of one demo subject.
func BenchmarkWriteExportsDemo(b *testing.B) {
	gs, err := Generate(DemoConfig())
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if err := gs[0].WriteExportsOpt(b.TempDir(), ExportOptions{}); err != nil {
			b.Fatal(err)
		}
	}
}
