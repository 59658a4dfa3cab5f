package main

import (
	"fmt"
	"os"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"muarc/analysis"
	"muarc/analysis/plot"
	"muarc/recfile"
	"muarc/record"
)

var plotFlags struct {
	out, formats    string
	json, overwrite bool
}

var plotCmd = &cobra.Command{
	Use:   "plot FILE -o DIR",
	Short: "Draw a recording's figures as PNG and SVG",
	Long: `plot draws, for every trial, array and decomposition of FILE:
  TRIAL__ARRAY__DECOMPOSITION__overview: force and target (% MVC when the MVC
    is known) with the plateau shaded, the discharge raster (units by
    recruitment, earliest at the bottom) and discharge rates smoothed by a
    400 ms Hann window;
  TRIAL__ARRAY__DECOMPOSITION__muaps: the MUAP templates on the electrode
    grid, shaded by peak-to-peak amplitude. The templates stored in the file
    are drawn when there are any (muarc stats --write stores them), else
    they are averaged from the EMG (-25 ms to +25 ms around each discharge);
and per array name ARRAY__rates: plateau mean rate and initial rate against
recruitment threshold with their least-squares lines, one colour per trial.

Files go into DIR (made if missing) as .png and .svg (--format). Existing
files are kept unless --overwrite. Exit status: 0 done, 2 the file could not
be read or a figure not written (or bad usage).`,
	Args: cobra.ExactArgs(1),
	RunE: runPlot,
}

func init() {
	f := plotCmd.Flags()
	f.StringVarP(&plotFlags.out, "output", "o", "", "folder for the figures (required)")
	f.StringVar(&plotFlags.formats, "format", "png,svg", "comma-separated figure formats: png, svg")
	f.BoolVar(&plotFlags.overwrite, "overwrite", false, "replace figures that exist")
	f.BoolVar(&plotFlags.json, "json", false, "list the figures written as JSON")
	plotCmd.MarkFlagRequired("output")
	rootCmd.AddCommand(plotCmd)
}

type plotWritten struct {
	File    string `json:"file"`
	Kind    string `json:"kind"`
	Caption string `json:"caption"`
	// Templates says where a MUAP grid's templates came from: "stored" or
	// "averaged".
	Templates string `json:"templates,omitempty"`
}

func runPlot(cmd *cobra.Command, args []string) error {
	var formats []string
	for _, f := range strings.Split(plotFlags.formats, ",") {
		f = strings.ToLower(strings.TrimSpace(f))
		if f != "png" && f != "svg" {
			return withExit(2, fmt.Errorf("--format %q: use png, svg or png,svg", plotFlags.formats))
		}
		formats = append(formats, f)
	}
	if err := checkRecordingInput(args[0], true); err != nil {
		return withExit(2, err)
	}
	fh, err := recfile.Open(args[0])
	if err != nil {
		return withExit(2, err)
	}
	defer fh.Close()
	rec := fh.Recording()
	st := analysis.Recording(rec)
	tpl, tplErr := templatesFor(rec)
	figs, notes := plot.RecordingFigures(rec, st, plot.Options{Templates: tpl})
	if *tplErr != nil {
		return withExit(2, fmt.Errorf("%s: %w", args[0], *tplErr))
	}
	if err := os.MkdirAll(plotFlags.out, 0o755); err != nil {
		return withExit(2, err)
	}
	// Refuse before drawing anything when a target exists.
	for _, f := range figs {
		for _, ext := range formats {
			p := filepath.Join(plotFlags.out, f.Name+"."+ext)
			if _, err := os.Lstat(p); err == nil && !plotFlags.overwrite {
				return withExit(2, fmt.Errorf("%s exists (give --overwrite to replace it)", p))
			}
		}
	}
	bar := newProgress("plot", int64(len(figs)*len(formats)))
	var written []plotWritten
	for _, f := range figs {
		tsrc := f.Templates
		for _, ext := range formats {
			p := filepath.Join(plotFlags.out, f.Name+"."+ext)
			if err := f.Figure.Save(p, plotFlags.overwrite); err != nil {
				bar.Finish()
				return withExit(2, err)
			}
			written = append(written, plotWritten{File: p, Kind: f.Kind, Caption: f.Caption, Templates: tsrc})
			bar.Add(1)
		}
	}
	bar.Finish()
	w := cmd.OutOrStdout()
	if plotFlags.json {
		if notes == nil {
			notes = plot.Notes{}
		}
		return printJSON(w, map[string]any{"file": args[0], "figures": written, "notes": notes})
	}
	for _, x := range written {
		extra := ""
		if x.Templates != "" {
			extra = " (templates " + x.Templates + ")"
		}
		fmt.Fprintf(w, "%s%s\n", x.File, extra)
	}
	for _, n := range notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	return nil
}

// templatesFor returns a plot.Options.Templates that gives each
// decomposition's stored templates, or else averages them from the EMG,
// once per array (one pass over its samples serves all its
// decompositions). A read error is kept in *errp.
func templatesFor(rec *record.Recording) (func(ti, ai, di int) (*analysis.Templates, string), *error) {
	var first error
	cache := map[[2]int][]*analysis.Templates{}
	return func(ti, ai, di int) (*analysis.Templates, string) {
		arr := &rec.Trials[ti].Arrays[ai]
		dec := &arr.Decompositions[di]
		if dec.MUAPs != nil {
			if t := plot.StoredTemplates(dec); t != nil {
				return t, "stored"
			}
		}
		k := [2]int{ti, ai}
		ts, ok := cache[k]
		if !ok {
			if arr.Samples != nil {
				var err error
				ts, err = analysis.ArrayTemplates(arr, analysis.MUAPHalfWindowS)
				if err != nil && first == nil {
					first = fmt.Errorf("trial %s: %w", rec.Trials[ti].Name, err)
				}
			}
			cache[k] = ts
		}
		if ts == nil {
			return nil, ""
		}
		return ts[di], "averaged"
	}, &first
}
