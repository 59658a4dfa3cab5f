package analysis

import (
	"math"
	"math/rand/v2"
	"path/filepath"
	"testing"

	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

// benchRecording is the closing note's case: one 60 s trial, a 64-channel
// array at 2048 Hz (synth.BenchSource EMG), 30 units discharging at
// 8-25 pps with ISI CoV 0.15, a trapezoidal force and target at 2048 Hz.
func benchRecording() *record.Recording {
	const fs, dur, ch = 2048.0, 60.0, 64
	n := int(fs * dur)
	tgt := make([]float64, n)
	frc := make([]float64, n)
	for i := range tgt {
		t := float64(i) / fs
		tgt[i] = 30 * math.Max(0, math.Min(1, math.Min((t-2)/10, (58-t)/10)))
		frc[i] = tgt[i] * 4
	}
	arr := record.Array{Name: "grid", Rows: 8, Columns: 8, SamplingRateHz: fs, Unit: "uV",
		Samples: synth.BenchSource(ch, fs, dur, 11)}
	for c := 0; c < ch; c++ {
		arr.Channels = append(arr.Channels, record.Channel{Label: "e" + string(rune('A'+c/8)) + string(rune('1'+c%8)), Row: c / 8, Column: c % 8, Usable: true,
			XMm: float64(c%8) * 8, YMm: float64(c/8) * 8})
	}
	rng := rand.New(rand.NewPCG(3, 5))
	dec := record.Decomposition{Name: "auto", Method: "bench", Parameters: "{}"}
	for k := 0; k < 30; k++ {
		u := record.NewUnit(int64(k + 1))
		rate := 8 + 17*float64(k)/29
		t := 2.5 + 0.2*float64(k)
		for t < 57.5-0.2*float64(k) {
			u.Discharges = append(u.Discharges, int64(t*fs))
			t += (1 + 0.15*rng.NormFloat64()) / rate
		}
		dec.Units = append(dec.Units, u)
	}
	arr.Decompositions = []record.Decomposition{dec}
	tr := record.Trial{Name: "ramp_30", TargetPctMVC: 30, MVC: 400, MVCUnit: "N",
		Force:       record.Signal{SamplingRateHz: fs, Unit: "N", Values: frc},
		ForceTarget: record.Signal{SamplingRateHz: fs, Unit: "%", Values: tgt},
		Arrays:      []record.Array{arr}}
	return &record.Recording{Study: record.Study{ID: "bench"}, Subject: record.Subject{ID: "B01"}, Session: record.Session{ID: "B01-1"},
		Trials: []record.Trial{tr}}
}

func benchFile(b *testing.B) string {
	b.Helper()
	p := filepath.Join(b.TempDir(), "bench.h5")
	if err := recfile.Write(p, benchRecording(), recfile.WriteOptions{}); err != nil {
		b.Fatal(err)
	}
	return p
}

// BenchmarkStatsMUAPs64ch60s30units is `muarc stats` without --write on the
// closing note's case: open the file, derive every unit's figures and
// average the MUAP templates in one pass over the samples.
func BenchmarkStatsMUAPs64ch60s30units(b *testing.B) {
	p := benchFile(b)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		f, err := recfile.Open(p)
		if err != nil {
			b.Fatal(err)
		}
		rec := f.Recording()
		st := Recording(rec)
		ts, err := ArrayTemplates(&rec.Trials[0].Arrays[0], MUAPHalfWindowS)
		if err != nil || len(st) != 1 || ts[0].Averaged[0] == 0 {
			b.Fatal(err)
		}
		f.Close()
	}
}

// BenchmarkReadSamples64ch60s is the baseline for the one above: open the
// same file and read every sample once in the same blocks, doing nothing
// else (the I/O and decompression floor).
func BenchmarkReadSamples64ch60s(b *testing.B) {
	p := benchFile(b)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		f, err := recfile.Open(p)
		if err != nil {
			b.Fatal(err)
		}
		src := f.Recording().Trials[0].Arrays[0].Samples
		rows, ch := src.Shape()
		buf := make([]float32, defaultBlockRows*ch)
		for r := 0; r < rows; r += defaultBlockRows {
			k := min(defaultBlockRows, rows-r)
			if err := src.ReadFloat32(r, buf[:k*ch]); err != nil {
				b.Fatal(err)
			}
		}
		f.Close()
	}
}

// BenchmarkTemplatesInMemory64ch60s30units is the averaging alone, on
// samples held in memory.
func BenchmarkTemplatesInMemory64ch60s30units(b *testing.B) {
	rec := benchRecording()
	arr := &rec.Trials[0].Arrays[0]
	rows, ch := arr.Samples.Shape()
	m := &record.MemSamples{Samples: rows, Channels: ch, F32: make([]float32, rows*ch)}
	if err := arr.Samples.ReadFloat32(0, m.F32); err != nil {
		b.Fatal(err)
	}
	arr.Samples = m
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := ArrayTemplates(arr, MUAPHalfWindowS); err != nil {
			b.Fatal(err)
		}
	}
}
