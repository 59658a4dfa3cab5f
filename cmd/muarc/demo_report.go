package main

import (
	"fmt"
	"muarc/analysis"
	"path/filepath"
)

func init() {
	registerDemoStep(35, "stats", demoStats)
	registerDemoStep(60, "report", demoReport)
}

// demoStats derives the unit figures and MUAP templates of every recording
// the demo wrote and stores them in the files (muarc stats --write). It runs
// before validation and de-identification, so the shared copies carry them.
func demoStats(ctx *demoContext) error {
	if len(ctx.Recordings) == 0 {
		return nil
	}
	bar := newProgress("stats", int64(len(ctx.Recordings)))
	units := 0
	for _, path := range ctx.Recordings {
		res, err := analysis.StatsFile(path, true, true)
		if err != nil {
			bar.Finish()
			return fmt.Errorf("stats: %w", err)
		}
		for _, d := range res.Decompositions {
			units += len(d.Units)
		}
		bar.Add(1)
	}
	bar.Finish()
	if ctx.JSON {
		ctx.Summary["stats"] = map[string]any{"recordings": len(ctx.Recordings), "units": units, "stored": true}
		return nil
	}
	fmt.Fprintf(ctx.Out, "\nStats (muarc stats --write): figures and MUAP templates of %d units stored in %d recordings\n", units, len(ctx.Recordings))
	return nil
}

// demoReport writes the study's HTML report into the demo folder and says
// where it is. It reports on the lab's own (identified) recordings: a page
// for the lab to check the study before sharing, not for sharing.
func demoReport(ctx *demoContext) error {
	if len(ctx.Recordings) == 0 {
		return nil
	}
	dir := ctx.RecordingsDir
	if dir == "" {
		dir = filepath.Dir(ctx.Recordings[0])
	}
	out := filepath.Join(ctx.Dir, "report.html")
	s, err := writeReport(dir, out, "Demo study report", 0, true) // the default number of recordings with figures
	if err != nil {
		return fmt.Errorf("report: %w", err)
	}
	if ctx.JSON {
		ctx.Summary["report"] = s
		return nil
	}
	fmt.Fprintf(ctx.Out, "\nReport (muarc report): %s — %d recordings, %d figures; open it in any browser, no network needed\n", importRel(ctx.Dir, out), s.Recordings, s.Figures)
	return nil
}
