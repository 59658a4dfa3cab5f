package main

import (
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"github.com/spf13/cobra"

	"muarc/internal/batch"
	"muarc/validate"
)

var validateFlags struct {
	json, strict, noChecksums, listChecks, inProcess bool
	rules, shard, shardReport                        string
	workers                                          int
}

var validateCmd = &cobra.Command{
	Use:   "validate FILE|DIR...",
	Short: "Check recordings against the layout, the metadata schema and common-practice ranges",
	Long: `validate checks muarc recordings: the metadata view against the JSON Schema
(muarc schema), the HDF5 structure against the layout (muarc schema --layout),
the content (discharges sorted, inside the recording, rates, units, MVC and
target, doublets, sustained rates, quality gates) and every stored chunk's
Fletcher-32 checksum. A folder means every *.h5 file below it.

Findings are errors, warnings or notes; --strict makes warnings errors. A rules
file (YAML or JSON) changes thresholds, switches checks off or re-ranks them;
--list-checks shows every check id. Rules file fields (defaults):
  silhouette_min 0.90, pnr_min_db 30 (dB), doublet_isi_ms 20 (ms),
  max_rate_pps 50 (pps over sustained_isis 5 intervals), min_discharges 10,
  emg_min_rate_hz 1000 (Hz), target_max_pct_mvc 100 (% MVC),
  force_units [N, kN, mN, N.m, ...] (UCUM codes),
  disabled [check id or prefix.*, ...], severity {check id or prefix.*: note|warning|error}

Files are validated in worker processes (restarted after a crash, reused
otherwise), so a file damaged badly enough to crash the HDF5 library is
reported as unreadable and the run goes on.
Exit status: 0 clean or warnings only, 1 errors, 2 a file could not be read
(or bad usage).`,
	Args: func(cmd *cobra.Command, args []string) error {
		if validateFlags.listChecks {
			return nil
		}
		if len(args) == 0 {
			return fmt.Errorf("give one or more files or folders to validate")
		}
		return nil
	},
	RunE: runValidate,
}

func init() {
	f := validateCmd.Flags()
	f.BoolVar(&validateFlags.json, "json", false, "print the reports as JSON")
	f.BoolVar(&validateFlags.strict, "strict", false, "make warnings errors")
	f.StringVar(&validateFlags.rules, "rules", "", "rules `FILE` (YAML or JSON) with thresholds, disabled checks and severities")
	f.IntVar(&validateFlags.workers, "workers", 0, "files validated at once (0: one per CPU)")
	f.StringVar(&validateFlags.shard, "shard", "", "validate only shard `i/n` of the sorted file list (cluster job arrays)")
	f.StringVar(&validateFlags.shardReport, "shard-report", "", "also write this run's shard report (muarc-shard-report JSON) to `FILE`, for muarc merge-reports")
	f.BoolVar(&validateFlags.noChecksums, "no-checksums", false, "skip the Fletcher-32 scan of every stored chunk (faster, finds less)")
	f.BoolVar(&validateFlags.listChecks, "list-checks", false, "list every check id with its default severity and exit")
	f.BoolVar(&validateFlags.inProcess, "in-process", false, "validate in this process instead of in worker processes (a file damaged in its HDF5 metadata can then crash the run)")
	rootCmd.AddCommand(validateCmd)
}

func runValidate(cmd *cobra.Command, args []string) error {
	out := cmd.OutOrStdout()
	if validateFlags.listChecks {
		return printChecks(out, validateFlags.json)
	}
	opt := validate.DefaultOptions()
	opt.Strict = validateFlags.strict
	opt.ChecksumScan = !validateFlags.noChecksums
	if validateFlags.rules != "" {
		r, err := validate.LoadRules(validateFlags.rules)
		if err != nil {
			return withExit(2, fmt.Errorf("rules file: %w", err))
		}
		opt.Rules = r
	}
	shard, err := batch.ParseShard(validateFlags.shard)
	if err != nil {
		return withExit(2, err)
	}
	paths, err := validateInputs(args)
	if err != nil {
		return withExit(2, err)
	}
	paths = shard.Select(paths)
	if len(paths) == 0 {
		return withExit(2, fmt.Errorf("shard %s of the inputs holds no file", shard))
	}
	bar := newProgress("validate", int64(len(paths)))
	if validateFlags.inProcess {
		validate.Validator = validate.File
	}
	reps := validate.Files(paths, opt, validateFlags.workers, func(int, *validate.Report) { bar.Add(1) })
	bar.Finish()
	if validateFlags.shardReport != "" {
		source := "."
		if len(args) == 1 {
			if st, err := os.Stat(args[0]); err == nil && st.IsDir() {
				source = args[0]
			}
		}
		files := make([]shardFile, len(reps))
		for i, r := range reps {
			n := r.Count(validate.Error)
			files[i] = shardFile{Path: r.File, Err: r.ReadError, Refused: r.ReadError == "" && n > 0, ValidationErrors: n}
		}
		if err := writeShardReport(validateFlags.shardReport, "validate", source, shard, files); err != nil {
			return withExit(2, err)
		}
	}

	if validateFlags.json {
		if err := printJSON(out, validateJSON(reps, opt)); err != nil {
			return err
		}
	} else {
		printReports(out, reps)
		printSummary(out, reps)
	}
	return silentExit(validateExit(reps))
}

// validateInputs expands folders to the *.h5 files below them; files are
// taken as given. The list keeps the order of the arguments, each folder's
// files sorted.
func validateInputs(args []string) ([]string, error) {
	var out []string
	seen := map[string]bool{}
	for _, a := range args {
		fi, err := os.Stat(a)
		if err != nil || !fi.IsDir() {
			// A missing file is reported in its own report (exit 2).
			if !seen[a] {
				seen[a] = true
				out = append(out, a)
			}
			continue
		}
		var found []string
		err = filepath.WalkDir(a, func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if !d.IsDir() && strings.EqualFold(filepath.Ext(p), ".h5") {
				found = append(found, p)
			}
			return nil
		})
		if err != nil {
			return nil, fmt.Errorf("reading folder %s: %w", a, err)
		}
		if len(found) == 0 {
			return nil, fmt.Errorf("folder %s holds no *.h5 file", a)
		}
		sort.Strings(found)
		for _, p := range found {
			if !seen[p] {
				seen[p] = true
				out = append(out, p)
			}
		}
	}
	return out, nil
}
