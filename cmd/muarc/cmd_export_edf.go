package main

import (
	"errors"
	"fmt"
	"io"

	"muarc/convert"
	"muarc/edfplus"
)

// exportEDF is `muarc export FILE --format bdf|edf -o DIR`: one BDF+ or
// EDF+ file per trial.
func exportEDF(w, errw io.Writer, path, out, format string, allowIdent, overwrite, asJSON bool) error {
	if out == "" {
		return withExit(2, errors.New("give the output folder with -o"))
	}
	f := edfplus.BDF
	if format == "edf" {
		f = edfplus.EDF
	}
	reps, err := convert.ExportEDF(path, convert.EDFExportOptions{Format: f, Dir: out, AllowIdentified: allowIdent, Overwrite: overwrite})
	if asJSON {
		return printJSONOutcome(w, map[string]any{"files": reps}, err)
	}
	for _, r := range reps {
		fmt.Fprintf(w, "wrote %s (%s, trial %s): %d signals, %d records of %g s, %d annotations (%d discharges)\n",
			r.File, r.Format, r.Trial, len(r.Signals), r.Records, r.RecordDurationS, r.Annotations, r.Discharges)
		renamed := 0
		var first convert.EDFSignalReport
		for _, s := range r.Signals {
			if s.Renamed {
				if renamed == 0 {
					first = s
				}
				renamed++
			}
		}
		if renamed > 0 {
			fmt.Fprintf(w, "  %d labels not unique or longer than 16 characters were renamed, e.g. %s as %q; each signal's transducer field keeps its array and channel (--json lists all)\n",
				renamed, first.Source, first.Label)
		}
		for _, warn := range r.Warnings {
			fmt.Fprintln(errw, "warning:", warn)
		}
	}
	return withExit(2, err)
}

// printJSONOutcome prints m as JSON, with "error" when err is set, and
// exits 2 on an error.
func printJSONOutcome(w io.Writer, m map[string]any, err error) error {
	if err != nil {
		m["error"] = err.Error()
	}
	printJSON(w, m)
	if err != nil {
		return silentExit(2)
	}
	return nil
}
