package main

import (
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"muarc/analysis"
	"muarc/analysis/plot"
	"muarc/analysis/study"
	"muarc/internal/jsonclean"
)

var statsFlags struct {
	json, tsv, write, noMUAPs bool
	out                       string
}

var statsCmd = &cobra.Command{
	Use:   "stats FILE | stats DIR",
	Short: "Per-unit rates, thresholds and MUAP templates of a recording, or the rate-versus-threshold analysis of a study",
	Long: `stats derives, for every motor unit of every decomposition in FILE:
  recruitment and derecruitment thresholds: the force (linearly interpolated)
    at the first and the last discharge, in % MVC and in force units;
  initial rate: 1 / mean of the first 3 inter-discharge intervals (pps);
  plateau mean rate: 1 / mean of the intervals wholly on the plateau (pps),
    and their ISI coefficient of variation (at least 3 intervals). The plateau
    is the longest run of the force target within 1 % of its peak (no target:
    of the force, smoothed by a 0.5 s moving mean, within 10 % of its peak);
  MUAP templates: spike-triggered averages of the raw EMG from -25 ms to
    +25 ms around each discharge, and the peak-to-peak amplitude per channel
    (--no-muaps skips them: the samples are then not read).
Per decomposition it fits plateau mean rate and initial rate against
recruitment threshold by least squares (slope, intercept, R^2, n).

--write stores the figures and templates in each decomposition's own
"derived" group (derived/units: recruit_pct_mvc, derecruit_pct_mvc,
recruit_force, derecruit_force, initial_rate_pps, plateau_rate_pps,
plateau_isi_cov, plateau_isi_count; derived/muaps), with the software, the
time and the method and its parameters beside them, and a "stats" entry in
the provenance history. The lab's own unit table and templates are never
changed. The file is rewritten beside itself and renamed into place; on any error
it is left as it was. A file with parts muarc does not read is refused, naming them.

Given a folder (the study), stats reads every recording in it one at a time
and fits, per subject x muscle x target level, plateau mean rate and
initial rate against recruitment threshold (least squares: slope with its
95 % confidence interval, intercept, R^2, n; units and threshold range),
using per array the decomposition summaries use (the last edited by hand,
else the last). Per muscle x level, and per muscle over all levels, it gives
the mean, SD and range of the subjects' slopes and intercepts and a linear
mixed model (random intercept and slope per subject, REML) that splits the
variability into between-subject and within-subject parts; over all levels
the model gives each target level its own fixed intercept and one common
slope (rate ~ 0 + level + threshold), so that the rise of rate with the
level is not counted as within-subject scatter. --tsv prints one
row per subject x muscle x level x relation; --write stores
rate_threshold_fits.tsv, rate_threshold_summary.tsv, per muscle a figure of
the subjects side by side (both relations, one colour per level, R^2 on each
panel; study__<muscle>__rate_threshold.png and .svg; a muscle with more
than 10 subjects gets parts of 10 on the same axes,
study__<muscle>__rate_threshold__partKK_of_NN) and rate_threshold.json
(the method, every recording's SHA-256, the figure files) in --out (default
DIR/rate_threshold); the recordings are not changed.

Exit status: 0 done, 2 the file could not be read or written (or bad usage).`,
	Args: cobra.ExactArgs(1),
	RunE: runStats,
}

func init() {
	f := statsCmd.Flags()
	f.BoolVar(&statsFlags.json, "json", false, "print the figures as JSON")
	f.BoolVar(&statsFlags.tsv, "tsv", false, "print one tab-separated row per unit (unit: muarc's id; label: the lab's, empty when none)")
	f.BoolVar(&statsFlags.write, "write", false, "store the figures and templates in FILE (rewritten atomically)")
	f.BoolVar(&statsFlags.noMUAPs, "no-muaps", false, "skip the MUAP templates (the EMG samples are not read)")
	f.StringVar(&statsFlags.out, "out", "", "with DIR and --write: the folder for the study's results (default DIR/rate_threshold)")
	rootCmd.AddCommand(statsCmd)
}

func runStats(cmd *cobra.Command, args []string) error {
	if statsFlags.json && statsFlags.tsv {
		return withExit(2, fmt.Errorf("give --json or --tsv, not both"))
	}
	if st, err := os.Stat(args[0]); err == nil && st.IsDir() {
		return runStudyStats(cmd, args[0])
	}
	if statsFlags.out != "" {
		return withExit(2, fmt.Errorf("--out goes with a study folder, not a file"))
	}
	if err := checkRecordingInput(args[0], !statsFlags.noMUAPs); err != nil {
		return withExit(2, err)
	}
	res, err := analysis.StatsFile(args[0], !statsFlags.noMUAPs, statsFlags.write)
	if err != nil {
		return withExit(2, err)
	}
	w := cmd.OutOrStdout()
	switch {
	case statsFlags.json:
		return printJSON(w, jsonclean.Clean(res))
	case statsFlags.tsv:
		return printStatsTSV(w, res)
	}
	return printStatsText(w, res)
}

// num formats a figure for people: "-" when unknown, never "-0.00".
func num(v float64, prec int) string { return study.Figure(v, prec, "-") }

// tsvNum formats a figure for machines: empty when unknown, full precision.
func tsvNum(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

func printStatsText(w io.Writer, r *analysis.FileStats) error {
	fmt.Fprintf(w, "%s\n", r.File)
	for _, d := range r.Decompositions {
		fmt.Fprintf(w, "\ntrial %s, array %s, decomposition %s: %d units", d.Trial, d.Array, d.Decomposition, len(d.Units))
		if d.Plateau != nil {
			fmt.Fprintf(w, "; plateau %.2f-%.2f s at %s %% MVC (from %s; force %s %% MVC, tracking RMS %s %% MVC)", d.Plateau.StartS, d.Plateau.EndS,
				num(d.Plateau.LevelPctMVC, 1), d.Plateau.From, num(d.Plateau.ForceMeanPctMVC, 1), num(d.Plateau.TrackingRMSPctMVC, 2))
		}
		fmt.Fprintln(w)
		tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', tabwriter.AlignRight)
		fu := d.ForceUnit
		if fu == "" {
			fu = "force"
		}
		fmt.Fprintf(tw, "unit\tdischarges\trecruit %%MVC\trecruit %s\tderecruit %%MVC\tinitial pps\tplateau pps\tISI CoV\tplateau ISIs\tMUAP p2p %s\t\n", fu, muapUnit(d))
		for i, u := range d.Units {
			p2p := "-"
			if d.MUAPs != nil && i < len(d.MUAPs.Units) {
				p2p = num(d.MUAPs.Units[i].MaxPeakToPeak, 1)
			}
			name := u.Label // the lab's label; muarc's id when there is none
			if name == "" {
				name = strconv.FormatInt(u.ID, 10)
			}
			fmt.Fprintf(tw, "%s\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t%d\t%s\t\n", name, u.Discharges, num(u.RecruitPctMVC, 2), num(u.RecruitForce, 2),
				num(u.DerecruitPctMVC, 2), num(u.InitialRatePPS, 2), num(u.PlateauRatePPS, 2), num(u.PlateauISICoV, 3), u.PlateauISIs, p2p)
		}
		tw.Flush()
		for _, f := range []struct {
			name string
			fit  analysis.Fit
		}{{"plateau rate", d.PlateauRateFit}, {"initial rate", d.InitialRateFit}} {
			fmt.Fprintf(w, "  %s vs recruitment: slope %s pps/%%MVC, intercept %s pps, R^2 %s, n %d\n", f.name, num(f.fit.Slope, 4), num(f.fit.Intercept, 3), num(f.fit.R2, 3), f.fit.N)
		}
		for _, n := range d.Notes {
			fmt.Fprintf(w, "  note: %s\n", n)
		}
	}
	if r.Written {
		fmt.Fprintf(w, "\nstored the figures in %s\n", r.File)
	}
	return nil
}

func muapUnit(d analysis.DecompositionFS) string {
	if d.MUAPs != nil && d.MUAPs.Unit != "" {
		return d.MUAPs.Unit
	}
	return ""
}

func printStatsTSV(w io.Writer, r *analysis.FileStats) error {
	cols := []string{"trial", "array", "decomposition", "unit", "label", "discharge_count", "first_discharge_s", "last_discharge_s",
		"recruit_pct_mvc", "derecruit_pct_mvc", "recruit_force", "derecruit_force", "force_unit",
		"initial_rate_pps", "plateau_rate_pps", "plateau_isi_cov", "plateau_isi_count", "plateau_start_s", "plateau_end_s",
		"muap_averaged", "muap_max_peak_to_peak", "muap_unit"}
	if _, err := fmt.Fprintln(w, strings.Join(cols, "\t")); err != nil {
		return err
	}
	for _, d := range r.Decompositions {
		ps, pe := math.NaN(), math.NaN()
		if d.Plateau != nil {
			ps, pe = d.Plateau.StartS, d.Plateau.EndS
		}
		for i, u := range d.Units {
			avg, p2p, mu := "", "", ""
			if d.MUAPs != nil && i < len(d.MUAPs.Units) {
				avg, p2p, mu = strconv.Itoa(d.MUAPs.Units[i].Averaged), tsvNum(d.MUAPs.Units[i].MaxPeakToPeak), d.MUAPs.Unit
			}
			row := []string{d.Trial, d.Array, d.Decomposition, strconv.FormatInt(u.ID, 10), study.TSVText(u.Label), strconv.Itoa(u.Discharges),
				tsvNum(u.FirstS), tsvNum(u.LastS), tsvNum(u.RecruitPctMVC), tsvNum(u.DerecruitPctMVC),
				tsvNum(u.RecruitForce), tsvNum(u.DerecruitForce), d.ForceUnit, tsvNum(u.InitialRatePPS),
				tsvNum(u.PlateauRatePPS), tsvNum(u.PlateauISICoV), strconv.Itoa(u.PlateauISIs), tsvNum(ps), tsvNum(pe), avg, p2p, mu}
			if _, err := fmt.Fprintln(w, strings.Join(row, "\t")); err != nil {
				return err
			}
		}
	}
	return nil
}

// runStudyStats analyses the study in dir.
func runStudyStats(cmd *cobra.Command, dir string) error {
	var bar *progress
	res, err := study.Analyse(dir, func(done, total int) {
		if bar == nil {
			bar = newProgress("stats", int64(total))
		}
		bar.Add(1)
	})
	bar.Finish()
	if err != nil {
		return withExit(2, err)
	}
	w := cmd.OutOrStdout()
	if statsFlags.write {
		out := statsFlags.out
		if out == "" {
			out = filepath.Join(dir, "rate_threshold")
		}
		// The figures first, so that the JSON written last lists them.
		figs, err := plot.SaveStudyFigures(out, res)
		if err != nil {
			return withExit(2, err)
		}
		res.Figures = figs
		if err := study.Save(out, res); err != nil {
			return withExit(2, err)
		}
		if !statsFlags.json && !statsFlags.tsv {
			defer fmt.Fprintf(w, "\nstored %s, %s, %s and %d figures (each as PNG and SVG, listed in the JSON) in %s\n", study.FitsFile, study.SummaryFile, study.JSONFile, len(figs)/2, out)
		}
	}
	switch {
	case statsFlags.json:
		return printJSON(w, jsonclean.Clean(res))
	case statsFlags.tsv:
		return study.WriteFitsTSV(w, res)
	}
	return study.WriteText(w, res)
}
