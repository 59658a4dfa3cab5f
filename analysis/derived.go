package analysis

import (
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"math"
	"os"
	"strings"
	"time"

	"muarc/internal/atomicfile"
	"muarc/recfile"
	"muarc/record"
	"muarc/schema"
)

// FileStats are the figures of one recording file.
type FileStats struct {
	File           string            `json:"file"`
	Decompositions []DecompositionFS `json:"decompositions"`
	// Written is true when the figures were stored in the file.
	Written bool           `json:"written"`
	Method  map[string]any `json:"method"`
}

// DecompositionFS are one decomposition's figures with a summary of its
// MUAP templates.
type DecompositionFS struct {
	DecompositionStats
	// MUAPs summarises the templates per unit, in unit order; nil when
	// none were computed.
	MUAPs *MUAPSummary `json:"muaps,omitempty"`
}

// MUAPSummary summarises the templates of one decomposition.
type MUAPSummary struct {
	FirstLag int          `json:"first_lag"`
	Lags     int          `json:"lags"`
	Unit     string       `json:"unit"`
	Units    []MUAPOfUnit `json:"units"`
}

// MUAPOfUnit summarises one unit's template.
type MUAPOfUnit struct {
	ID       int64 `json:"id"`
	Averaged int   `json:"averaged"`
	AtEdge   int   `json:"at_edge"`
	// MaxPeakToPeak is the largest channel peak-to-peak, in
	// MUAPSummary.Unit; Channel its channel index; Map the peak-to-peak
	// over the grid [row][column].
	MaxPeakToPeak float64     `json:"max_peak_to_peak"`
	Channel       int         `json:"channel"`
	Map           [][]float64 `json:"peak_to_peak_map"`
}

// ComputeFile derives the figures of every decomposition of rec and, when
// muaps is true, the templates (which reads the samples once per array).
// The templates are returned per trial, array and decomposition.
func ComputeFile(rec *record.Recording, muaps bool) ([]DecompositionFS, [][][]*Templates, error) {
	st := Recording(rec)
	res := make([]DecompositionFS, len(st))
	for i := range st {
		res[i].DecompositionStats = st[i]
	}
	if !muaps {
		return res, nil, nil
	}
	k := 0
	tpl := make([][][]*Templates, len(rec.Trials))
	for ti := range rec.Trials {
		tr := &rec.Trials[ti]
		tpl[ti] = make([][]*Templates, len(tr.Arrays))
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
			ts, err := ArrayTemplates(arr, MUAPHalfWindowS)
			if err != nil {
				return nil, nil, fmt.Errorf("trial %s: %w", tr.Name, err)
			}
			tpl[ti][ai] = ts
			for d, t := range ts {
				if len(t.IDs) == 0 {
					res[k+d].Notes = append(res[k+d].Notes, "no units: no MUAP templates")
					continue
				}
				res[k+d].MUAPs = summariseMUAPs(arr, t)
			}
			k += n
		}
	}
	return res, tpl, nil
}

func summariseMUAPs(arr *record.Array, t *Templates) *MUAPSummary {
	s := &MUAPSummary{FirstLag: t.MUAPs.FirstLag, Lags: t.MUAPs.Lags, Unit: t.MUAPs.Unit}
	for u := range t.IDs {
		m := MUAPOfUnit{ID: t.IDs[u], Averaged: t.Averaged[u], AtEdge: t.AtEdge[u], MaxPeakToPeak: math.NaN(), Channel: -1}
		for c, v := range t.PeakToPeak[u] {
			if !math.IsNaN(v) && (m.Channel < 0 || v > m.MaxPeakToPeak) {
				m.MaxPeakToPeak, m.Channel = v, c
			}
		}
		m.Map = GridMap(arr, t.PeakToPeak[u])
		s.Units = append(s.Units, m)
	}
	return s
}

// StoreDerived puts the figures st (and the templates tpl, indexed by trial,
// array and decomposition, when not nil) into each decomposition's Derived,
// replacing earlier derived figures and leaving the lab's unit table and
// templates as they are. Decompositions are matched by trial, array and
// name, units by id. It returns the number of templates stored.
func StoreDerived(rec *record.Recording, st []DecompositionStats, tpl [][][]*Templates, when time.Time) (int, error) {
	method := Method()
	stored := 0
	for ti := range tpl {
		for ai := range tpl[ti] {
			for _, t := range tpl[ti][ai] {
				if t != nil && len(t.IDs) > 0 {
					stored++
				}
			}
		}
	}
	if stored == 0 {
		delete(method, "muap_window_ms")
	}
	mj, err := json.Marshal(method)
	if err != nil {
		return 0, err
	}
	for _, ds := range st {
		dec := find(rec, ds.Trial, ds.Array, ds.Decomposition)
		if dec == nil {
			continue
		}
		byID := map[int64]UnitStats{}
		for _, u := range ds.Units {
			byID[u.ID] = u
		}
		dv := &record.Derived{Software: schema.Software, Computed: when.UTC(), Method: string(mj), ForceUnit: ds.ForceUnit,
			Units: make([]record.DerivedUnit, len(dec.Units))}
		nan := math.NaN()
		for i, u := range dec.Units {
			s, ok := byID[u.ID]
			if !ok {
				dv.Units[i] = record.DerivedUnit{ID: u.ID, RecruitPctMVC: nan, DerecruitPctMVC: nan, RecruitForce: nan,
					DerecruitForce: nan, InitialRatePPS: nan, PlateauRatePPS: nan, PlateauISICoV: nan}
				continue
			}
			dv.Units[i] = record.DerivedUnit{ID: u.ID, RecruitPctMVC: s.RecruitPctMVC, DerecruitPctMVC: s.DerecruitPctMVC,
				RecruitForce: s.RecruitForce, DerecruitForce: s.DerecruitForce, InitialRatePPS: s.InitialRatePPS,
				PlateauRatePPS: s.PlateauRatePPS, PlateauISICoV: s.PlateauISICoV, PlateauISIs: int64(s.PlateauISIs)}
		}
		dec.Derived = dv
	}
	for ti := range tpl {
		for ai := range tpl[ti] {
			for di, t := range tpl[ti][ai] {
				if t == nil || len(t.IDs) == 0 {
					continue
				}
				m := t.MUAPs
				rec.Trials[ti].Arrays[ai].Decompositions[di].Derived.MUAPs = &m
			}
		}
	}
	details := map[string]any{"stored_in": "decompositions/<name>/derived", "decompositions": len(st), "muap_templates_stored": stored}
	b, err := json.Marshal(details)
	if err != nil {
		return 0, err
	}
	rec.Provenance.History = append(rec.Provenance.History, record.Operation{
		Action: "stats", Software: schema.Software, Time: when.UTC().Truncate(time.Second), Details: string(b)})
	return stored, nil
}

// CheckInputFile says clearly when path is missing or not a regular file
// (before the HDF5 reader gives a less direct message).
func CheckInputFile(path string) error {
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

// LostError refuses to store figures in a recording that holds objects or
// attributes muarc does not read: rewriting it would lose them.
type LostError struct {
	File string
	Lost []string // HDF5 paths, attributes as PATH@NAME
}

func (e *LostError) Error() string {
	list := e.Lost
	more := ""
	if len(list) > 5 {
		list, more = list[:5], fmt.Sprintf(" and %d more", len(e.Lost)-5)
	}
	return fmt.Sprintf("%s: holds %d part(s) muarc does not read (%s%s); storing the figures rewrites the file and would lose them, so nothing was written (the file is unchanged). Move those parts into a file of their own (h5py, h5copy), or keep the figures outside the recording with stats --json or --tsv",
		e.File, len(e.Lost), strings.Join(list, ", "), more)
}

// StatsFile derives the figures of the recording at path (and the MUAP
// templates when muaps is true). With write it stores them in each
// decomposition's derived group: the file is rewritten beside itself and
// renamed into place, and left as it was on any error. The file stays open
// (its samples are read) until the rewritten copy is on disk.
func StatsFile(path string, muaps, write bool) (*FileStats, error) {
	if err := CheckInputFile(path); err != nil {
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
	res, tpl, err := ComputeFile(rec, muaps)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	out := &FileStats{File: path, Decompositions: res, Method: Method()}
	if !write {
		return out, nil
	}
	st := make([]DecompositionStats, len(res))
	for i := range res {
		st[i] = res[i].DecompositionStats
	}
	if _, err := StoreDerived(rec, st, tpl, time.Now()); err != nil {
		return nil, err
	}
	t, err := atomicfile.Create(path, true)
	if err != nil {
		return nil, err
	}
	if err := recfile.WriteInto(t.Path, rec, recfile.WriteOptions{Overwrite: true}); err != nil {
		return nil, t.Abandon(fmt.Errorf("%s: writing the figures: %w (the file is unchanged)", path, err))
	}
	lost, err := recfile.Lost(path, t.Path)
	if err != nil {
		return nil, t.Abandon(fmt.Errorf("%s: comparing the rewritten file: %w (the file is unchanged)", path, err))
	}
	if len(lost) > 0 {
		return nil, t.Abandon(&LostError{File: path, Lost: lost})
	}
	closed = true
	if err := f.Close(); err != nil {
		return nil, t.Abandon(err)
	}
	if err := t.Publish(); err != nil {
		return nil, fmt.Errorf("%s: replacing the file: %w (the file is unchanged)", path, err)
	}
	out.Written = true
	return out, nil
}
