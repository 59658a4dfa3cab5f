package main

import (
	"errors"
	"fmt"
	"io"
	"strings"

	"github.com/spf13/cobra"

	"muarc/convert"
)

func init() {
	var (
		what, shape, format, out, timeBase string
		bidsDir                            string
		overwrite, asJSON, allowIdent      bool
	)
	cmd := &cobra.Command{
		Use:   "export FILE",
		Short: "Write a muarc file's signals, discharges, units or metadata as CSV, TSV or JSON",
		Long: `Write parts of a muarc file as plain text, so that any tool can read them:

  muarc export FILE [--what all|signals,discharges,units,muaps,derived,history,metadata]
               [--shape long|columns|lines|matrix] [--time-base samples|s] [--format csv|tsv|json] -o DIR

"all" (the default) writes every part: DIR/<trial>/force.csv and emg_<array>.csv (signals),
discharges_<array>_<decomposition>.csv, units_<array>_<decomposition>.csv,
muaps_<array>_<decomposition>.csv (MUAP templates, where a decomposition has them),
derived_units_<array>_<decomposition>.csv and derived_muaps_<array>_<decomposition>.csv
(the figures and templates "muarc stats --write" derived, in tables of their own that say
so and carry the software, time and method: never mixed into the lab's unit table),
DIR/history.csv (the recording's history) and DIR/metadata.json: the names the built-in
import profile reads, so "muarc import DIR -o OUT" gives the same recording back, templates,
derived figures (back into derived/) and history included. With --format json the
discharges, units, derived figures and metadata are JSON, the history is inside
metadata.json, and signals and MUAP templates, the lab's or derived (csv or tsv only), are
refused: give --what discharges,units,metadata. Numbers are written with the shortest
digits that read back to the same value; discharges as 0-based sample indices (or, with
--time-base s, seconds that round back to the same samples). Each file is written atomically; existing files are kept unless --overwrite.

  muarc export FILE --format bdf|edf -o DIR [--allow-identified]

writes DIR/<trial>.bdf (BDF+, 24-bit) or .edf (EDF+, 16-bit): arrays and force as signals,
discharges as annotations "discharge ARRAY/DECOMPOSITION unit ID", the EDF+ patient field
from the pseudonym ("X" for unknowns). Only de-identified recordings unless --allow-identified.

  muarc export STUDY_DIR --bids OUT_DIR [--allow-identified]

writes the muarc files of STUDY_DIR as a BIDS 1.11.0 dataset of the EMG datatype (one
*_emg.bdf per trial with its sidecars, events for the trapezoid phases, decompositions under
derivatives/muarc/) and says which required sidecar values it had to leave "n/a".`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if bidsDir != "" { // cmd_export_bids.go
				return exportBIDS(cmd.OutOrStdout(), cmd.ErrOrStderr(), args[0], bidsDir, allowIdent, overwrite, asJSON)
			}
			if format == "bdf" || format == "edf" { // cmd_export_edf.go
				return exportEDF(cmd.OutOrStdout(), cmd.ErrOrStderr(), args[0], out, format, allowIdent, overwrite, asJSON)
			}
			if out == "" {
				return withExit(2, errors.New("give the output folder with -o"))
			}
			kinds := strings.Split(what, ",")
			if what == "all" {
				kinds = convert.ExportKinds
			}
			if err := checkRecordingInput(args[0], true); err != nil {
				return withExit(2, err)
			}
			files, err := convert.Export(args[0], kinds, convert.ExportOptions{Dir: out, Format: format, Shape: shape, TimeBase: timeBase, Overwrite: overwrite})
			return exportDone(cmd.OutOrStdout(), files, err, asJSON)
		},
	}
	f := cmd.Flags()
	f.StringVar(&what, "what", "all", "what to write: signals, discharges, units, muaps, derived, history, metadata (comma-separated) or all (every one of them)")
	f.StringVar(&shape, "shape", "long", "discharge shape: long (unit, sample), columns, lines or matrix")
	f.StringVar(&timeBase, "time-base", "samples", "discharge times: samples (0-based indices, exact) or s (seconds)")
	f.StringVar(&format, "format", "csv", "csv, tsv or json (json for discharges, units and metadata); bdf or edf for one BDF+ (24-bit) or EDF+ (16-bit) file per trial")
	f.BoolVar(&allowIdent, "allow-identified", false, "with --format bdf|edf or --bids: write recordings that still carry identifying fields")
	f.StringVar(&bidsDir, "bids", "", "write the study folder FILE (muarc files) as a BIDS 1.11.0 EMG dataset in this folder")
	f.StringVarP(&out, "output", "o", "", "output folder")
	f.BoolVar(&overwrite, "overwrite", false, "replace existing files")
	f.BoolVar(&asJSON, "json", false, "list the files written as JSON")
	rootCmd.AddCommand(cmd)
}

func exportDone(w io.Writer, files []string, err error, asJSON bool) error {
	if asJSON {
		return printJSONOutcome(w, map[string]any{"files": files}, err)
	}
	for _, f := range files {
		fmt.Fprintln(w, "wrote", f)
	}
	return withExit(2, err)
}
