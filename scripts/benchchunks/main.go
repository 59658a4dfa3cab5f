// Command muarc-benchchunks writes the storage benchmark's EMG
// (synth.RealisticEMG, 64 channels x 2048 Hz) with muarc's own writer
// (recfile.Write: shuffle + libdeflate + Fletcher-32, the bands compressed
// on every core) for each chunk shape and deflate level given, and prints
// one table row each, for int16 counts with their scale (how muarc import
// stores this text since layout 1.2) or float32: bytes per sample of the file, write time, and the
// time to read one channel whole and every channel in 1 s blocks. Used by
// scripts/bench-storage.sh to choose the writer's defaults; not part of
// muarc.
//
//	muarc-benchchunks [-form int16|float32] [-seconds 60] [-shapes 16384x4,4096x64] [-levels 1,6]
package main

import (
	"flag"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"time"

	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

func main() {
	seconds := flag.Float64("seconds", 60, "recording length, s")
	shapes := flag.String("shapes", "16384x4,4096x64,8192x8,16384x8,65536x1", "chunk shapes ROWSxCHANNELS, comma-separated")
	levels := flag.String("levels", "1,4,6,9", "deflate levels, comma-separated")
	form := flag.String("form", "int16", "sample form: int16 (counts with their scale, as muarc import stores this text) or float32")
	flag.Parse()
	if *form != "int16" && *form != "float32" {
		fmt.Fprintln(os.Stderr, "muarc-benchchunks: -form int16 or float32")
		os.Exit(2)
	}
	if err := run(*seconds, *shapes, *levels, record.SampleType(*form)); err != nil {
		fmt.Fprintln(os.Stderr, "muarc-benchchunks:", err)
		os.Exit(1)
	}
}

func run(seconds float64, shapes, levels string, form record.SampleType) error {
	dir, err := os.MkdirTemp("", "benchchunks")
	if err != nil {
		return err
	}
	defer os.RemoveAll(dir)
	fmt.Printf("| muarc writer, %s | chunk `[rows, channels]` | bytes/sample | write | read all, 1 s blocks | read one channel |\n", form)
	fmt.Println("|---|---|---|---|---|---|")
	for _, shape := range strings.Split(shapes, ",") {
		r, c, ok := strings.Cut(shape, "x")
		rows, err1 := strconv.Atoi(r)
		cols, err2 := strconv.Atoi(c)
		if !ok || err1 != nil || err2 != nil || rows < 1 || cols < 1 {
			return fmt.Errorf("chunk shape %q: want ROWSxCHANNELS, e.g. 16384x4", shape)
		}
		for _, l := range strings.Split(levels, ",") {
			level, err := strconv.Atoi(l)
			if err != nil || level < 1 || level > 9 {
				return fmt.Errorf("deflate level %q: want 1-9", l)
			}
			if err := one(filepath.Join(dir, "s.h5"), seconds, rows, cols, level, form); err != nil {
				return err
			}
		}
	}
	return nil
}

func one(path string, seconds float64, rows, cols, level int, form record.SampleType) error {
	cfg := synth.DefaultRealistic()
	cfg.Seconds = seconds
	src, err := synth.RealisticEMG(cfg)
	if err != nil {
		return err
	}
	n, ch := src.Shape()
	nan := math.NaN()
	rec := &record.Recording{
		Study:   record.Study{ID: "bench"},
		Subject: record.Subject{ID: "B01", AgeYears: nan, HeightCm: nan, MassKg: nan},
		Trials: []record.Trial{{Name: "t1", TargetPctMVC: 30, MVC: 300, MVCUnit: "N", Arrays: []record.Array{{
			Name: "grid", Rows: 8, Columns: 8, IEDMm: 8, Gain: nan, FilterLowHz: nan, FilterHighHz: nan,
			SamplingRateHz: cfg.SamplingRateHz, Unit: "uV", Channels: src.Channels(), Samples: src,
		}}}},
	}
	if form == record.Int16 {
		a := &rec.Trials[0].Arrays[0]
		a.SampleType, a.Scale = record.Int16, src.Scale()
	}
	t0 := time.Now()
	if err := recfile.Write(path, rec, recfile.WriteOptions{Overwrite: true, ChunkRows: rows, ChunkCols: cols, DeflateLevel: level}); err != nil {
		return err
	}
	write := time.Since(t0)
	fi, err := os.Stat(path)
	if err != nil {
		return err
	}
	f, err := recfile.Open(path)
	if err != nil {
		return err
	}
	defer f.Close()
	s := f.Recording().Trials[0].Arrays[0].Samples
	t1 := time.Now()
	blk := make([]float32, int(cfg.SamplingRateHz)*ch)
	for r := 0; r < n; r += int(cfg.SamplingRateHz) {
		m := min(int(cfg.SamplingRateHz), n-r)
		if err := s.ReadFloat32(r, blk[:m*ch]); err != nil {
			return err
		}
	}
	all := time.Since(t1)
	var oneCh time.Duration
	if rs, ok := s.(interface {
		ReadRange32(row0, rows, ch0, nch int, dst []float32) error
	}); ok {
		t2 := time.Now()
		if err := rs.ReadRange32(0, n, 17, 1, make([]float32, n)); err != nil {
			return err
		}
		oneCh = time.Since(t2)
	}
	fmt.Printf("| shuffle + deflate %d | `[%d, %d]` | %.3f | %.2f s | %.2f s | %.3f s |\n", level, rows, cols,
		float64(fi.Size())/float64(n*ch), write.Seconds(), all.Seconds(), oneCh.Seconds())
	return nil
}
