package validate

import (
	"fmt"
	"math"
	"sort"

	"muarc/record"
)

// paths builds the HDF5 and JSON paths of a recording's parts.
type paths struct{ rec *record.Recording }

func (p paths) trial(ti int) (string, string) {
	return "/trials/" + p.rec.Trials[ti].Name, fmt.Sprintf("/trials/%d", ti)
}

func (p paths) array(ti, ai int) (string, string) {
	h, j := p.trial(ti)
	return h + "/arrays/" + p.rec.Trials[ti].Arrays[ai].Name, fmt.Sprintf("%s/arrays/%d", j, ai)
}

func (p paths) decomp(ti, ai, di int) (string, string) {
	h, j := p.array(ti, ai)
	return h + "/decompositions/" + p.rec.Trials[ti].Arrays[ai].Decompositions[di].Name, fmt.Sprintf("%s/decompositions/%d", j, di)
}

// CheckRecording runs the content checks that need only the model: names,
// rates, units, MVC and target, the channel table against the grid, unit ids,
// discharges (order, duplicates, range, doublets, sustained rate, count) and
// the quality gates. The severities are the checks' defaults under r; File
// applies Options on top. An array's Samples, when set, gives the number of
// samples discharges must lie within and the channel count.
func CheckRecording(rec *record.Recording, r Rules) []Finding {
	if r.isZero() {
		r = DefaultRules()
	}
	var out []Finding
	add := func(id, h, j, hint, format string, a ...any) {
		out = append(out, Finding{Severity: r.severity(id), Check: id, Message: fmt.Sprintf(format, a...), HDF5Path: h, JSONPath: j, Hint: hint})
	}
	p := paths{rec}
	trialNames := map[string]bool{}
	for ti := range rec.Trials {
		t := &rec.Trials[ti]
		th, tj := p.trial(ti)
		if trialNames[t.Name] {
			add("names.unique", th, tj+"/name", "give each trial its own name", "trial name %q is used twice", t.Name)
		}
		trialNames[t.Name] = true
		checkTrial(t, th, tj, r, add)
		for _, s := range []struct {
			name string
			v    []float64
		}{{"force", t.Force.Values}, {"force_target", t.ForceTarget.Values}} {
			reportInfinite(s.v, th+"/"+s.name, tj+"/"+s.name, s.name, add)
		}
		arrayNames := map[string]bool{}
		for ai := range t.Arrays {
			a := &t.Arrays[ai]
			ah, aj := p.array(ti, ai)
			if arrayNames[a.Name] {
				add("names.unique", ah, aj+"/name", "give each array of a trial its own name", "array name %q is used twice in trial %q", a.Name, t.Name)
			}
			arrayNames[a.Name] = true
			rows := -1
			if a.Samples != nil {
				n, nch := a.Samples.Shape()
				rows = n
				if nch != len(a.Channels) {
					add("channels.count", ah+"/channels", aj+"/channels", "give one channel entry per sample column",
						"channel table has %d entries, samples have %d channels", len(a.Channels), nch)
				}
			}
			checkArray(a, ah, aj, r, add)
			decNames := map[string]bool{}
			for di := range a.Decompositions {
				d := &a.Decompositions[di]
				dh, dj := p.decomp(ti, ai, di)
				if decNames[d.Name] {
					add("names.unique", dh, dj+"/name", "give each decomposition of an array its own name", "decomposition name %q is used twice", d.Name)
				}
				decNames[d.Name] = true
				checkDecomposition(d, a, rows, dh, dj, r, add)
				checkDecompositionInfinite(d, dh, dj, add)
			}
		}
	}
	return out
}

type addFunc func(id, hdf5, jsonPath, hint, format string, a ...any)

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func checkTrial(t *record.Trial, th, tj string, r Rules, add addFunc) {
	if !math.IsNaN(t.MVC) && !(t.MVC > 0 && finite(t.MVC)) {
		add("trial.mvc", th+"@mvc", tj+"/mvc", "store the MVC measured for this subject, or leave it out when not known",
			"MVC %v is not a positive number", t.MVC)
	}
	if t.MVCUnit != "" && !r.forceUnitKnown(t.MVCUnit) {
		add("force.unit", th+"@mvc_unit", tj+"/mvc_unit", "use a UCUM code such as \"N\" or \"N.m\", or add the unit to force_units in a rules file",
			"MVC unit %q is not a known force unit", t.MVCUnit)
	}
	if !math.IsNaN(t.TargetPctMVC) {
		switch {
		case t.TargetPctMVC < 0 || math.IsInf(t.TargetPctMVC, 0):
			add("trial.target_negative", th+"@target_pct_mvc", tj+"/target_pct_mvc", "give the target level in % MVC, 0 to 100",
				"target level %v %% MVC is not within 0-100", t.TargetPctMVC)
		case t.TargetPctMVC > r.TargetMaxPctMVC:
			add("trial.target_high", th+"@target_pct_mvc", tj+"/target_pct_mvc", "check the MVC and the target; a target above the maximal contraction is unusual",
				"target level %v %% MVC is above %v %% MVC", t.TargetPctMVC, r.TargetMaxPctMVC)
		}
	}
	for _, s := range []struct {
		name string
		sig  *record.Signal
	}{{"force", &t.Force}, {"force_target", &t.ForceTarget}} {
		if len(s.sig.Values) == 0 && s.sig.SamplingRateHz == 0 {
			continue
		}
		h, j := th+"/"+s.name, tj+"/"+s.name
		if !(s.sig.SamplingRateHz > 0 && finite(s.sig.SamplingRateHz)) {
			add("rate.positive", h+"@sampling_rate_hz", j+"/sampling_rate_hz", "store the sampling rate in Hz", "%s sampling rate %v Hz is not positive", s.name, s.sig.SamplingRateHz)
		}
		switch {
		case s.sig.Unit == "":
			add("force.unit_missing", h, j+"/unit", "store the UCUM unit of the trace (\"N\", \"N.m\", \"%\")", "%s has no unit", s.name)
		case !r.forceUnitKnown(s.sig.Unit):
			add("force.unit", h+"@unit", j+"/unit", "use a UCUM code such as \"N\" or \"N.m\", or add the unit to force_units in a rules file",
				"%s unit %q is not a known force unit", s.name, s.sig.Unit)
		}
	}
	if t.Force.Present() && t.ForceTarget.Present() &&
		(t.Force.SamplingRateHz != t.ForceTarget.SamplingRateHz || len(t.Force.Values) != len(t.ForceTarget.Values)) {
		add("force.length", th+"/force_target", tj+"/force_target", "store the target at the force trace's rate and length",
			"force_target (%d samples at %v Hz) does not match force (%d samples at %v Hz)",
			len(t.ForceTarget.Values), t.ForceTarget.SamplingRateHz, len(t.Force.Values), t.Force.SamplingRateHz)
	}
}

func checkArray(a *record.Array, ah, aj string, r Rules, add addFunc) {
	switch {
	case !(a.SamplingRateHz > 0 && finite(a.SamplingRateHz)):
		add("rate.positive", ah+"@sampling_rate_hz", aj+"/sampling_rate_hz", "store the EMG sampling rate in Hz", "sampling rate %v Hz is not positive", a.SamplingRateHz)
	case a.SamplingRateHz < r.EMGMinRateHz:
		add("emg.rate_low", ah+"@sampling_rate_hz", aj+"/sampling_rate_hz", "surface EMG is usually sampled at 1 kHz or more; check the rate stored",
			"surface EMG sampled at %v Hz, below %v Hz", a.SamplingRateHz, r.EMGMinRateHz)
	}
	labels := map[string]int{}
	for ci, ch := range a.Channels {
		if prev, ok := labels[ch.Label]; ok && ch.Label != "" {
			add("channels.label_duplicate", fmt.Sprintf("%s/channels/label[%d]", ah, ci), fmt.Sprintf("%s/channels/%d", aj, ci), "each channel of an array has its own label; a changed label may be damage (see integrity.metadata_digest)",
				"channels %d and %d are both labelled %q", prev, ci, ch.Label)
		}
		labels[ch.Label] = ci
	}
	type pos struct{ r, c int }
	seen := map[pos]int{}
	for ci, ch := range a.Channels {
		j := fmt.Sprintf("%s/channels/%d", aj, ci)
		if ch.Row == record.NotOnGrid && ch.Column == record.NotOnGrid {
			continue
		}
		if ch.Row < 0 || ch.Column < 0 || ch.Row >= a.Rows || ch.Column >= a.Columns {
			add("channels.grid_outside", fmt.Sprintf("%s/channels/row[%d]", ah, ci), j, "grid positions are 0-based, row < rows and column < columns; -1, -1 marks a channel off the grid",
				"channel %d (%q) at row %d, column %d lies outside the %d x %d grid", ci, ch.Label, ch.Row, ch.Column, a.Rows, a.Columns)
			continue
		}
		k := pos{ch.Row, ch.Column}
		if prev, ok := seen[k]; ok {
			add("channels.grid_duplicate", fmt.Sprintf("%s/channels/row[%d]", ah, ci), j, "each electrode of the grid has its own row and column",
				"channels %d and %d both sit at row %d, column %d", prev, ci, ch.Row, ch.Column)
			continue
		}
		seen[k] = ci
	}
}

func checkDecomposition(d *record.Decomposition, a *record.Array, rows int, dh, dj string, r Rules, add addFunc) {
	fs := a.SamplingRateHz
	if len(d.Units) == 0 {
		add("decomposition.empty", dh+"/units", dj+"/units", "an empty decomposition is valid; check that the units were not lost on export",
			"decomposition %q has no motor units", d.Name)
	}
	ids := map[int64]int{}
	for ui := range d.Units {
		u := &d.Units[ui]
		uj := fmt.Sprintf("%s/units/%d", dj, ui)
		if prev, ok := ids[u.ID]; ok {
			add("units.id_unique", fmt.Sprintf("%s/units/id[%d]", dh, ui), uj+"/id", "give each unit of a decomposition its own id",
				"units %d and %d share id %d", prev, ui, u.ID)
		}
		ids[u.ID] = ui
		checkDischarges(u, fs, rows, dh+"/discharges", fmt.Sprintf("%s/units/discharge_count[%d]", dh, ui), uj, r, add)
		if finite(u.Silhouette) && u.Silhouette < r.SilhouetteMin {
			add("quality.silhouette", fmt.Sprintf("%s/units/silhouette[%d]", dh, ui), uj+"/silhouette", "a low-confidence unit: inspect it or leave it out of analyses",
				"unit %d silhouette %.3g is below %.3g", u.ID, u.Silhouette, r.SilhouetteMin)
		}
		if finite(u.PNRdB) && u.PNRdB < r.PNRMinDB {
			add("quality.pnr", fmt.Sprintf("%s/units/pnr_db[%d]", dh, ui), uj+"/pnr_db", "a low-confidence unit: inspect it or leave it out of analyses",
				"unit %d PNR %.3g dB is below %.3g dB", u.ID, u.PNRdB, r.PNRMinDB)
		}
	}
	for _, c := range d.ExtraColumns {
		n := len(c.Values) + len(c.Text)
		if n != len(d.Units) || (c.Values != nil && c.Text != nil) {
			add("units.column_length", dh+"/units/"+c.Name, dj+"/units", "give one value per unit",
				"extra column %q has %d values for %d units", c.Name, n, len(d.Units))
		}
	}
	if m := d.MUAPs; m != nil {
		if m.Units != len(d.Units) || (a.Samples != nil && m.Channels != len(a.Channels)) || len(m.Data) != m.Units*m.Channels*m.Lags {
			add("muaps.shape", dh+"/muaps", dj+"/muaps", "store one template per unit and channel",
				"MUAP templates are %d x %d x %d (%d values) for %d units and %d channels",
				m.Units, m.Channels, m.Lags, len(m.Data), len(d.Units), len(a.Channels))
		}
	}
}

// checkDischarges checks one unit's discharges (sample indices at fs Hz;
// rows < 0 when the number of samples is not known).
func checkDischarges(u *record.Unit, fs float64, rows int, h, countCell, uj string, r Rules, add addFunc) {
	ds := u.Discharges
	j := uj + "/discharges"
	if len(ds) < r.MinDischarges {
		add("discharge.few", countCell, uj+"/discharge_count", "too few discharges for a rate or a CoV; check the decomposition",
			"unit %d has %d discharges, fewer than %d", u.ID, len(ds), r.MinDischarges)
	}
	var unsorted, dups, outside, doublets int
	firstUnsorted, firstDup, firstOutside, firstDoublet := -1, -1, -1, -1
	for i, v := range ds {
		if rows >= 0 && (v < 0 || v >= int64(rows)) || rows < 0 && v < 0 {
			if firstOutside < 0 {
				firstOutside = i
			}
			outside++
		}
		if i == 0 {
			continue
		}
		switch {
		case v < ds[i-1]:
			if firstUnsorted < 0 {
				firstUnsorted = i
			}
			unsorted++
		case v == ds[i-1]:
			if firstDup < 0 {
				firstDup = i
			}
			dups++
		case fs > 0 && float64(v-ds[i-1])/fs*1000 < r.DoubletISIMs:
			if firstDoublet < 0 {
				firstDoublet = i
			}
			doublets++
		}
	}
	if unsorted > 0 {
		add("discharge.sorted", h, j, "sort each unit's discharges in ascending order",
			"unit %d: %d %s out of order, first at index %d (%d after %d)", u.ID, unsorted, plural(unsorted, "discharge", "discharges"), firstUnsorted, ds[firstUnsorted], ds[firstUnsorted-1])
	}
	if dups > 0 {
		add("discharge.duplicate", h, j, "remove the repeated discharges",
			"unit %d: %d repeated %s, first at index %d (sample %d)", u.ID, dups, plural(dups, "discharge", "discharges"), firstDup, ds[firstDup])
	}
	if outside > 0 {
		lim := "the array's samples"
		if rows >= 0 {
			lim = fmt.Sprintf("0..%d", rows-1)
		}
		add("discharge.range", h, j, "discharges are 0-based sample indices of the array they were decomposed from",
			"unit %d: %d %s outside %s, first at index %d (sample %d)", u.ID, outside, plural(outside, "discharge", "discharges"), lim, firstOutside, ds[firstOutside])
	}
	if doublets > 0 {
		add("discharge.doublet", h, j, "doublets occur, but many point to a merged or duplicated source",
			"unit %d: %d %s under %v ms (doublets), first before index %d (%.1f ms)", u.ID, doublets, plural(doublets, "interval", "intervals"), r.DoubletISIMs, firstDoublet,
			float64(ds[firstDoublet]-ds[firstDoublet-1])/fs*1000)
	}
	if fs > 0 && unsorted == 0 && r.SustainedISIs >= 1 && len(ds) > r.SustainedISIs {
		w := r.SustainedISIs
		for i := 0; i+w < len(ds); i++ {
			span := float64(ds[i+w]-ds[i]) / fs
			if span > 0 && float64(w)/span > r.MaxRatePPS {
				add("discharge.rate_high", h, j, "a sustained rate this high is unusual in voluntary contractions; check for a merged source",
					"unit %d: %.1f pps over %d intervals from index %d (sample %d), above %v pps", u.ID, float64(w)/span, w, i, ds[i], r.MaxRatePPS)
				break
			}
		}
	}
}

// LowConfidence reports whether a unit fails the quality gates of r: a known
// silhouette below SilhouetteMin or a known PNR below PNRMinDB. A unit whose
// figures are not known (NaN) is not low-confidence by this test: nothing is
// known against it.
func LowConfidence(u record.Unit, r Rules) bool {
	if r.isZero() {
		r = DefaultRules()
	}
	return finite(u.Silhouette) && u.Silhouette < r.SilhouetteMin ||
		finite(u.PNRdB) && u.PNRdB < r.PNRMinDB
}

func plural(n int, one, many string) string {
	if n == 1 {
		return one
	}
	return many
}

// reportInfinite adds one values.infinite finding for the first ±Inf in v
// with the count.
func reportInfinite(v []float64, h, j, what string, add addFunc) {
	first, n := -1, 0
	for i, x := range v {
		if math.IsInf(x, 0) {
			if first < 0 {
				first = i
			}
			n++
		}
	}
	if n > 0 {
		add("values.infinite", h, j, "store NaN for a value not known, or the finite value; import refuses infinities unless --allow-out-of-range",
			"%s holds %d infinities (first at index %d: %v)", what, n, first, v[first])
	}
}

func checkDecompositionInfinite(d *record.Decomposition, dh, dj string, add addFunc) {
	figures := map[string]func(u *record.Unit) float64{
		"silhouette": func(u *record.Unit) float64 { return u.Silhouette }, "pnr_db": func(u *record.Unit) float64 { return u.PNRdB },
		"accuracy_pct": func(u *record.Unit) float64 { return u.AccuracyPct }, "isi_cov": func(u *record.Unit) float64 { return u.ISICoV },
		"recruit_pct_mvc": func(u *record.Unit) float64 { return u.RecruitPctMVC }, "derecruit_pct_mvc": func(u *record.Unit) float64 { return u.DerecruitPctMVC },
		"initial_rate_pps": func(u *record.Unit) float64 { return u.InitialRatePPS }, "mean_rate_pps": func(u *record.Unit) float64 { return u.MeanRatePPS },
	}
	names := make([]string, 0, len(figures))
	for k := range figures {
		names = append(names, k)
	}
	sort.Strings(names)
	for _, name := range names {
		v := make([]float64, len(d.Units))
		for i := range d.Units {
			v[i] = figures[name](&d.Units[i])
		}
		reportInfinite(v, dh+"/units/"+name, dj+"/units/"+name, "unit column "+name, add)
	}
	for _, c := range d.ExtraColumns {
		reportInfinite(c.Values, dh+"/units/"+c.Name, dj+"/units/"+c.Name, "unit column "+c.Name, add)
	}
	if m := d.MUAPs; m != nil {
		v := make([]float64, len(m.Data))
		for i, x := range m.Data {
			v[i] = float64(x)
		}
		reportInfinite(v, dh+"/muaps", dj+"/muaps", "MUAP templates", add)
	}
}
