package plot

import (
	"fmt"
	"math"
	"regexp"

	"muarc/analysis"
	"muarc/record"
)

// Named is one figure of a recording with a file-name stem and a caption.
type Named struct {
	// Name is a file-name stem made of the trial, array and decomposition
	// names, e.g. "ramp_30__ta_grid__auto__overview".
	Name    string
	Caption string
	// Kind is "overview", "rates" or "muaps".
	Kind string
	// Templates says where a MUAP grid's templates came from (the
	// Options.Templates answer, "stored" by default).
	Templates string
	// Muscle and Subjects are the muscle a study figure shows and its
	// subjects, in column order.
	Muscle   string
	Subjects []string
	Figure   *Figure
}

// Options choose what RecordingFigures draws.
type Options struct {
	// Decomposition picks, per array, which decomposition to draw; nil
	// draws every decomposition.
	Decomposition func(arr *record.Array) []int
	// Templates gives the MUAP templates of a decomposition and says where
	// they came from; nil uses the stored ones (Decomposition.MUAPs) and
	// draws no grid without them.
	Templates func(ti, ai, di int) (*analysis.Templates, string)
	// MUAPGrid says whether to draw a decomposition's template grid; nil
	// draws every one.
	MUAPGrid func(ti, ai, di int) bool
}

// Notes say what a figure set left out.
type Notes []string

var unsafeName = regexp.MustCompile(`[^A-Za-z0-9._-]+`)

func stem(parts ...string) string {
	s := ""
	for i, p := range parts {
		if i > 0 {
			s += "__"
		}
		s += unsafeName.ReplaceAllString(p, "_")
	}
	return s
}

// RecordingFigures draws, for every trial and array of rec (and the chosen
// decompositions), the overview and the MUAP template grid, and per array
// name the rate-versus-threshold scatter over all trials (one level per
// trial). st are the recording's figures from analysis.Recording.
func RecordingFigures(rec *record.Recording, st []analysis.DecompositionStats, opt Options) ([]Named, Notes) {
	var out []Named
	var notes Notes
	byKey := map[string]*analysis.DecompositionStats{}
	for i := range st {
		byKey[st[i].Trial+"\x00"+st[i].Array+"\x00"+st[i].Decomposition] = &st[i]
	}
	levels := map[string][]Level{}
	var arrayOrder []string
	for ti := range rec.Trials {
		tr := &rec.Trials[ti]
		for ai := range tr.Arrays {
			arr := &tr.Arrays[ai]
			var pick []int
			if opt.Decomposition != nil {
				pick = opt.Decomposition(arr)
			} else {
				for di := range arr.Decompositions {
					pick = append(pick, di)
				}
			}
			for _, di := range pick {
				dec := &arr.Decompositions[di]
				ds := byKey[tr.Name+"\x00"+arr.Name+"\x00"+dec.Name]
				out = append(out, Named{Name: stem(tr.Name, arr.Name, dec.Name, "overview"), Kind: "overview",
					Caption: fmt.Sprintf("Trial %s (%s), array %s (%s), decomposition %s: force and target with the plateau shaded, discharge raster, discharge rates smoothed by a 400 ms Hann window.",
						tr.Name, levelText(tr.TargetPctMVC), arr.Name, arr.Muscle, dec.Name),
					Figure: Overview(tr, arr, dec, ds)})
				// The scatter shows one decomposition per array and trial:
				// the one summaries use (record.ReportedDecomposition).
				if ds != nil && di == record.ReportedDecomposition(arr.Decompositions) {
					if _, ok := levels[arr.Name]; !ok {
						arrayOrder = append(arrayOrder, arr.Name)
					}
					label := fmt.Sprintf("%s (%s, %s)", tr.Name, levelText(tr.TargetPctMVC), dec.Name)
					levels[arr.Name] = append(levels[arr.Name], Level{Stats: ds, Label: label, LevelPct: tr.TargetPctMVC})
				}
				if opt.MUAPGrid != nil && !opt.MUAPGrid(ti, ai, di) {
					continue
				}
				var tp *analysis.Templates
				src := "stored"
				if opt.Templates != nil {
					tp, src = opt.Templates(ti, ai, di)
				} else if dec.MUAPs != nil {
					tp = StoredTemplates(dec)
				}
				if tp == nil {
					notes = append(notes, fmt.Sprintf("trial %s array %s decomposition %s: no MUAP templates to draw", tr.Name, arr.Name, dec.Name))
					continue
				}
				out = append(out, Named{Name: stem(tr.Name, arr.Name, dec.Name, "muaps"), Kind: "muaps", Templates: src,
					Caption: fmt.Sprintf("MUAP templates of trial %s, array %s, decomposition %s, on the electrode grid (rows and columns as in the file); cell shade: peak-to-peak amplitude relative to the unit's largest.", tr.Name, arr.Name, dec.Name),
					Figure:  MUAPGrid(fmt.Sprintf("%s / %s / %s", tr.Name, arr.Name, dec.Name), arr, tp)})
			}
		}
	}
	for _, a := range arrayOrder {
		out = append(out, Named{Name: stem(a, "rates"), Kind: "rates",
			Caption: fmt.Sprintf("Array %s: plateau mean rate (circles, solid least-squares line) and initial rate (triangles, dashed line) against recruitment threshold, one colour per target level (the same in every figure); per trial the decomposition summaries use.", a),
			Figure:  RateThreshold(levels[a])})
	}
	return out, notes
}

func levelText(pct float64) string {
	if math.IsNaN(pct) {
		return "level not known"
	}
	return fmt.Sprintf("%g %% MVC", pct)
}

// StoredTemplates wraps a decomposition's stored MUAPs for drawing (counts
// not known: -1).
func StoredTemplates(dec *record.Decomposition) *analysis.Templates {
	m := dec.MUAPs
	if m == nil || m.Units != len(dec.Units) {
		return nil
	}
	t := &analysis.Templates{MUAPs: *m}
	for u := 0; u < m.Units; u++ {
		t.IDs = append(t.IDs, dec.Units[u].ID)
		t.Names = append(t.Names, dec.Units[u].Name())
		t.Averaged = append(t.Averaged, -1)
		t.AtEdge = append(t.AtEdge, 0)
		p2p := make([]float64, m.Channels)
		for c := 0; c < m.Channels; c++ {
			lo, hi := math.Inf(1), math.Inf(-1)
			for l := 0; l < m.Lags; l++ {
				v := float64(m.At(u, c, l))
				lo, hi = math.Min(lo, v), math.Max(hi, v)
			}
			p2p[c] = hi - lo
		}
		t.PeakToPeak = append(t.PeakToPeak, p2p)
	}
	return t
}
