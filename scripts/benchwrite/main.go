// Command benchwrite writes one generated 64-channel, 2048 Hz recording of
// the given length with recfile.Write, for peak-memory measurements
// (scripts/bench-peak-rss.sh). The samples are streamed from the
// generator, never held in memory.
package main

import (
	"flag"
	"fmt"
	"log"
	"math"
	"os"
	"time"

	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

func main() {
	seconds := flag.Float64("seconds", 60, "recording length in seconds")
	out := flag.String("o", "bench.h5", "output file")
	flag.Parse()
	chans := make([]record.Channel, 64)
	for i := range chans {
		chans[i] = record.Channel{Label: fmt.Sprintf("e%02d", i+1), Row: i / 8, Column: i % 8, XMm: float64(i%8) * 8, YMm: float64(i/8) * 8, Usable: true}
	}
	nan := math.NaN()
	rec := &record.Recording{
		Study:   record.Study{ID: "bench"},
		Subject: record.Subject{ID: "B01", AgeYears: nan, HeightCm: nan, MassKg: nan},
		Trials: []record.Trial{{Name: "t1", TargetPctMVC: 30, MVC: 300, MVCUnit: "N", Arrays: []record.Array{{
			Name: "grid", Rows: 8, Columns: 8, IEDMm: 8, Gain: nan, FilterLowHz: nan, FilterHighHz: nan,
			SamplingRateHz: 2048, Unit: "uV", Channels: chans, Samples: synth.BenchSource(64, 2048, *seconds, 1),
		}}}},
	}
	start := time.Now()
	if err := recfile.Write(*out, rec, recfile.WriteOptions{Overwrite: true}); err != nil {
		log.Fatal(err)
	}
	fi, err := os.Stat(*out)
	if err != nil {
		log.Fatal(err)
	}
	raw := 64 * 2048 * *seconds * 4
	fmt.Printf("wrote %.0f s in %.3f s, %d bytes, samples/size %.2f\n", *seconds, time.Since(start).Seconds(), fi.Size(), raw/float64(fi.Size()))
}
