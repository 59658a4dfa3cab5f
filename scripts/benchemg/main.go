// Command muarc-benchemg writes the storage benchmark's EMG: the
// amplifier-like 64-channel recording of synth.RealisticEMG (band-limited
// sources mixed across an 8 x 8 grid, a trapezoidal contraction, amplifier
// noise, 50 Hz, quantised to 0.1907 uV) as the EMG text export muarc import
// reads, every value written as count x LSB with 4 decimals, and optionally
// the same counts as raw little-endian int16 (row-major) for the baselines.
// Used by scripts/bench-storage.sh; not part of muarc.
//
//	muarc-benchemg -o emg_grid.csv [-counts counts.s16] [-keys=false] [-seconds 60] [-seed 1]
package main

import (
	"bufio"
	"flag"
	"fmt"
	"io"
	"os"

	"muarc/synth"
)

func main() {
	cfg := synth.DefaultRealistic()
	out := flag.String("o", "emg.csv", "text export to write")
	counts := flag.String("counts", "", "also write the counts as raw little-endian int16 here")
	keys := flag.Bool("keys", true, "write the key block (array, sampling rate, unit, ...) above the table")
	flag.Float64Var(&cfg.Seconds, "seconds", cfg.Seconds, "duration, s")
	flag.Float64Var(&cfg.SamplingRateHz, "rate", cfg.SamplingRateHz, "sampling rate, Hz")
	flag.Uint64Var(&cfg.Seed, "seed", cfg.Seed, "seed of the generator")
	flag.Parse()
	if err := run(cfg, *out, *counts, *keys); err != nil {
		fmt.Fprintln(os.Stderr, "muarc-benchemg:", err)
		os.Exit(1)
	}
}

func run(cfg synth.RealisticConfig, out, counts string, keys bool) error {
	src, err := synth.RealisticEMG(cfg)
	if err != nil {
		return err
	}
	f, err := os.Create(out)
	if err != nil {
		return err
	}
	defer f.Close()
	var cw io.Writer
	var cb *bufio.Writer
	if counts != "" {
		c, err := os.Create(counts)
		if err != nil {
			return err
		}
		defer c.Close()
		cb = bufio.NewWriterSize(c, 1<<20)
		cw = cb
	}
	if err := src.WriteText(f, cw, keys); err != nil {
		return err
	}
	if cb != nil {
		if err := cb.Flush(); err != nil {
			return err
		}
	}
	return f.Close()
}
