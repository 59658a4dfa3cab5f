package main

import (
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"muarc/recfile"
)

func init() {
	registerDemoStep(30, "table", demoTable)
}

// studyRow is one line of the demo's study table: one recording.
type studyRow struct {
	File        string    `json:"file"`
	Subject     string    `json:"subject"`
	Muscles     []string  `json:"muscles"`
	LevelsPct   []float64 `json:"levels_pct_mvc"`
	Units       int       `json:"units"`
	DurationS   float64   `json:"duration_s"`
	Bytes       int64     `json:"bytes"`
	Compression float64   `json:"compression_ratio"`
}

// demoTable reads every recording back and tabulates the study.
func demoTable(ctx *demoContext) error {
	var rows []studyRow
	for _, path := range ctx.Recordings {
		f, err := recfile.Open(path)
		if err != nil {
			return err
		}
		rec := f.Recording()
		row := studyRow{File: importRel(ctx.Dir, path), Subject: rec.Subject.ID}
		var raw int64
		for _, t := range rec.Trials {
			row.LevelsPct = append(row.LevelsPct, t.TargetPctMVC)
			for _, a := range t.Arrays {
				if !slices.Contains(row.Muscles, a.Muscle) {
					row.Muscles = append(row.Muscles, a.Muscle)
				}
				n, c := a.Samples.Shape()
				raw += int64(n) * int64(c) * int64(a.SampleType.Bytes())
				row.DurationS += a.DurationS()
				if len(a.Decompositions) > 0 {
					row.Units += len(a.Decompositions[0].Units)
				}
			}
		}
		f.Close()
		fi, err := os.Stat(path)
		if err != nil {
			return err
		}
		row.Bytes = fi.Size()
		row.Compression = float64(raw) / float64(fi.Size())
		rows = append(rows, row)
	}
	if ctx.JSON {
		ctx.Summary["study"] = rows
		return nil
	}
	fmt.Fprintf(ctx.Out, "\nStudy table (each file read back with muarc's reader):\n")
	tw := newTable(ctx.Out, "subject", "muscles", "levels %MVC", "units", "EMG s", "file", "size", "samples/size")
	for _, r := range rows {
		lv := make([]string, len(r.LevelsPct))
		for i, l := range r.LevelsPct {
			lv[i] = fmtNum(l)
		}
		tw.row(r.Subject, strings.Join(r.Muscles, ", "), strings.Join(lv, "/"), r.Units, fmt.Sprintf("%.1f", r.DurationS), filepath.Base(r.File), humanBytes(r.Bytes), fmt.Sprintf("%.2f", r.Compression))
	}
	tw.flush()
	return nil
}
