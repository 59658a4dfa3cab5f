package archive

import (
	"errors"
	"math"
	"os"
	"time"

	"muarc/h5"
	"muarc/recfile"
	"muarc/record"
	"muarc/schema"
	"muarc/validate"
)

// The index shows a few attributes and table lengths of each recording.
// Reading the whole recording model for them (recfile.Open: every table,
// discharge and template, some 90 HDF5 objects in a small recording) cost
// about fifteen times what opening the file does. outline reads only what
// the index shows (the root, study, subject and session attributes; per
// trial and array their attributes and the samples' shape; per
// decomposition its edited_by_hand flag; of the decomposition the index
// reports, its unit ids, quality and rate columns and the length of its
// discharges), and gives the same summary. Anything it does not expect
// (a missing group, an attribute of another type, a layout it does not
// read) sends the file to the full reading, whose error names the problem;
// a file whose other parts are damaged is listed, and `muarc validate`
// finds what is wrong with it.

// errOutline makes the caller read the recording in full.
var errOutline = errors.New("outline: read the recording in full")

// readSummary reads one recording's summary and, when content, its
// content check, opening the file once. The file is screened first
// (validate.Screener) when the program installed a screen.
func readSummary(path, rel string, content bool) (*RecordingSummary, string, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, "", err
	}
	if err := validate.ScreenFirst(path, false); err != nil {
		return nil, "", err
	}
	hf, err := h5.Open(path)
	if err != nil {
		return nil, "", err
	}
	var c string
	if content {
		if c, err = contentOfFile(hf); err != nil {
			hf.Close()
			return nil, "", err
		}
	}
	s, err := outline(hf, rel, st.Size())
	if cerr := hf.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		return s, c, nil
	}
	s, err = fullSummary(path, rel, st.Size())
	return s, c, err
}

// fullSummary builds the summary from the whole recording model.
func fullSummary(path, rel string, size int64) (*RecordingSummary, error) {
	f, err := recfile.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return summaryOf(f.Recording(), rel, size, func(u record.Unit) bool { return validate.LowConfidence(u, lowConfidenceRules) }), nil
}

// outline reads a recording's summary from the objects the index shows
// (see above); errOutline when the file needs the full reading.
func outline(hf *h5.File, rel string, size int64) (*RecordingSummary, error) {
	root, err := hf.Root()
	if err != nil {
		return nil, err
	}
	defer root.Close()
	a, err := attrsOf(root.AttrsNamed("layout", "layout_version", "created"))
	if err != nil {
		return nil, err
	}
	if a.str("layout") != schema.LayoutName || schema.CheckReadable(a.str("layout_version")) != nil {
		return nil, errOutline
	}
	if c := a.str("created"); c != "" {
		if _, err := time.Parse(time.RFC3339Nano, c); err != nil {
			return nil, errOutline
		}
	}
	if a.bad {
		return nil, errOutline
	}
	s := &RecordingSummary{File: rel, Bytes: size}
	err = eachGroup(root, []string{"study", "subject", "session"}, []string{"id", "title", "description", "contact", "license",
		"sex", "age_years", "age_band", "dominant_side", "height_cm", "mass_kg"}, func(name string, g *h5.Group, a *attrs) {
		switch name {
		case "study":
			s.Study = record.Study{ID: a.str("id"), Title: a.str("title"), Description: a.str("description"),
				Contact: a.str("contact"), License: a.str("license")}
		case "subject":
			s.Subject = SubjectRow{ID: a.str("id"), Sex: a.str("sex"), AgeYears: a.num("age_years"), AgeBand: a.str("age_band"),
				DominantSide: a.str("dominant_side"), HeightCm: a.num("height_cm"), MassKg: a.num("mass_kg")}
		case "session":
			s.Session = a.str("id")
		}
	})
	if err != nil {
		return nil, err
	}
	trials, err := members(root, "trials")
	if err != nil {
		return nil, err
	}
	s.Trials = len(trials)
	err = eachGroup(root, []string{"trials"}, nil, func(_ string, tg *h5.Group, _ *attrs) {
		err = eachGroup(tg, trials, []string{"target_pct_mvc"}, func(trial string, g *h5.Group, ta *attrs) {
			level := ta.num("target_pct_mvc")
			arrays, aerr := members(g, "arrays")
			if aerr != nil {
				err = aerr
				return
			}
			err = eachGroup(g, []string{"arrays"}, nil, func(_ string, ag *h5.Group, _ *attrs) {
				err = eachGroup(ag, arrays, []string{"muscle", "side", "sampling_rate_hz"}, func(array string, g *h5.Group, aa *attrs) {
					r, rerr := outlineArray(g, aa)
					if rerr != nil {
						err = rerr
						return
					}
					r.File, r.Bytes, r.Subject, r.Session, r.Trial, r.Array, r.LevelPctMVC = rel, size, s.Subject.ID, s.Session, trial, array, level
					s.Rows = append(s.Rows, r)
				})
			})
		})
	})
	if err != nil {
		return nil, err
	}
	return s, nil
}

// outlineArray reads one array's row (all but its place).
func outlineArray(g *h5.Group, a *attrs) (IndexRow, error) {
	r := IndexRow{Muscle: a.str("muscle"), Side: a.str("side"), LabMeanRatePPS: math.NaN(), DerivedPlateauRatePPS: math.NaN()}
	rate := a.num("sampling_rate_hz")
	if _, ok := a.m["sampling_rate_hz"]; !ok || a.bad {
		return r, errOutline
	}
	if !g.Has("samples") {
		return r, errOutline
	}
	d, err := g.OpenDataset("samples", 0)
	if err != nil {
		return r, err
	}
	shape := d.Shape
	d.Close()
	if len(shape) != 2 {
		return r, errOutline
	}
	r.Channels = shape[1]
	if rate > 0 {
		r.DurationS = float64(shape[0]) / rate
	} else if !(rate <= 0) {
		r.DurationS = math.NaN()
	}
	decs, err := members(g, "decompositions")
	if err != nil {
		return r, err
	}
	r.Decompositions = len(decs)
	if len(decs) == 0 {
		return r, nil
	}
	edited := make([]record.Decomposition, len(decs))
	err = eachGroup(g, []string{"decompositions"}, nil, func(_ string, dg *h5.Group, _ *attrs) {
		k := 0
		err = eachGroup(dg, decs, []string{"edited_by_hand"}, func(name string, _ *h5.Group, da *attrs) {
			edited[k] = record.Decomposition{Name: name, EditedByHand: da.boolean("edited_by_hand")}
			k++
		})
		if err != nil {
			return
		}
		k = record.ReportedDecomposition(edited)
		r.Decomposition = edited[k].Name
		err = eachGroup(dg, []string{edited[k].Name}, nil, func(_ string, g *h5.Group, _ *attrs) {
			err = outlineDecomposition(g, &r)
		})
	})
	return r, err
}

// outlineDecomposition fills the unit counts and rates of the reported
// decomposition.
func outlineDecomposition(g *h5.Group, r *IndexRow) error {
	units, err := openGroup(g, "units")
	if err != nil {
		return err
	}
	defer units.Close()
	ids, err := columnLen(units, "id")
	if err != nil {
		return err
	}
	r.Units = ids
	sil, err := floatColumn(units, "silhouette", ids)
	if err != nil {
		return err
	}
	pnr, err := floatColumn(units, "pnr_db", ids)
	if err != nil {
		return err
	}
	for i := range sil {
		if validate.LowConfidence(record.Unit{Silhouette: sil[i], PNRdB: pnr[i]}, lowConfidenceRules) {
			r.LowConfidenceUnits++
		}
	}
	mean, err := floatColumn(units, "mean_rate_pps", ids)
	if err != nil {
		return err
	}
	r.LabMeanRatePPS = meanOf(len(mean), func(i int) float64 { return mean[i] })
	n, err := columnLen(g, "discharges")
	if err != nil {
		return err
	}
	r.Discharges = int64(n)
	if !g.Has("derived") {
		return nil
	}
	return eachGroup(g, []string{"derived"}, []string{"computed"}, func(_ string, dg *h5.Group, a *attrs) {
		var when time.Time
		if c := a.str("computed"); c != "" {
			if when, err = time.Parse(time.RFC3339Nano, c); err != nil {
				err = errOutline
				return
			}
		}
		r.DerivedComputed = when.UTC().Format(time.RFC3339)
		du, uerr := openGroup(dg, "units")
		if uerr != nil {
			err = uerr
			return
		}
		defer du.Close()
		plateau, perr := floatColumn(du, "plateau_rate_pps", ids)
		if perr != nil {
			err = perr
			return
		}
		r.DerivedPlateauRatePPS = meanOf(len(plateau), func(i int) float64 { return plateau[i] })
	})
}

// members lists the child groups of parent/name in creation order;
// errOutline when it is missing or holds anything but groups.
func members(parent *h5.Group, name string) ([]string, error) {
	g, err := openGroup(parent, name)
	if err != nil {
		return nil, err
	}
	defer g.Close()
	kids, err := g.Children()
	if err != nil {
		return nil, err
	}
	out := make([]string, len(kids))
	for i, k := range kids {
		if k.Kind != h5.KindGroup {
			return nil, errOutline
		}
		out[i] = k.Name
	}
	return out, nil
}

func openGroup(parent *h5.Group, name string) (*h5.Group, error) {
	if !parent.Has(name) {
		return nil, errOutline
	}
	return parent.OpenGroup(name)
}

// eachGroup opens each named child group of parent in turn and calls fn
// with the attributes named in want (none when want is nil); a missing
// group or an attribute of an unexpected type is errOutline. fn reports its own failures through the caller's
// variables; eachGroup stops at the first of its own.
func eachGroup(parent *h5.Group, names, want []string, fn func(name string, g *h5.Group, a *attrs)) error {
	for _, name := range names {
		g, err := openGroup(parent, name)
		if err != nil {
			return err
		}
		var a attrs
		if want != nil {
			a, err = attrsOf(g.AttrsNamed(want...))
		}
		if err == nil {
			fn(name, g, &a)
			if a.bad {
				err = errOutline
			}
		}
		g.Close()
		if err != nil {
			return err
		}
	}
	return nil
}

// columnLen is the length of a 1-D dataset of g.
func columnLen(g *h5.Group, name string) (int, error) {
	if !g.Has(name) {
		return 0, errOutline
	}
	d, err := g.OpenDataset(name, 0)
	if err != nil {
		return 0, err
	}
	defer d.Close()
	if len(d.Shape) != 1 {
		return 0, errOutline
	}
	return d.Shape[0], nil
}

// floatColumn reads a 1-D numeric column of n values.
func floatColumn(g *h5.Group, name string, n int) ([]float64, error) {
	if !g.Has(name) {
		return nil, errOutline
	}
	d, err := g.OpenDataset(name, 0)
	if err != nil {
		return nil, err
	}
	defer d.Close()
	if len(d.Shape) != 1 || d.Shape[0] != n {
		return nil, errOutline
	}
	return d.Float64s()
}

// attrs reads typed attributes as recfile does; a value of another type
// marks the set bad (the caller then reads the file in full).
type attrs struct {
	m   map[string]h5.Attr
	bad bool
}

func attrsOf(as []h5.Attr, err error) (attrs, error) {
	if err != nil {
		return attrs{}, err
	}
	return attrs{m: h5.AttrMap(as)}, nil
}

func (a *attrs) str(name string) string {
	v, ok := a.m[name]
	if !ok {
		return ""
	}
	s, ok := v.Value.(string)
	a.bad = a.bad || !ok
	return s
}

func (a *attrs) num(name string) float64 {
	v, ok := a.m[name]
	if !ok {
		return math.NaN()
	}
	switch x := v.Value.(type) {
	case float64:
		return x
	case int64:
		return float64(x)
	}
	a.bad = true
	return math.NaN()
}

func (a *attrs) boolean(name string) bool {
	v, ok := a.m[name]
	if !ok {
		return false
	}
	switch x := v.Value.(type) {
	case bool:
		return x
	case int64:
		return x != 0
	}
	a.bad = true
	return false
}
