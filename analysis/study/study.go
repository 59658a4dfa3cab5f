// Package study analyses a whole study: per subject, muscle and target
// level the relation of plateau mean rate and of initial rate to
// recruitment threshold (least squares with the slope's 95 % interval),
// then per muscle and level, and per muscle over all levels, the spread of
// those lines across subjects and a linear mixed model that splits the
// variability into between-subject and within-subject parts. Recordings
// are read one at a time (attributes, force and unit tables only).
package study

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"sort"
	"time"

	"muarc/analysis"
	"muarc/archive"
	"muarc/recfile"
	"muarc/record"
	"muarc/schema"
	"muarc/validate"
)

// Relations fitted against recruitment threshold (% MVC).
const (
	PlateauRate = "plateau_rate" // plateau mean rate, pps
	InitialRate = "initial_rate" // initial rate, pps
)

// Relations lists them in output order.
var Relations = []string{PlateauRate, InitialRate}

// SubjectRow is one subject x muscle x level x relation.
type SubjectRow struct {
	Subject  string  `json:"subject"`
	Muscle   string  `json:"muscle"`
	LevelPct float64 `json:"level_pct_mvc"`
	Relation string  `json:"relation"`
	// Units is the number of units with a recruitment threshold;
	// ThresholdMinPct and ThresholdMaxPct their range, % MVC.
	Units           int     `json:"units"`
	ThresholdMinPct float64 `json:"threshold_min_pct_mvc"`
	ThresholdMaxPct float64 `json:"threshold_max_pct_mvc"`
	Fit             LineFit `json:"fit"`
	// Points are the (threshold % MVC, rate pps) pairs fitted.
	Points [][2]float64 `json:"points"`
}

// SummaryRow is one muscle x level x relation (LevelPct NaN: all levels
// pooled).
type SummaryRow struct {
	Muscle   string  `json:"muscle"`
	LevelPct float64 `json:"level_pct_mvc"`
	Relation string  `json:"relation"`
	// AllLevels is true for the rows that pool every level.
	AllLevels bool `json:"all_levels"`
	// Slope and Intercept spread across the subjects' lines (n >= 3 units).
	Slope     Spread   `json:"slope"`
	Intercept Spread   `json:"intercept"`
	Mixed     MixedFit `json:"mixed"`
}

// Source is one recording read, for provenance.
type Source struct {
	File   string `json:"file"`
	Bytes  int64  `json:"bytes"`
	SHA256 string `json:"sha256"`
}

// Result is a study analysis.
type Result struct {
	Dir      string         `json:"dir"`
	Software string         `json:"software"`
	Computed time.Time      `json:"computed"`
	Method   map[string]any `json:"method"`
	Sources  []Source       `json:"sources"`
	Rows     []SubjectRow   `json:"rows"`
	Summary  []SummaryRow   `json:"summary"`
	// Figures are the figure files written beside the tables (Save's
	// caller fills it), with what each shows.
	Figures []FigureFile `json:"figures,omitempty"`
	Notes   []string     `json:"notes,omitempty"`
}

// FigureFile is one figure written with the results: its file name in the
// results folder and its caption.
type FigureFile struct {
	File    string `json:"file"`
	Caption string `json:"caption"`
}

// Method describes the analysis in words.
func Method() map[string]any {
	m := analysis.Method()
	delete(m, "muap_window_ms")
	delete(m, "regression")
	m["decomposition"] = "per array the one summaries use: the last edited by hand, else the last"
	m["per_subject"] = "ordinary least squares of rate (pps) on recruitment threshold (% MVC) per subject, muscle and target level; 95 % interval of the slope from Student's t with n - 2 degrees of freedom"
	m["across_subjects"] = "mean, SD (n - 1), min and max of the subjects' slopes and intercepts (lines of 3 or more units)"
	m["mixed_model"] = "rate = b0 + b1 threshold + u0 + u1 threshold + e, (u0, u1) per subject with covariance Psi, fitted by REML; between-subject share = (Psi00 + 2 Psi01 x + Psi11 x^2) / (that + within variance) at the mean threshold x; per muscle over all levels: rate = b_level + b1 threshold + u0 + u1 threshold + e, one fixed intercept per target level and one common fixed slope (the rise of rate with level is a fixed effect, not within-subject scatter), the same random part"
	return m
}

type key struct {
	subject, muscle string
	level           float64
}

type points struct{ thr, plateau, initial []float64 }

// Analyse reads every recording under dir (archive.FindRecordings), one at
// a time; progress, when not nil, is called after each.
func Analyse(dir string, progress func(done, total int)) (*Result, error) {
	recs, _, err := archive.FindRecordings(dir)
	if err != nil {
		return nil, err
	}
	if len(recs) == 0 {
		return nil, fmt.Errorf("%s: no recordings (*.h5) found", dir)
	}
	res := &Result{Dir: dir, Software: schema.Software, Computed: time.Now().UTC().Truncate(time.Second), Method: Method()}
	data := map[key]*points{}
	var order []key
	for i, rel := range recs {
		path := filepath.Join(dir, filepath.FromSlash(rel))
		// A damaged file could end the process inside the HDF5 library:
		// it is screened first (validate.ScreenFirst) and left out.
		if err := validate.ScreenFirst(path, false); err != nil {
			res.Notes = append(res.Notes, fmt.Sprintf("%s could not be read and is left out: %v", rel, err))
			continue
		}
		src, err := hashFile(path, rel)
		if err != nil {
			return nil, err
		}
		res.Sources = append(res.Sources, src)
		f, err := recfile.Open(path)
		if err != nil {
			res.Notes = append(res.Notes, fmt.Sprintf("%s could not be read and is left out: %v", rel, err))
			continue
		}
		rec := f.Recording()
		subject := rec.Subject.ID
		if subject == "" {
			subject = rel
			res.Notes = append(res.Notes, rel+": no subject id; the file name stands for the subject")
		}
		for ti := range rec.Trials {
			tr := &rec.Trials[ti]
			for ai := range tr.Arrays {
				arr := &tr.Arrays[ai]
				k := record.ReportedDecomposition(arr.Decompositions)
				if k < 0 {
					continue
				}
				if math.IsNaN(tr.TargetPctMVC) {
					res.Notes = append(res.Notes, fmt.Sprintf("%s trial %s: target level not known; left out", rel, tr.Name))
					continue
				}
				ds := analysis.Decomposition(tr, arr, &arr.Decompositions[k])
				muscle := arr.Muscle
				if muscle == "" {
					muscle = arr.Name
				}
				kk := key{subject, muscle, tr.TargetPctMVC}
				p := data[kk]
				if p == nil {
					p = &points{}
					data[kk] = p
					order = append(order, kk)
				}
				for _, u := range ds.Units {
					p.thr = append(p.thr, u.RecruitPctMVC)
					p.plateau = append(p.plateau, u.PlateauRatePPS)
					p.initial = append(p.initial, u.InitialRatePPS)
				}
			}
		}
		f.Close()
		if progress != nil {
			progress(i+1, len(recs))
		}
	}
	sort.SliceStable(order, func(i, j int) bool {
		a, b := order[i], order[j]
		if a.muscle != b.muscle {
			return a.muscle < b.muscle
		}
		if a.level != b.level {
			return a.level < b.level
		}
		return a.subject < b.subject
	})
	for _, k := range order {
		p := data[k]
		for _, rel := range Relations {
			y := p.plateau
			if rel == InitialRate {
				y = p.initial
			}
			row := SubjectRow{Subject: k.subject, Muscle: k.muscle, LevelPct: k.level, Relation: rel,
				ThresholdMinPct: math.NaN(), ThresholdMaxPct: math.NaN(), Fit: FitLine(p.thr, y)}
			for i, x := range p.thr {
				if !finite(x) {
					continue
				}
				row.Units++
				row.ThresholdMinPct = nanMin(row.ThresholdMinPct, x)
				row.ThresholdMaxPct = nanMax(row.ThresholdMaxPct, x)
				if finite(y[i]) {
					row.Points = append(row.Points, [2]float64{x, y[i]})
				}
			}
			res.Rows = append(res.Rows, row)
		}
	}
	res.Summary = summarise(res.Rows)
	return res, nil
}

// summarise builds the muscle x level rows, then the muscle rows (all
// levels pooled, LevelPct NaN), per relation.
func summarise(rows []SubjectRow) []SummaryRow {
	type sk struct {
		muscle string
		level  float64
		rel    string
	}
	var keys []sk
	seen := map[sk]bool{}
	for _, r := range rows {
		for _, k := range []sk{{r.Muscle, r.LevelPct, r.Relation}, {r.Muscle, math.Inf(1), r.Relation}} {
			if !seen[k] {
				seen[k] = true
				keys = append(keys, k)
			}
		}
	}
	sort.SliceStable(keys, func(i, j int) bool {
		if keys[i].muscle != keys[j].muscle {
			return keys[i].muscle < keys[j].muscle
		}
		if keys[i].level != keys[j].level {
			return keys[i].level < keys[j].level
		}
		return keys[i].rel > keys[j].rel
	})
	var out []SummaryRow
	for _, k := range keys {
		var slopes, icpts []float64
		bySubject := map[string]int{}
		var xs, ys, ls [][]float64
		for _, r := range rows {
			if r.Muscle != k.muscle || r.Relation != k.rel || (!math.IsInf(k.level, 1) && r.LevelPct != k.level) {
				continue
			}
			if r.Fit.N >= 3 {
				slopes, icpts = append(slopes, r.Fit.Slope), append(icpts, r.Fit.Intercept)
			}
			g, ok := bySubject[r.Subject]
			if !ok {
				g = len(xs)
				bySubject[r.Subject] = g
				xs, ys, ls = append(xs, nil), append(ys, nil), append(ls, nil)
			}
			for _, p := range r.Points {
				xs[g], ys[g], ls[g] = append(xs[g], p[0]), append(ys[g], p[1]), append(ls[g], r.LevelPct)
			}
		}
		lvl := k.level
		if math.IsInf(lvl, 1) {
			lvl = math.NaN()
		}
		mixed := FitMixed(xs, ys)
		if math.IsNaN(lvl) {
			// Over all levels each level keeps its own fixed intercept.
			mixed = FitMixedLevels(xs, ys, ls)
		}
		out = append(out, SummaryRow{Muscle: k.muscle, LevelPct: lvl, Relation: k.rel, AllLevels: math.IsNaN(lvl),
			Slope: SpreadOf(slopes), Intercept: SpreadOf(icpts), Mixed: mixed})
	}
	return out
}

func hashFile(path, rel string) (Source, error) {
	f, err := os.Open(path)
	if err != nil {
		return Source{}, err
	}
	defer f.Close()
	h := sha256.New()
	n, err := io.Copy(h, f)
	if err != nil {
		return Source{}, fmt.Errorf("%s: %w", rel, err)
	}
	return Source{File: rel, Bytes: n, SHA256: hex.EncodeToString(h.Sum(nil))}, nil
}

func nanMin(a, b float64) float64 {
	if math.IsNaN(a) {
		return b
	}
	return math.Min(a, b)
}

func nanMax(a, b float64) float64 {
	if math.IsNaN(a) {
		return b
	}
	return math.Max(a, b)
}
