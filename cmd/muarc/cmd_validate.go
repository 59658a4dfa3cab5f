package main

import (
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"
	"text/tabwriter"

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

// validateExit: 2 when a file could not be read, 1 when a file has errors,
// else 0.
func validateExit(reps []*validate.Report) int {
	code := 0
	for _, r := range reps {
		if r.ReadError != "" {
			return 2
		}
		if r.Count(validate.Error) > 0 {
			code = 1
		}
	}
	return code
}

type validateTotals struct {
	Files      int `json:"files"`
	Clean      int `json:"clean"`
	WithErrors int `json:"with_errors"`
	Unreadable int `json:"unreadable"`
	Errors     int `json:"errors"`
	Warnings   int `json:"warnings"`
	Notes      int `json:"notes"`
}

func totals(reps []*validate.Report) validateTotals {
	t := validateTotals{Files: len(reps)}
	for _, r := range reps {
		e, w, n := r.Count(validate.Error), r.Count(validate.Warning), r.Count(validate.Note)
		t.Errors += e
		t.Warnings += w
		t.Notes += n
		switch {
		case r.ReadError != "":
			t.Unreadable++
		case e > 0:
			t.WithErrors++
		case w == 0 && n == 0:
			t.Clean++
		}
	}
	return t
}

func validateJSON(reps []*validate.Report, opt validate.Options) any {
	type fileJSON struct {
		*validate.Report
		Errors   int `json:"errors"`
		Warnings int `json:"warnings"`
		Notes    int `json:"notes"`
	}
	files := make([]fileJSON, len(reps))
	for i, r := range reps {
		files[i] = fileJSON{r, r.Count(validate.Error), r.Count(validate.Warning), r.Count(validate.Note)}
	}
	return map[string]any{
		"strict":         opt.Strict,
		"checksum_scan":  opt.ChecksumScan,
		"files":          files,
		"summary":        totals(reps),
		"exit_status":    validateExit(reps),
		"rules":          opt.Rules,
		"schema_version": "draft-07",
	}
}

// printReports prints each file's findings grouped by HDF5 path.
func printReports(w io.Writer, reps []*validate.Report) {
	for _, r := range reps {
		e, wa, n := r.Count(validate.Error), r.Count(validate.Warning), r.Count(validate.Note)
		switch {
		case r.ReadError != "":
			fmt.Fprintf(w, "%s: could not read\n  %s\n", r.File, r.ReadError)
			for _, f := range r.Findings {
				fmt.Fprintf(w, "  %-7s %s: %s\n", f.Severity, f.Check, f.Message)
			}
			continue
		case len(r.Findings) == 0:
			fmt.Fprintf(w, "%s: ok\n", r.File)
			continue
		}
		fmt.Fprintf(w, "%s: %s\n", r.File, plural3(e, wa, n))
		last := "\x00"
		for _, f := range r.Findings {
			where := f.HDF5Path
			if where == "" {
				where = "(metadata " + f.JSONPath + ")"
			}
			if where != last {
				fmt.Fprintf(w, "  %s\n", where)
				last = where
			}
			fmt.Fprintf(w, "    %-7s %-26s %s\n", f.Severity, f.Check, f.Message)
			if f.Hint != "" {
				fmt.Fprintf(w, "    %-7s %-26s hint: %s\n", "", "", f.Hint)
			}
		}
	}
}

func plural3(e, w, n int) string {
	p := func(k int, s string) string {
		if k == 1 {
			return fmt.Sprintf("%d %s", k, s)
		}
		return fmt.Sprintf("%d %ss", k, s)
	}
	return p(e, "error") + ", " + p(w, "warning") + ", " + p(n, "note")
}

// printSummary prints the closing table: one line per file and the totals.
func printSummary(w io.Writer, reps []*validate.Report) {
	t := totals(reps)
	last := fmt.Sprintf("%d files", t.Files)
	if t.Files == 1 {
		last = "1 file"
	}
	width := len("file")
	for _, r := range reps {
		width = max(width, len(r.File))
	}
	width = max(width, len(last))
	fmt.Fprintln(w)
	fmt.Fprintf(w, "%-*s  %6s  %8s  %5s  %s\n", width, "file", "errors", "warnings", "notes", "status")
	for _, r := range reps {
		status := "ok"
		switch {
		case r.ReadError != "":
			status = "unreadable"
		case r.Count(validate.Error) > 0:
			status = "errors"
		case r.Count(validate.Warning) > 0:
			status = "warnings"
		}
		fmt.Fprintf(w, "%-*s  %6d  %8d  %5d  %s\n", width, r.File, r.Count(validate.Error), r.Count(validate.Warning), r.Count(validate.Note), status)
	}
	fmt.Fprintf(w, "%-*s  %6d  %8d  %5d  %d ok, %d with errors, %d unreadable\n", width, last, t.Errors, t.Warnings, t.Notes,
		t.Files-t.WithErrors-t.Unreadable, t.WithErrors, t.Unreadable)
}

func printChecks(w io.Writer, asJSON bool) error {
	cs := validate.Checks()
	if asJSON {
		return printJSON(w, cs)
	}
	tw := tabwriter.NewWriter(w, 0, 0, 2, ' ', 0)
	fmt.Fprintln(tw, "check\tseverity\twhat it finds")
	for _, c := range cs {
		fmt.Fprintf(tw, "%s\t%s\t%s\n", c.ID, c.Severity, c.About)
	}
	return tw.Flush()
}
