package main

import (
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"reflect"
	"strconv"
	"strings"
	"text/tabwriter"
	"time"

	"github.com/spf13/cobra"

	"muarc/analysis"
	"muarc/internal/atomicfile"
	"muarc/recfile"
	"muarc/record"
	"muarc/schema"
)

var statsFlags struct {
	json, tsv, write, noMUAPs bool
}

var statsCmd = &cobra.Command{
	Use:   "stats FILE",
	Short: "Derive per-unit discharge rates, thresholds, plateau figures and MUAP templates",
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

--write stores the figures in the file's unit tables (recruit_pct_mvc,
derecruit_pct_mvc, initial_rate_pps, mean_rate_pps, isi_cov, and the extra
columns recruit_force, derecruit_force, plateau_isi_count), the templates as
each decomposition's muaps dataset, and a "stats" entry in the provenance
history saying how they were computed. The file is rewritten beside itself
and renamed into place; on any error it is left as it was.

Exit status: 0 done, 2 the file could not be read or written (or bad usage).`,
	Args: cobra.ExactArgs(1),
	RunE: runStats,
}

func init() {
	f := statsCmd.Flags()
	f.BoolVar(&statsFlags.json, "json", false, "print the figures as JSON")
	f.BoolVar(&statsFlags.tsv, "tsv", false, "print one tab-separated row per unit")
	f.BoolVar(&statsFlags.write, "write", false, "store the figures and templates in FILE (rewritten atomically)")
	f.BoolVar(&statsFlags.noMUAPs, "no-muaps", false, "skip the MUAP templates (the EMG samples are not read)")
	rootCmd.AddCommand(statsCmd)
}

// statsResult is what stats prints for one file.
type statsResult struct {
	File           string                `json:"file"`
	Decompositions []decompositionResult `json:"decompositions"`
	Written        bool                  `json:"written"`
	Method         map[string]any        `json:"method"`
}

type decompositionResult struct {
	analysis.DecompositionStats
	// MUAPs summarises the templates per unit, in unit order.
	MUAPs *muapSummary `json:"muaps,omitempty"`
}

type muapSummary struct {
	FirstLag int      `json:"first_lag"`
	Lags     int      `json:"lags"`
	Unit     string   `json:"unit"`
	Units    []muapUS `json:"units"`
}

type muapUS struct {
	ID       int64 `json:"id"`
	Averaged int   `json:"averaged"`
	AtEdge   int   `json:"at_edge"`
	// MaxPeakToPeak is the largest channel peak-to-peak, in Unit; Channel
	// its channel index; Map the peak-to-peak over the grid [row][column].
	MaxPeakToPeak float64     `json:"max_peak_to_peak"`
	Channel       int         `json:"channel"`
	Map           [][]float64 `json:"peak_to_peak_map"`
}

// computeStats derives the figures (and, unless noMUAPs, the templates) of
// rec, whose samples must be readable.
func computeStats(rec *record.Recording, muaps bool) ([]decompositionResult, [][][]*analysis.Templates, error) {
	st := analysis.Recording(rec)
	res := make([]decompositionResult, len(st))
	for i := range st {
		res[i].DecompositionStats = st[i]
	}
	var tpl [][][]*analysis.Templates
	if !muaps {
		return res, nil, nil
	}
	k := 0
	tpl = make([][][]*analysis.Templates, len(rec.Trials))
	for ti := range rec.Trials {
		tr := &rec.Trials[ti]
		tpl[ti] = make([][]*analysis.Templates, len(tr.Arrays))
		for ai := range tr.Arrays {
			arr := &tr.Arrays[ai]
			n := len(arr.Decompositions)
			if n == 0 {
				continue
			}
			if arr.Samples == nil {
				for d := 0; d < n; d++ {
					res[k+d].Notes = append(res[k+d].Notes, "the array has no EMG samples: no MUAP templates")
				}
				k += n
				continue
			}
			ts, err := analysis.ArrayTemplates(arr, analysis.MUAPHalfWindowS)
			if err != nil {
				return nil, nil, fmt.Errorf("trial %s: %w", tr.Name, err)
			}
			tpl[ti][ai] = ts
			for d, t := range ts {
				res[k+d].MUAPs = summarise(arr, t)
			}
			k += n
		}
	}
	return res, tpl, nil
}

func summarise(arr *record.Array, t *analysis.Templates) *muapSummary {
	s := &muapSummary{FirstLag: t.MUAPs.FirstLag, Lags: t.MUAPs.Lags, Unit: t.MUAPs.Unit}
	for u := range t.IDs {
		m := muapUS{ID: t.IDs[u], Averaged: t.Averaged[u], AtEdge: t.AtEdge[u], MaxPeakToPeak: math.NaN(), Channel: -1}
		for c, v := range t.PeakToPeak[u] {
			if !math.IsNaN(v) && (m.Channel < 0 || v > m.MaxPeakToPeak) {
				m.MaxPeakToPeak, m.Channel = v, c
			}
		}
		m.Map = analysis.GridMap(arr, t.PeakToPeak[u])
		s.Units = append(s.Units, m)
	}
	return s
}

// storeStats puts the figures and templates into rec and adds the history
// entry.
func storeStats(rec *record.Recording, res []decompositionResult, tpl [][][]*analysis.Templates) error {
	st := make([]analysis.DecompositionStats, len(res))
	for i := range res {
		st[i] = res[i].DecompositionStats
	}
	analysis.Apply(rec, st)
	stored := 0
	for ti := range tpl {
		for ai := range tpl[ti] {
			for di, t := range tpl[ti][ai] {
				m := t.MUAPs
				rec.Trials[ti].Arrays[ai].Decompositions[di].MUAPs = &m
				stored++
			}
		}
	}
	details := analysis.Method()
	details["muap_templates_stored"] = stored
	if stored == 0 {
		delete(details, "muap_window_ms")
	}
	details["decompositions"] = len(res)
	b, err := json.Marshal(details)
	if err != nil {
		return err
	}
	rec.Provenance.History = append(rec.Provenance.History, record.Operation{
		Action: "stats", Software: schema.Software, Time: time.Now().UTC().Truncate(time.Second), Details: string(b)})
	return nil
}

// statsFile runs stats on one file; with write it rewrites the file. The
// file stays open (samples are read) until the rewritten copy is on disk.
func statsFile(path string, muaps, write bool) (*statsResult, error) {
	if err := checkInputFile(path); err != nil {
		return nil, err
	}
	f, err := recfile.Open(path)
	if err != nil {
		return nil, err
	}
	closed := false
	defer func() {
		if !closed {
			f.Close()
		}
	}()
	rec := f.Recording()
	res, tpl, err := computeStats(rec, muaps)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	out := &statsResult{File: path, Decompositions: res, Method: analysis.Method()}
	if !write {
		return out, nil
	}
	if err := storeStats(rec, res, tpl); err != nil {
		return nil, err
	}
	tmp, err := atomicfile.TempPath(path)
	if err != nil {
		return nil, err
	}
	if err := recfile.Write(tmp, rec, recfile.WriteOptions{Overwrite: true}); err != nil {
		os.Remove(tmp)
		return nil, fmt.Errorf("%s: writing the figures: %w (the file is unchanged)", path, err)
	}
	closed = true
	if err := f.Close(); err != nil {
		os.Remove(tmp)
		return nil, err
	}
	if err := atomicfile.Publish(tmp, path, true); err != nil {
		return nil, fmt.Errorf("%s: replacing the file: %w (the file is unchanged)", path, err)
	}
	out.Written = true
	return out, nil
}

func runStats(cmd *cobra.Command, args []string) error {
	if statsFlags.json && statsFlags.tsv {
		return withExit(2, fmt.Errorf("give --json or --tsv, not both"))
	}
	res, err := statsFile(args[0], !statsFlags.noMUAPs, statsFlags.write)
	if err != nil {
		return withExit(2, err)
	}
	w := cmd.OutOrStdout()
	switch {
	case statsFlags.json:
		return printJSON(w, jsonClean(res))
	case statsFlags.tsv:
		return printStatsTSV(w, res)
	}
	return printStatsText(w, res)
}

// checkInputFile says clearly when path is missing or not a regular file
// (before the HDF5 reader gives a less direct message).
func checkInputFile(path string) error {
	st, err := os.Stat(path)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return fmt.Errorf("%s: no such file", path)
		}
		return err
	}
	if !st.Mode().IsRegular() {
		return fmt.Errorf("%s: not a regular file (give a muarc recording, *.h5)", path)
	}
	return nil
}

// num formats a figure for people: "-" when unknown.
func num(v float64, prec int) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "-"
	}
	return strconv.FormatFloat(v, 'f', prec, 64)
}

// tsvNum formats a figure for machines: empty when unknown, full precision.
func tsvNum(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return ""
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

func printStatsText(w io.Writer, r *statsResult) error {
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
			fmt.Fprintf(tw, "%d\t%d\t%s\t%s\t%s\t%s\t%s\t%s\t%d\t%s\t\n", u.ID, u.Discharges, num(u.RecruitPctMVC, 2), num(u.RecruitForce, 2),
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

func muapUnit(d decompositionResult) string {
	if d.MUAPs != nil && d.MUAPs.Unit != "" {
		return d.MUAPs.Unit
	}
	return ""
}

func printStatsTSV(w io.Writer, r *statsResult) error {
	cols := []string{"trial", "array", "decomposition", "unit", "discharge_count", "first_discharge_s", "last_discharge_s",
		"recruit_pct_mvc", "derecruit_pct_mvc", "recruit_force", "derecruit_force", "force_unit",
		"initial_rate_pps", "mean_rate_pps", "isi_cov", "plateau_isi_count", "plateau_start_s", "plateau_end_s",
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
			row := []string{d.Trial, d.Array, d.Decomposition, strconv.FormatInt(u.ID, 10), strconv.Itoa(u.Discharges),
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

// jsonClean turns v into plain JSON values (following json tags) with
// unknown numbers (NaN, ±Inf) left out of objects and written as null in
// lists, where a position must be kept (e.g. an amplitude map).
func jsonClean(v any) any {
	b, err := json.Marshal(cleanValue(reflect.ValueOf(v)))
	if err != nil {
		return map[string]any{"error": err.Error()}
	}
	var out any
	json.Unmarshal(b, &out)
	return out
}

func cleanValue(v reflect.Value) any {
	switch v.Kind() {
	case reflect.Invalid:
		return nil
	case reflect.Pointer, reflect.Interface:
		if v.IsNil() {
			return nil
		}
		return cleanValue(v.Elem())
	case reflect.Float32, reflect.Float64:
		f := v.Float()
		if math.IsNaN(f) || math.IsInf(f, 0) {
			return nil
		}
		return f
	case reflect.Slice, reflect.Array:
		if v.Kind() == reflect.Slice && v.IsNil() {
			return []any{}
		}
		out := make([]any, v.Len())
		for i := range out {
			out[i] = cleanValue(v.Index(i))
		}
		return out
	case reflect.Map:
		out := map[string]any{}
		for _, k := range v.MapKeys() {
			if c := cleanValue(v.MapIndex(k)); c != nil {
				out[fmt.Sprint(k.Interface())] = c
			}
		}
		return out
	case reflect.Struct:
		out := map[string]any{}
		addStruct(out, v)
		return out
	}
	return v.Interface()
}

func addStruct(out map[string]any, v reflect.Value) {
	t := v.Type()
	for i := 0; i < t.NumField(); i++ {
		f := t.Field(i)
		if !f.IsExported() {
			continue
		}
		tag := f.Tag.Get("json")
		if tag == "-" {
			continue
		}
		name, opts, _ := strings.Cut(tag, ",")
		if f.Anonymous && name == "" && f.Type.Kind() == reflect.Struct {
			addStruct(out, v.Field(i))
			continue
		}
		if name == "" {
			name = f.Name
		}
		fv := v.Field(i)
		if strings.Contains(opts, "omitempty") && fv.IsZero() {
			continue
		}
		if c := cleanValue(fv); c != nil {
			out[name] = c
		}
	}
}
