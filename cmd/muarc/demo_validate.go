package main

import (
	"fmt"
	"path/filepath"

	"muarc/validate"
)

func init() {
	registerDemoStep(40, "validate", demoValidate)
}

// demoValidate validates every recording the demo wrote and shows the
// summary table (or adds it to the JSON summary).
func demoValidate(ctx *demoContext) error {
	if len(ctx.Recordings) == 0 {
		return nil
	}
	bar := newProgress("validate", int64(len(ctx.Recordings)))
	reps := validate.Files(ctx.Recordings, validate.DefaultOptions(), 0, func(int, *validate.Report) { bar.Add(1) })
	bar.Finish()
	if ctx.JSON {
		type line struct {
			File     string `json:"file"`
			Errors   int    `json:"errors"`
			Warnings int    `json:"warnings"`
			Notes    int    `json:"notes"`
			Read     string `json:"read_error,omitempty"`
		}
		var lines []line
		for _, r := range reps {
			lines = append(lines, line{r.File, r.Count(validate.Error), r.Count(validate.Warning), r.Count(validate.Note), r.ReadError})
		}
		ctx.Summary["validate"] = map[string]any{"files": lines, "totals": totals(reps)}
	} else {
		fmt.Fprintf(ctx.Out, "\nValidation (muarc validate %s):\n", filepath.Join(ctx.RecordingsDir, "*.h5"))
		shown := make([]*validate.Report, len(reps))
		for i, r := range reps {
			c := *r
			if rel, err := filepath.Rel(ctx.Dir, r.File); err == nil {
				c.File = rel
			}
			shown[i] = &c
		}
		printSummary(ctx.Out, shown)
	}
	if t := totals(reps); t.WithErrors+t.Unreadable > 0 && !ctx.JSON {
		fmt.Fprintf(ctx.Out, "%d of %d recordings have errors; `muarc validate FILE` lists the findings\n", t.WithErrors+t.Unreadable, t.Files)
	}
	return nil
}
