package study

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"text/tabwriter"

	"muarc/internal/atomicfile"
	"muarc/internal/jsonclean"
)

// FitColumns are the header of the per-subject TSV, one row per subject x
// muscle x level x relation (tidy: ready for pandas and R).
var FitColumns = []string{"subject", "muscle", "level_pct_mvc", "relation", "units", "threshold_min_pct_mvc", "threshold_max_pct_mvc",
	"n", "slope_pps_per_pct_mvc", "slope_ci_low", "slope_ci_high", "intercept_pps", "r2"}

// SummaryColumns are the header of the summary TSV, one row per muscle x
// level x relation; level_pct_mvc "all" pools the levels, where the mixed
// model has one fixed intercept per level (FitMixedLevels; in the JSON as
// level_intercepts) and mixed_intercept is empty.
var SummaryColumns = []string{"muscle", "level_pct_mvc", "relation", "subjects", "slope_mean", "slope_sd", "slope_min", "slope_max",
	"intercept_mean", "intercept_sd", "intercept_min", "intercept_max", "mixed_subjects", "mixed_n", "mixed_slope", "mixed_slope_se",
	"mixed_intercept", "mixed_intercept_se", "between_intercept_var", "between_slope_var", "between_cov", "within_var", "between_share"}

func cell(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(v, 'g', 10, 64)
}

// WriteFitsTSV writes the per-subject rows; unknown numbers are empty.
func WriteFitsTSV(w io.Writer, r *Result) error {
	var b bytes.Buffer
	b.WriteString(strings.Join(FitColumns, "\t") + "\n")
	for _, x := range r.Rows {
		f := x.Fit
		b.WriteString(strings.Join([]string{TSVText(x.Subject), TSVText(x.Muscle), cell(x.LevelPct), x.Relation, strconv.Itoa(x.Units),
			cell(x.ThresholdMinPct), cell(x.ThresholdMaxPct), strconv.Itoa(f.N), cell(f.Slope), cell(f.SlopeCILow),
			cell(f.SlopeCIHigh), cell(f.Intercept), cell(f.R2)}, "\t") + "\n")
	}
	_, err := w.Write(b.Bytes())
	return err
}

// WriteSummaryTSV writes the muscle x level rows.
func WriteSummaryTSV(w io.Writer, r *Result) error {
	var b bytes.Buffer
	b.WriteString(strings.Join(SummaryColumns, "\t") + "\n")
	for _, s := range r.Summary {
		m := s.Mixed
		b.WriteString(strings.Join([]string{TSVText(s.Muscle), levelCell(s.LevelPct), s.Relation, strconv.Itoa(s.Slope.N),
			cell(s.Slope.Mean), cell(s.Slope.SD), cell(s.Slope.Min), cell(s.Slope.Max),
			cell(s.Intercept.Mean), cell(s.Intercept.SD), cell(s.Intercept.Min), cell(s.Intercept.Max),
			strconv.Itoa(m.Subjects), strconv.Itoa(m.N), cell(m.Slope), cell(m.SlopeSE), cell(m.Intercept), cell(m.InterceptSE),
			cell(m.BetweenInterceptVar), cell(m.BetweenSlopeVar), cell(m.BetweenCov), cell(m.WithinVar), cell(m.BetweenShare)}, "\t") + "\n")
	}
	_, err := w.Write(b.Bytes())
	return err
}

func levelCell(v float64) string {
	if math.IsNaN(v) {
		return "all"
	}
	return cell(v)
}

// TSVText keeps a text cell on its row: tabs and line breaks become blanks.
func TSVText(s string) string { return strings.NewReplacer("\t", " ", "\n", " ", "\r", " ").Replace(s) }

func num(v float64, prec int) string { return Figure(v, prec, "-") }

// Figure formats a figure for people with prec decimals, never as "-0.00";
// missing stands for a value not known (NaN or infinite).
func Figure(v float64, prec int, missing string) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return missing
	}
	s := strconv.FormatFloat(v, 'f', prec, 64)
	if strings.Trim(s, "-0.") == "" {
		s = strings.TrimPrefix(s, "-") // no "-0.00"
	}
	return s
}

// SpreadText writes a spread for people: "mean ± SD" from two values on;
// with one value that value, n = 1 and why there is no spread; with none,
// dash and why. num formats a number at prec digits.
func SpreadText(s Spread, prec int, dash string, num func(float64, int) string) string {
	switch s.N {
	case 0:
		return dash + " (no line of 3 or more units)"
	case 1:
		return num(s.Mean, prec) + " (n = 1, no SD)"
	}
	return num(s.Mean, prec) + " ± " + num(s.SD, prec)
}

// RangeText writes a spread's range: "min to max", the single value with
// n = 1.
func RangeText(s Spread, prec int, dash string, num func(float64, int) string) string {
	switch s.N {
	case 0:
		return dash
	case 1:
		return num(s.Mean, prec) + " (n = 1)"
	}
	return num(s.Min, prec) + " to " + num(s.Max, prec)
}

// MixedText writes the mixed model's fixed slope ± SE, or why it was not
// fitted (it needs 2 subjects and 4 points).
func MixedText(m MixedFit, prec int, dash string, num func(float64, int) string) string {
	switch {
	case m.Subjects < 2:
		return fmt.Sprintf("%s (needs 2 subjects, %d here)", dash, m.Subjects)
	case m.N < 4:
		return fmt.Sprintf("%s (needs 4 units, %d here)", dash, m.N)
	case math.IsNaN(m.Slope):
		return dash + " (did not converge)"
	}
	return num(m.Slope, prec) + " ± " + num(m.SlopeSE, prec)
}

// WriteText writes the analysis for people.
func WriteText(w io.Writer, r *Result) error {
	fmt.Fprintf(w, "%s: %d recordings\n\nper subject (rate against recruitment threshold, least squares):\n", r.Dir, len(r.Sources))
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "muscle\t%MVC\tsubject\trelation\tunits\tthreshold %MVC\tslope pps/%MVC\t95% CI\tintercept pps\tR^2")
	for _, x := range r.Rows {
		f := x.Fit
		fmt.Fprintf(tw, "%s\t%s\t%s\t%s\t%d\t%s-%s\t%s\t%s..%s\t%s\t%s\n", x.Muscle, num(x.LevelPct, 0), x.Subject, x.Relation, x.Units,
			num(x.ThresholdMinPct, 1), num(x.ThresholdMaxPct, 1), num(f.Slope, 3), num(f.SlopeCILow, 3), num(f.SlopeCIHigh, 3), num(f.Intercept, 2), num(f.R2, 2))
	}
	tw.Flush()
	fmt.Fprintln(w, "\nacross subjects (mean ± SD of the subjects' slopes; mixed model: fixed slope ± SE, between-subject share of the variance):")
	tw = tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)
	fmt.Fprintln(tw, "muscle\t%MVC\trelation\tsubjects\tslope mean ± SD\tintercept mean ± SD\tmixed slope ± SE\tbetween share\twithin var")
	for _, s := range r.Summary {
		lvl := num(s.LevelPct, 0)
		if math.IsNaN(s.LevelPct) {
			lvl = "all"
		}
		fmt.Fprintf(tw, "%s\t%s\t%s\t%d\t%s\t%s\t%s\t%s\t%s\n", s.Muscle, lvl, s.Relation, s.Slope.N,
			SpreadText(s.Slope, 3, "-", num), SpreadText(s.Intercept, 2, "-", num),
			MixedText(s.Mixed, 3, "-", num), num(s.Mixed.BetweenShare, 2), num(s.Mixed.WithinVar, 2))
	}
	tw.Flush()
	for _, n := range r.Notes {
		fmt.Fprintln(w, "note:", n)
	}
	return nil
}

// Files written by Save, in the output folder.
const (
	FitsFile    = "rate_threshold_fits.tsv"
	SummaryFile = "rate_threshold_summary.tsv"
	JSONFile    = "rate_threshold.json"
)

// Save writes the per-subject TSV, the summary TSV and the whole result
// with its provenance (software, time, method, every source's SHA-256) as
// JSON into folder out, each file atomically; existing files are replaced.
func Save(out string, r *Result) error {
	if err := os.MkdirAll(out, 0o755); err != nil {
		return err
	}
	var fits, sum bytes.Buffer
	if err := WriteFitsTSV(&fits, r); err != nil {
		return err
	}
	if err := WriteSummaryTSV(&sum, r); err != nil {
		return err
	}
	js, err := json.MarshalIndent(jsonclean.Clean(r), "", "  ")
	if err != nil {
		return err
	}
	for name, data := range map[string][]byte{FitsFile: fits.Bytes(), SummaryFile: sum.Bytes(), JSONFile: append(js, '\n')} {
		if err := atomicfile.WriteFile(filepath.Join(out, name), data, true); err != nil {
			return err
		}
	}
	return nil
}
