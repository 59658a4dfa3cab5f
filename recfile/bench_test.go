package recfile

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"testing"

	"muarc/record"
	"muarc/synth"
)

// benchRecording is one trial with one 64-channel array of generated EMG
// streamed from synth.BenchSource (never held in memory).
func benchRecording(seconds float64) *record.Recording {
	src := synth.BenchSource(64, 2048, seconds, 1)
	chans := make([]record.Channel, 64)
	for i := range chans {
		chans[i] = record.Channel{Label: fmt.Sprintf("e%02d", i+1), Row: i / 8, Column: i % 8, XMm: float64(i%8) * 8, YMm: float64(i/8) * 8, Usable: true}
	}
	return &record.Recording{
		Study: record.Study{ID: "bench"}, Subject: record.Subject{ID: "B01", AgeYears: math.NaN(), HeightCm: math.NaN(), MassKg: math.NaN()}, Session: record.Session{ID: "1"},
		Trials: []record.Trial{{Name: "t1", TargetPctMVC: 30, MVC: 300, MVCUnit: "N", Arrays: []record.Array{{
			Name: "grid", Rows: 8, Columns: 8, SamplingRateHz: 2048, Unit: "uV", Channels: chans, Samples: src,
		}}}},
	}
}

// BenchmarkWrite60s writes 64 channels x 2048 Hz x 60 s float32 with
// shuffle + deflate + Fletcher-32 for several chunk shapes.
func BenchmarkWrite60s(b *testing.B) {
	for _, cs := range chunkShapes {
		b.Run(fmt.Sprintf("chunk%dx%d", cs[0], cs[1]), func(b *testing.B) {
			dir := b.TempDir()
			b.SetBytes(64 * 2048 * 60 * 4)
			for i := 0; i < b.N; i++ {
				p := filepath.Join(dir, "w.h5")
				if err := Write(p, benchRecording(60), WriteOptions{Overwrite: true, ChunkRows: cs[0], ChunkCols: cs[1]}); err != nil {
					b.Fatal(err)
				}
				if i == 0 {
					fi, _ := os.Stat(p)
					b.ReportMetric(float64(64*2048*60*4)/float64(fi.Size()), "ratio")
				}
			}
		})
	}
}

var chunkShapes = [][2]int{{4096, 64}, {4096, 16}, {8192, 8}, {16384, 4}, {65536, 1}}

// BenchmarkReadOneChannel60s reads channel 17 of the 60 s file whole.
func BenchmarkReadOneChannel60s(b *testing.B) {
	for _, cs := range chunkShapes {
		b.Run(fmt.Sprintf("chunk%dx%d", cs[0], cs[1]), func(b *testing.B) {
			p := filepath.Join(b.TempDir(), "r.h5")
			if err := Write(p, benchRecording(60), WriteOptions{ChunkRows: cs[0], ChunkCols: cs[1]}); err != nil {
				b.Fatal(err)
			}
			dst := make([]float32, 2048*60)
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				f, err := Open(p)
				if err != nil {
					b.Fatal(err)
				}
				s := f.Recording().Trials[0].Arrays[0].Samples.(*ArraySamples)
				if err := s.ReadRange32(0, 2048*60, 17, 1, dst); err != nil {
					b.Fatal(err)
				}
				f.Close()
			}
		})
	}
}

// BenchmarkReadAllBlocks60s reads the 60 s file whole in 1-second blocks.
func BenchmarkReadAllBlocks60s(b *testing.B) {
	for _, cs := range chunkShapes {
		b.Run(fmt.Sprintf("chunk%dx%d", cs[0], cs[1]), func(b *testing.B) {
			p := filepath.Join(b.TempDir(), "r.h5")
			if err := Write(p, benchRecording(60), WriteOptions{ChunkRows: cs[0], ChunkCols: cs[1]}); err != nil {
				b.Fatal(err)
			}
			dst := make([]float32, 2048*64)
			b.SetBytes(64 * 2048 * 60 * 4)
			b.ResetTimer()
			for i := 0; i < b.N; i++ {
				f, err := Open(p)
				if err != nil {
					b.Fatal(err)
				}
				s := f.Recording().Trials[0].Arrays[0].Samples
				for r := 0; r < 2048*60; r += 2048 {
					if err := s.ReadFloat32(r, dst); err != nil {
						b.Fatal(err)
					}
				}
				f.Close()
			}
		})
	}
}

// BenchmarkGenerateOnly60s is the cost of producing the samples alone, to
// subtract from the write figures.
func BenchmarkGenerateOnly60s(b *testing.B) {
	dst := make([]float32, 8192*64)
	for i := 0; i < b.N; i++ {
		src := synth.BenchSource(64, 2048, 60, 1)
		n, _ := src.Shape()
		for r := 0; r < n; r += 8192 {
			m := min(8192, n-r)
			if err := src.ReadFloat32(r, dst[:m*64]); err != nil {
				b.Fatal(err)
			}
		}
	}
}

// BenchmarkWriteLevels60s compares deflate levels at the default chunk shape.
func BenchmarkWriteLevels60s(b *testing.B) {
	for _, level := range []int{1, 2, 4, 6} {
		b.Run(fmt.Sprintf("level%d", level), func(b *testing.B) {
			dir := b.TempDir()
			b.SetBytes(64 * 2048 * 60 * 4)
			for i := 0; i < b.N; i++ {
				p := filepath.Join(dir, "w.h5")
				if err := Write(p, benchRecording(60), WriteOptions{Overwrite: true, DeflateLevel: level}); err != nil {
					b.Fatal(err)
				}
				if i == 0 {
					fi, _ := os.Stat(p)
					b.ReportMetric(float64(64*2048*60*4)/float64(fi.Size()), "ratio")
				}
			}
		})
	}
}
