package convert

import (
	"bufio"
	"bytes"
	"math/rand"
	"os"
	"path/filepath"
	"strconv"
	"testing"
	"time"

	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

// writeBenchCSV writes a channels x (rate*secs) EMG CSV with a time column
// in seconds and six decimals per value (about 76 MB for 64 x 2048 x 60).
func writeBenchCSV(tb testing.TB, path string, channels, rate, secs int) int64 {
	tb.Helper()
	f, err := os.Create(path)
	if err != nil {
		tb.Fatal(err)
	}
	w := bufio.NewWriterSize(f, 1<<20)
	w.WriteString("time [s]")
	for c := 0; c < channels; c++ {
		w.WriteString(",ch" + strconv.Itoa(c+1) + " [mV]")
	}
	w.WriteByte('\n')
	rng := rand.New(rand.NewSource(1))
	var buf []byte
	for i := 0; i < rate*secs; i++ {
		buf = strconv.AppendFloat(buf[:0], float64(i)/float64(rate), 'f', 6, 64)
		for c := 0; c < channels; c++ {
			buf = append(buf, ',')
			buf = strconv.AppendFloat(buf, rng.NormFloat64()*0.2, 'f', 6, 64)
		}
		buf = append(buf, '\n')
		w.Write(buf)
	}
	if err := w.Flush(); err != nil {
		tb.Fatal(err)
	}
	st, _ := f.Stat()
	f.Close()
	return st.Size()
}

// BenchmarkScanAndStream64x2048x60 measures both text passes without the
// HDF5 writer: the first pass and a full streaming read as float32.
func BenchmarkScanAndStream64x2048x60(b *testing.B) {
	p := filepath.Join(b.TempDir(), "emg.csv")
	size := writeBenchCSV(b, p, 64, 2048, 60)
	b.SetBytes(size)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		s, err := ScanSignals(p, SignalOptions{DType: record.Float32})
		if err != nil {
			b.Fatal(err)
		}
		if s.DType != record.Float32 || s.RateHz != 2048 {
			b.Fatalf("%s %v", s.DTypeWhy, s.RateHz)
		}
		src := s.Source()
		dst := make([]float32, 4096*64)
		for r := 0; r < s.Samples; r += 4096 {
			n := min(4096, s.Samples-r)
			if err := src.ReadFloat32(r, dst[:n*64]); err != nil {
				b.Fatal(err)
			}
		}
		src.Close()
	}
}

// BenchmarkImportCSV64x2048x60 imports a generated 64-channel, 2048 Hz, 60 s
// EMG CSV with six decimals (about 76 MB) into a muarc file: both text
// passes and the HDF5 writer (shuffle + deflate 4 + Fletcher-32).
func BenchmarkImportCSV64x2048x60(b *testing.B) {
	dir := b.TempDir()
	p := filepath.Join(dir, "emg.csv")
	size := writeBenchCSV(b, p, 64, 2048, 60)
	b.SetBytes(size)
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		out := filepath.Join(dir, "out.h5")
		rep, err := ImportRecording(Inputs{EMG: []string{p}}, out, recfile.WriteOptions{Overwrite: true})
		if err != nil {
			b.Fatal(err)
		}
		// Six decimals of every cell: int32 counts of 0.000001 mV.
		if rep.Files[0].DType != "int32" {
			b.Fatal(rep.Files[0].DTypeWhy)
		}
	}
}

// BenchmarkScan64x2048x60 is the first pass alone.
func BenchmarkScan64x2048x60(b *testing.B) {
	p := filepath.Join(b.TempDir(), "emg.csv")
	b.SetBytes(writeBenchCSV(b, p, 64, 2048, 60))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		if _, err := ScanSignals(p, SignalOptions{}); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkParseBlock parses 1 MiB of 64-column rows with six decimals on
// one goroutine (the second pass's per-block work).
func BenchmarkParseBlock(b *testing.B) {
	rng := rand.New(rand.NewSource(1))
	var buf bytes.Buffer
	for buf.Len() < 1<<20 {
		var l []byte
		l = strconv.AppendFloat(l, float64(buf.Len())/1e6, 'f', 6, 64)
		for c := 0; c < 64; c++ {
			l = append(l, ',')
			l = strconv.AppendFloat(l, rng.NormFloat64()*0.2, 'f', 6, 64)
		}
		buf.Write(append(l, '\n'))
	}
	data := buf.Bytes()
	sp := &blockSpec{file: "b", d: Dialect{Delimiter: ','}, cols: 65, tcol: 0, mode: mode32}
	blk := &block{}
	b.SetBytes(int64(len(data)))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		blk.reset()
		blk.data, blk.line = data, 1
		sp.parse(blk)
		if blk.err != nil {
			b.Fatal(blk.err)
		}
	}
}

// BenchmarkImportCountsVsFloat32 imports the same realistic amplifier text
// (synth.DefaultRealistic: 64 channels, 2048 Hz, 60 s, 16-bit counts of
// 0.1907 uV written with 4 decimals) three times per iteration: as float32
// (--dtype float32; it loses digits of cells over 1000 uV), as float64
// (what import chose for this text before integer counts: float32 does not
// hold it) and as counts (the default now). It reports the file bytes per
// sample of each and the import time of counts against each, from the
// same run.
func BenchmarkImportCountsVsFloat32(b *testing.B) {
	dir := b.TempDir()
	p := filepath.Join(dir, "emg.csv")
	src, err := synth.RealisticEMG(synth.DefaultRealistic())
	if err != nil {
		b.Fatal(err)
	}
	f, err := os.Create(p)
	if err != nil {
		b.Fatal(err)
	}
	if err := src.WriteText(f, nil, false); err != nil {
		b.Fatal(err)
	}
	f.Close()
	rows, ch := src.Shape()
	n := float64(rows * ch)
	forms := []record.SampleType{record.Float32, record.Float64, ""}
	took := map[record.SampleType]time.Duration{}
	size := map[record.SampleType]int64{}
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		for _, dt := range forms {
			out := filepath.Join(dir, "out"+string(dt)+".h5")
			t0 := time.Now()
			rep, err := ImportRecording(Inputs{EMG: []string{p}, DType: dt}, out, recfile.WriteOptions{Overwrite: true})
			if err != nil {
				b.Fatal(err)
			}
			took[dt] += time.Since(t0)
			st, _ := os.Stat(out)
			size[dt] = st.Size()
			if dt == "" && (rep.Files[0].DType != "int16" || rep.Files[0].Counts.Scale != "0.1907") {
				b.Fatalf("stored as %s: %s", rep.Files[0].DType, rep.Files[0].DTypeWhy)
			}
		}
	}
	b.ReportMetric(float64(size[record.Float32])/n, "B/sample-float32")
	b.ReportMetric(float64(size[record.Float64])/n, "B/sample-float64")
	b.ReportMetric(float64(size[""])/n, "B/sample-counts")
	b.ReportMetric(float64(took[""])/float64(took[record.Float32]), "time-counts/float32")
	b.ReportMetric(float64(took[""])/float64(took[record.Float64]), "time-counts/float64")
}
