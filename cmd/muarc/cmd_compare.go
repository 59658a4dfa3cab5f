package main

import (
	"fmt"
	"io"
	"math"
	"strings"
	"text/tabwriter"

	"github.com/spf13/cobra"

	"muarc/analysis"
	"muarc/internal/jsonclean"
	"muarc/recfile"
	"muarc/record"
)

var compareFlags struct {
	json                       bool
	toleranceMs, maxLagMs, min float64
}

var compareCmd = &cobra.Command{
	Use:   "compare A B",
	Short: "Match the units of two decompositions and give each pair's rate of agreement",
	Long: `compare matches the motor units of two decompositions of the same recording
(automatic against hand-edited, or two labs) and gives, per matched pair, the
rate of agreement RoA = common / (common + only in A + only in B), where two
discharges are common when they lie within --tolerance-ms of each other
(0.5 ms), each discharge pairing at most once, after the best constant lag
between the two trains within --max-lag-ms (2 ms; the lag with the most
common discharges, ties to the smaller summed offset). Pairs are taken one
to one in order of falling RoA while RoA is at least --min-roa (0.3); the
rest are listed as unmatched. Times are compared in seconds from the trial
start, so the two decompositions may come from files or arrays of different
sampling rates.

A decomposition is named FILE#TRIAL/ARRAY/DECOMPOSITION. Leading parts may
be left out when the rest is unambiguous: FILE#ARRAY/DECOMPOSITION,
FILE#DECOMPOSITION, or FILE alone when it holds one decomposition. B may be
written #DECOMPOSITION (or #ARRAY/DECOMPOSITION) to mean the same file as A,
and its left-out parts are then A's trial and array:

  muarc compare s01.h5#ramp_30/ta_grid/auto '#edited'
  muarc compare lab1/s01.h5#ramp_30/ta_grid/auto lab2/s01.h5#ramp_30/ta_grid/auto

Exit status: 0 done, 2 a file or decomposition could not be read or found
(or bad usage).`,
	Args: cobra.ExactArgs(2),
	RunE: runCompare,
}

func init() {
	f := compareCmd.Flags()
	f.BoolVar(&compareFlags.json, "json", false, "print the comparison as JSON")
	f.Float64Var(&compareFlags.toleranceMs, "tolerance-ms", 1000*analysis.RoAToleranceS, "how close two discharges must be to count as common, ms")
	f.Float64Var(&compareFlags.maxLagMs, "max-lag-ms", 1000*analysis.RoAMaxLagS, "largest constant lag searched between two trains, ms (0: none)")
	f.Float64Var(&compareFlags.min, "min-roa", analysis.RoAMinMatch, "least rate of agreement (0..1) for two units to be matched")
	rootCmd.AddCommand(compareCmd)
}

// resolved is a decomposition found in an open recording.
type resolved struct {
	analysis.Found
	arr *record.Array
	dec *record.Decomposition
}

// resolve finds the decomposition ref names in rec (see
// analysis.DecompositionRef.Find).
func resolve(rec *record.Recording, ref analysis.DecompositionRef, like *resolved) (*resolved, error) {
	var l *analysis.Found
	if like != nil {
		l = &like.Found
	}
	f, err := ref.Find(rec, l)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", ref.File, err)
	}
	arr := &rec.Trials[f.TrialIndex].Arrays[f.ArrayIndex]
	return &resolved{f, arr, &arr.Decompositions[f.DecompositionIndex]}, nil
}

// trains converts a decomposition's discharges to seconds from the trial
// start.
func trains(r *resolved) ([]analysis.Train, error) {
	if !(r.arr.SamplingRateHz > 0) {
		return nil, fmt.Errorf("array %s has no sampling rate: discharge times are unknown", r.Array)
	}
	out := make([]analysis.Train, len(r.dec.Units))
	for i, u := range r.dec.Units {
		out[i] = analysis.Train{ID: u.ID, Name: u.Name(), TimesS: analysis.DischargeTimesS(u.Discharges, r.arr.SamplingRateHz, r.arr.StartS)}
		for k := 1; k < len(u.Discharges); k++ {
			if u.Discharges[k] < u.Discharges[k-1] {
				return nil, fmt.Errorf("%s/%s/%s unit %s: discharges are not in ascending order (run muarc validate)", r.Trial, r.Array, r.Decomposition, u.Name())
			}
		}
	}
	return out, nil
}

type compareResult struct {
	A          string `json:"a"`
	B          string `json:"b"`
	UnitsA     int    `json:"units_a"`
	UnitsB     int    `json:"units_b"`
	LagStepS   float64
	Comparison analysis.Comparison `json:"comparison"`
}

func runCompare(cmd *cobra.Command, args []string) error {
	ra, err := analysis.ParseDecompositionRef(args[0])
	if err != nil {
		return withExit(2, err)
	}
	if ra.File == "" {
		return withExit(2, fmt.Errorf("A must name a file: FILE#TRIAL/ARRAY/DECOMPOSITION"))
	}
	rb, err := analysis.ParseDecompositionRef(args[1])
	if err != nil {
		return withExit(2, err)
	}
	sameFile := rb.File == "" || rb.File == ra.File
	if rb.File == "" {
		rb.File = ra.File
	}
	if !(compareFlags.toleranceMs > 0) || compareFlags.maxLagMs < 0 || compareFlags.min < 0 || compareFlags.min > 1 {
		return withExit(2, fmt.Errorf("--tolerance-ms must be > 0, --max-lag-ms >= 0 and --min-roa in 0..1"))
	}
	for _, f := range []string{ra.File, rb.File} {
		if err := checkRecordingInput(f, false); err != nil {
			return withExit(2, err)
		}
	}
	fa, err := recfile.Open(ra.File)
	if err != nil {
		return withExit(2, err)
	}
	defer fa.Close()
	recB := fa.Recording()
	if !sameFile {
		fb, err := recfile.Open(rb.File)
		if err != nil {
			return withExit(2, err)
		}
		defer fb.Close()
		recB = fb.Recording()
	}
	da, err := resolve(fa.Recording(), ra, nil)
	if err != nil {
		return withExit(2, err)
	}
	db, err := resolve(recB, rb, da)
	if err != nil {
		return withExit(2, err)
	}
	if sameFile && da.dec == db.dec {
		return withExit(2, fmt.Errorf("A and B are the same decomposition (%s/%s/%s)", da.Trial, da.Array, da.Decomposition))
	}
	ta, err := trains(da)
	if err != nil {
		return withExit(2, fmt.Errorf("%s: %w", ra.File, err))
	}
	tb, err := trains(db)
	if err != nil {
		return withExit(2, fmt.Errorf("%s: %w", rb.File, err))
	}
	// Search lags in steps of the finer sample period of the two arrays.
	step := 1 / math.Max(da.arr.SamplingRateHz, db.arr.SamplingRateHz)
	opt := analysis.CompareOptions{ToleranceS: compareFlags.toleranceMs / 1000, MaxLagS: compareFlags.maxLagMs / 1000,
		LagStepS: step, MinRoA: compareFlags.min}
	if compareFlags.maxLagMs == 0 {
		opt.MaxLagS = -1 // no search
	}
	if compareFlags.min == 0 {
		opt.MinRoA = math.SmallestNonzeroFloat64
	}
	res := compareResult{
		A:      ra.File + "#" + da.Trial + "/" + da.Array + "/" + da.Decomposition,
		B:      rb.File + "#" + db.Trial + "/" + db.Array + "/" + db.Decomposition,
		UnitsA: len(ta), UnitsB: len(tb), LagStepS: step,
		Comparison: analysis.Compare(ta, tb, opt),
	}
	w := cmd.OutOrStdout()
	if compareFlags.json {
		return printJSON(w, jsonclean.Clean(map[string]any{"a": res.A, "b": res.B, "units_a": res.UnitsA, "units_b": res.UnitsB,
			"lag_step_s": res.LagStepS, "tolerance_s": res.Comparison.ToleranceS, "max_lag_s": res.Comparison.MaxLagS,
			"min_roa": res.Comparison.MinRoA, "pairs": res.Comparison.Pairs,
			"unmatched_a": res.Comparison.UnmatchedA, "unmatched_b": res.Comparison.UnmatchedB,
			"unmatched_labels_a": res.Comparison.UnmatchedNamesA, "unmatched_labels_b": res.Comparison.UnmatchedNamesB}))
	}
	return printCompare(w, &res)
}

func printCompare(w io.Writer, r *compareResult) error {
	c := r.Comparison
	fmt.Fprintf(w, "A: %s (%d units)\nB: %s (%d units)\n", r.A, r.UnitsA, r.B, r.UnitsB)
	fmt.Fprintf(w, "tolerance %.3g ms, lag searched within ±%.3g ms in steps of %.3g ms, matched at RoA >= %.0f %%\n\n",
		1000*c.ToleranceS, 1000*c.MaxLagS, 1000*r.LagStepS, 100*c.MinRoA)
	tw := tabwriter.NewWriter(w, 2, 4, 2, ' ', tabwriter.AlignRight)
	fmt.Fprintf(tw, "unit A\tunit B\tRoA %%\tcommon\tonly A\tonly B\tlag ms\t\n")
	for _, p := range c.Pairs {
		fmt.Fprintf(tw, "%s\t%s\t%.1f\t%d\t%d\t%d\t%.3f\t\n", p.NameA, p.NameB, 100*p.RoA, p.Common, p.OnlyA, p.OnlyB, 1000*p.LagS)
	}
	tw.Flush()
	fmt.Fprintf(w, "\n%d matched; unmatched in A: %s; unmatched in B: %s\n", len(c.Pairs), names(c.UnmatchedNamesA), names(c.UnmatchedNamesB))
	return nil
}

// names lists units by name (the lab's label, the id when there is none).
func names(v []string) string {
	if len(v) == 0 {
		return "none"
	}
	return strings.Join(v, ", ")
}
