// Command gencsv writes the benchmark EMG CSV: a time column in seconds and
// CHANNELS columns of values with six decimals (about 76 MB for 64 channels
// at 2048 Hz for 60 s). Used by bench.sh; not part of muarc.
package main

import (
	"bufio"
	"flag"
	"fmt"
	"math/rand"
	"os"
	"strconv"
)

func main() {
	out := flag.String("o", "emg.csv", "output file")
	channels := flag.Int("channels", 64, "EMG channels")
	rate := flag.Int("rate", 2048, "sampling rate, Hz")
	secs := flag.Int("seconds", 60, "duration, s")
	flag.Parse()
	f, err := os.Create(*out)
	if err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	w := bufio.NewWriterSize(f, 1<<20)
	w.WriteString("time [s]")
	for c := 0; c < *channels; c++ {
		w.WriteString(",ch" + strconv.Itoa(c+1) + " [mV]")
	}
	w.WriteByte('\n')
	rng := rand.New(rand.NewSource(1))
	var b []byte
	for i := 0; i < *rate**secs; i++ {
		b = strconv.AppendFloat(b[:0], float64(i)/float64(*rate), 'f', 6, 64)
		for c := 0; c < *channels; c++ {
			b = append(b, ',')
			b = strconv.AppendFloat(b, rng.NormFloat64()*0.2, 'f', 6, 64)
		}
		b = append(b, '\n')
		w.Write(b)
	}
	if err := w.Flush(); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
	if err := f.Close(); err != nil {
		fmt.Fprintln(os.Stderr, err)
		os.Exit(1)
	}
}
