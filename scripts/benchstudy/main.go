// Command benchstudy writes a study folder of many small generated
// recordings for the batch benchmarks (scripts/bench-study.sh): N files
// under OUT/sub-XXXX/, each a distinct recording (its own subject and
// session identifiers, invented names included, so de-identification has
// something to do). The recordings are built from a few subjects of a
// small synth configuration (like synth.TestConfig, shorter trials), so
// writing 10,000 of them takes minutes, not hours. Nothing is committed:
// the folder is made where the caller says.
package main

import (
	"flag"
	"fmt"
	"log"
	"os"
	"path/filepath"
	"runtime"
	"sync"
	"sync/atomic"

	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

func main() {
	n := flag.Int("n", 2000, "number of recordings")
	out := flag.String("o", "bench-study", "output folder (created)")
	kinds := flag.Int("subjects", 8, "distinct generated subjects the recordings are made from")
	flag.Parse()
	cfg := smallConfig(*kinds)
	gen, err := synth.Generate(cfg)
	if err != nil {
		log.Fatal(err)
	}
	var next atomic.Int64
	var wg sync.WaitGroup
	var mu sync.Mutex
	var firstErr error
	for range 4 * runtime.NumCPU() {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				i := int(next.Add(1)) - 1
				if i >= *n {
					return
				}
				if err := writeOne(*out, i, gen[i%len(gen)].Recording); err != nil {
					mu.Lock()
					if firstErr == nil {
						firstErr = err
					}
					mu.Unlock()
					return
				}
			}
		}()
	}
	wg.Wait()
	if firstErr != nil {
		log.Fatal(firstErr)
	}
	fmt.Printf("wrote %d recordings under %s\n", *n, *out)
}

// smallConfig is synth.TestConfig with one level and short trials: two
// 4 x 4 arrays at 1024 Hz, 3.5 s per trial (about 150 kB a file).
func smallConfig(subjects int) synth.Config {
	c := synth.TestConfig()
	c.Subjects = subjects
	c.LevelsPctMVC = []float64{30}
	c.RestS, c.RampS, c.PlateauS = 0.25, 1, 1
	c.Arrays[0].Sites = []synth.Site{{ArrayName: "ta_grid", Muscle: "tibialis anterior"}, {ArrayName: "sol_grid", Muscle: "soleus"}}
	return c
}

// writeOne writes recording i: the template with identifiers of its own.
func writeOne(dir string, i int, tmpl *record.Recording) error {
	rec := *tmpl
	rec.Subject.ID = fmt.Sprintf("P%05d", i+1)
	rec.Subject.Name = fmt.Sprintf("Bench Person %05d", i+1)
	rec.Session.ID = fmt.Sprintf("V%05d", i+1)
	p := filepath.Join(dir, fmt.Sprintf("sub-%04d", i/100), fmt.Sprintf("rec-%05d.h5", i+1))
	if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
		return err
	}
	return recfile.Write(p, &rec, recfile.WriteOptions{Overwrite: true})
}
