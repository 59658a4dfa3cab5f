package main

// How validate prints its reports: text for people, JSON for programs, and
// the exit status they give.

import (
	"fmt"
	"io"
	"text/tabwriter"

	"muarc/validate"
)

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
	p := func(k int, s string) string { return fmt.Sprintf("%d %s", k, pluralWord(k, s, s+"s")) }
	return p(e, "error") + ", " + p(w, "warning") + ", " + p(n, "note")
}

// pluralWord gives one for n == 1 and many otherwise.
func pluralWord(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
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
