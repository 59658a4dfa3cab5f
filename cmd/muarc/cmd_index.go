package main

import (
	"fmt"
	"math"
	"os"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"muarc/archive"
)

func init() {
	var (
		asJSON, asTSV, overwrite bool
		catalogue, noCatalogue   bool
		inProcess                bool
		muscle, subject, tables  string
		level                    float64
		workers                  int
	)
	cmd := &cobra.Command{
		Use:   "index DIR",
		Short: "List every recording, trial and array of a study folder (attributes only, fast)",
		Long: `index reads the muarc recordings (*.h5, *.hdf5) under DIR and prints one row per
recording, trial and electrode array: subject (the pseudonym once de-identified),
muscle, side, target level in % MVC, EMG duration in s, channels, motor units,
discharges and low-confidence units (silhouette or PNR below the validator's
default gates), with the file and its size. It opens each recording once and reads
only what the rows show (attributes, table lengths, the quality and rate columns),
never the EMG samples; a recording damaged in a part the rows do not show is still
listed (muarc validate finds the damage). The unit counts come from the array's last decomposition
edited by hand, else its last one; the decomposition column names it.

--tables OUTDIR writes the study tables subjects.tsv and recordings.tsv for the
rows selected.

--catalogue keeps the rows in DIR/.muarc-catalogue.jsonl (JSON Lines, described in
archive/CATALOGUE.md in the source). Once it exists, every index run uses it and
refreshes it: a recording is read again unless its size, modification time, change
time and inode are those the catalogue holds (or, after a copy of the folder, its
size, modification time and metadata digest); removed recordings drop out, so a
filtered index of 10,000 recordings reads the folder listing and one file.
--no-catalogue reads every recording and leaves the catalogue alone.

Recordings are read in worker processes (reused, restarted after a crash), so a
file that crashes the HDF5 library is reported as unreadable and the run goes on.
Exit 0, or 2 when a file could not be read (the others are listed).`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if asJSON && asTSV {
				return withExit(2, fmt.Errorf("--json and --tsv: choose one"))
			}
			opt := archive.IndexOptions{Muscle: muscle, Subject: subject, Level: math.NaN(), Workers: workers}
			if cmd.Flags().Changed("level") {
				opt.Level = level
			}
			if catalogue && noCatalogue {
				return withExit(2, fmt.Errorf("--catalogue and --no-catalogue: choose one"))
			}
			sopt := archive.StudyOptions{Workers: workers, Isolated: !inProcess}
			switch {
			case catalogue:
				sopt.Catalogue = archive.CatalogueCreate
			case noCatalogue:
				sopt.Catalogue = archive.CatalogueIgnore
			}
			sums, info, readErr := archive.IndexStudy(args[0], sopt)
			for _, n := range info.Notes {
				fmt.Fprintln(os.Stderr, "muarc index: note:", n)
			}
			if sums == nil && readErr != nil {
				if _, err := os.Stat(args[0]); err != nil {
					return withExit(2, err)
				}
			}
			sel := opt.Filter(sums)
			var rows []archive.IndexRow
			for _, s := range sel {
				rows = append(rows, s.Rows...)
			}
			if tables != "" {
				if err := os.MkdirAll(tables, 0o755); err != nil {
					return withExit(2, err)
				}
				t := archive.StudyTables(sel, nil)
				if err := archive.WriteTables(tables, t, overwrite); err != nil {
					return withExit(2, err)
				}
				for _, n := range t.Notes {
					fmt.Fprintln(os.Stderr, "note:", n)
				}
			}
			out := cmd.OutOrStdout()
			var errs []string
			if readErr != nil {
				errs = archiveLines(readErr.Error())
			}
			switch {
			case asJSON:
				if rows == nil {
					rows = []archive.IndexRow{}
				}
				if err := printJSON(out, map[string]any{"rows": rows, "unreadable": archiveStrings(errs), "catalogue": catalogueJSON(info)}); err != nil {
					return withExit(2, err)
				}
			case asTSV:
				if err := archive.WriteIndexTSV(out, rows); err != nil {
					return withExit(2, err)
				}
			default:
				tw := tabwriter.NewWriter(out, 0, 0, 2, ' ', 0)
				fmt.Fprintln(tw, "FILE\tSUBJECT\tTRIAL\tARRAY\tMUSCLE\tSIDE\t%MVC\tDUR s\tCH\tUNITS\tDISCH\tLOW\tBYTES")
				for _, r := range rows {
					lvl := "?"
					if !math.IsNaN(r.LevelPctMVC) {
						lvl = fmt.Sprintf("%g", r.LevelPctMVC)
					}
					fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%s\t%s\t%s\t%.1f\t%d\t%d\t%d\t%d\t%d\n", r.File, r.Subject, r.Trial, r.Array,
						r.Muscle, r.Side, lvl, r.DurationS, r.Channels, r.Units, r.Discharges, r.LowConfidenceUnits, r.Bytes)
				}
				tw.Flush()
				fmt.Fprintf(out, "%d rows from %d recordings\n", len(rows), len(sel))
				if info.Catalogue != "" {
					fmt.Fprintf(out, "catalogue %s: %d recordings from it, %d rechecked by content, %d read\n", info.Catalogue, info.Reused, info.Rechecked, info.Read)
				}
			}
			if len(errs) > 0 {
				if !asJSON {
					for _, e := range errs {
						fmt.Fprintln(os.Stderr, "muarc index: cannot read", e)
					}
				}
				return silentExit(2)
			}
			return nil
		},
	}
	f := cmd.Flags()
	f.BoolVar(&asJSON, "json", false, "print the rows as JSON")
	f.BoolVar(&asTSV, "tsv", false, "print the rows as tab-separated values")
	f.StringVar(&muscle, "muscle", "", "keep rows of this muscle (case-blind)")
	f.Float64Var(&level, "level", 0, "keep rows of this target level, % MVC")
	f.StringVar(&subject, "subject", "", "keep rows of this subject identifier")
	f.StringVar(&tables, "tables", "", "write subjects.tsv and recordings.tsv into this folder")
	f.BoolVar(&overwrite, "overwrite", false, "replace existing tables")
	f.IntVar(&workers, "workers", 0, "files read at once (0: one per CPU)")
	f.BoolVar(&catalogue, "catalogue", false, "create or refresh the study's catalogue DIR/"+archive.CatalogueName+" and answer from it")
	f.BoolVar(&noCatalogue, "no-catalogue", false, "read every recording; neither read nor write the catalogue")
	f.BoolVar(&inProcess, "in-process", false, "read recordings in this process instead of worker processes (a file damaged in its HDF5 metadata can then crash the run)")
	rootCmd.AddCommand(cmd)
}

func archiveLines(s string) []string {
	var out []string
	start := 0
	for i := 0; i <= len(s); i++ {
		if i == len(s) || s[i] == '\n' {
			if i > start {
				out = append(out, s[start:i])
			}
			start = i + 1
		}
	}
	return out
}

func archiveStrings(s []string) []string {
	if s == nil {
		return []string{}
	}
	return s
}

// catalogueJSON is what --json says about the catalogue.
func catalogueJSON(info archive.StudyInfo) map[string]any {
	return map[string]any{"path": info.Catalogue, "written": info.Written, "recordings": info.Recordings,
		"reused": info.Reused, "rechecked": info.Rechecked, "read": info.Read, "notes": archiveStrings(info.Notes)}
}
