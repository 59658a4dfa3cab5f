package main

import (
	"fmt"
	"io"
	"sort"
	"strings"

	"muarc/bids"
)

// exportBIDS is `muarc export STUDY_DIR --bids OUT_DIR`.
func exportBIDS(w, errw io.Writer, studyDir, out string, allowIdent, overwrite, asJSON bool) error {
	rep, err := bids.Export(studyDir, out, bids.Options{AllowIdentified: allowIdent, Overwrite: overwrite})
	if asJSON {
		return printJSONOutcome(w, map[string]any{"bids": rep}, err)
	}
	if err != nil {
		return withExit(2, err)
	}
	printBIDS(w, errw, rep)
	return nil
}

func printBIDS(w, errw io.Writer, rep *bids.Report) {
	fmt.Fprintf(w, "wrote a BIDS %s EMG dataset in %s: %d participants, %d recordings, %d data files (*_emg.bdf), derivatives/muarc/ with the decompositions\n",
		bids.Version, rep.Dir, rep.Subjects, rep.Recordings, len(rep.DataFiles))
	var fields []string
	for f := range rep.NotKnown {
		fields = append(fields, f)
	}
	sort.Strings(fields)
	for _, f := range fields {
		fmt.Fprintf(w, "  %s is \"n/a\" in %d files: the recordings do not hold it%s\n", f, len(rep.NotKnown[f]), bidsHint(f))
	}
	seen := map[string]bool{}
	for _, warn := range rep.Warnings {
		key := warn[:strings.Index(warn+":", ":")]
		if !seen[key] {
			fmt.Fprintln(errw, "warning:", warn, "(and similar)")
			seen[key] = true
		}
	}
}

func bidsHint(field string) string {
	switch field {
	case "PowerLineFrequency":
		return " (session.power_line_hz in the metadata sidecar, 50 or 60)"
	case "SoftwareFilters":
		return " (software_filters of every array: {} when none was applied)"
	case "EMGPlacementScheme":
		return " (placement_scheme and placement_description of every array)"
	case "EMGReference":
		return " (array reference)"
	case "License":
		return " (study license)"
	}
	return ""
}
