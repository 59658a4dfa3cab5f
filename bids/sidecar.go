package bids

import (
	"bytes"
	"encoding/json"
	"fmt"
	"math"
	"strconv"
	"strings"

	"muarc/convert"
	"muarc/internal/atomicfile"
	"muarc/record"
)

// placementScheme maps the layout's placement_scheme to the values of
// BIDS EMGPlacementScheme (BIDS 1.11.0, "Electromyography", from memory).
var placementScheme = map[string]string{"measured": "Measured", "channel specific": "ChannelSpecific", "other": "Other"}

func (w *writer) json(path string, v any) error {
	b, err := json.MarshalIndent(v, "", "  ")
	if err != nil {
		return err
	}
	return atomicfile.WriteFile(path, append(b, '\n'), w.overwrite)
}

// tsv writes a tab-separated table with a header row; empty cells become
// "n/a" (BIDS "Common principles: tabular files").
func (w *writer) tsv(path string, head []string, rows [][]string) error {
	var b bytes.Buffer
	b.WriteString(strings.Join(head, "\t") + "\n")
	for _, r := range rows {
		for i, c := range r {
			if c == "" {
				r[i] = "n/a"
			}
			r[i] = strings.NewReplacer("\t", " ", "\n", " ").Replace(r[i])
		}
		b.WriteString(strings.Join(r, "\t") + "\n")
	}
	return atomicfile.WriteFile(path, b.Bytes(), w.overwrite)
}

func num(v float64) string {
	if math.IsNaN(v) || math.IsInf(v, 0) {
		return "n/a"
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}

// sidecar writes *_emg.json, *_channels.tsv, *_electrodes.tsv,
// *_coordsystem.json and *_events.tsv/json beside one data file.
func (w *writer) sidecar(rec *record.Recording, t *record.Trial, er *convert.EDFFileReport, base, rel string) error {
	a := firstArray(t)
	emg := map[string]any{}
	need := func(field string, v any) {
		if s, ok := v.(string); ok && s == "" || v == nil {
			v = "n/a"
		}
		if f, ok := v.(float64); ok && math.IsNaN(f) {
			v = "n/a"
		}
		if v == "n/a" {
			w.rep.notKnown(field, rel+"_emg.json")
		}
		emg[field] = v
	}
	// TaskName matches the task label of the file name (BIDS
	// "Electromyography", TaskName); the words go to TaskDescription.
	emg["TaskName"] = Label(t.Name)
	if t.Task != "" {
		emg["TaskDescription"] = t.Task
	}
	rate := math.NaN()
	if a != nil {
		rate = a.SamplingRateHz
	}
	need("SamplingFrequency", rate)
	mains := math.NaN()
	if rec.Session.PowerLineHz > 0 {
		mains = rec.Session.PowerLineHz
	}
	need("PowerLineFrequency", mains)
	filters, err := softwareFilters(t)
	if err != nil {
		return err
	}
	need("SoftwareFilters", filters)
	scheme, desc := placement(t)
	need("EMGPlacementScheme", scheme)
	if desc != "" {
		emg["EMGPlacementSchemeDescription"] = desc
	}
	var refs []string
	for _, ar := range t.Arrays {
		if ar.Reference != "" {
			refs = append(refs, ar.Name+": "+ar.Reference)
		}
	}
	need("EMGReference", strings.Join(refs, "; "))
	emg["RecordingType"] = "continuous"
	emg["RecordingDuration"] = float64(er.Records) * er.RecordDurationS
	emgCount, misc := 0, 0
	for _, s := range er.Signals {
		if s.Source == "force" || s.Source == "force_target" {
			misc++
		} else {
			emgCount++
		}
	}
	emg["EMGChannelCount"] = emgCount
	emg["MISCChannelCount"] = misc
	if a != nil && (!math.IsNaN(a.FilterLowHz) || !math.IsNaN(a.FilterHighHz)) {
		emg["HardwareFilters"] = map[string]any{"Bandpass": map[string]any{"LowCutoff (Hz)": na(a.FilterLowHz), "HighCutoff (Hz)": na(a.FilterHighHz)}}
	}
	if err := w.json(base+"_emg.json", emg); err != nil {
		return err
	}
	if err := w.channels(t, er, base); err != nil {
		return err
	}
	if err := w.electrodes(t, er, base); err != nil {
		return err
	}
	return w.events(t, base)
}

// softwareFilters is the BIDS SoftwareFilters object of a trial's file: the
// arrays' software_filters when they all agree, else every array's filters
// keyed "ARRAY: FILTER"; nil when an array's are not known.
func softwareFilters(t *record.Trial) (any, error) {
	var texts []string
	objs := make([]map[string]any, len(t.Arrays))
	for i, a := range t.Arrays {
		if a.SoftwareFilters == "" {
			return nil, nil
		}
		if err := json.Unmarshal([]byte(a.SoftwareFilters), &objs[i]); err != nil || objs[i] == nil {
			return nil, fmt.Errorf("array %s: software_filters %q is not a JSON object", a.Name, a.SoftwareFilters)
		}
		texts = append(texts, a.SoftwareFilters)
	}
	if len(texts) == 0 {
		return nil, nil
	}
	if same(texts) {
		return objs[0], nil
	}
	per := map[string]any{}
	for i, o := range objs {
		for name, params := range o {
			per[t.Arrays[i].Name+": "+name] = params
		}
	}
	return per, nil
}

// placement is EMGPlacementScheme and its description for a trial's file:
// the arrays' scheme when they agree ("Other" with each array's own words
// when they do not), "" when an array's is not known.
func placement(t *record.Trial) (scheme, desc string) {
	var schemes, descs []string
	for _, a := range t.Arrays {
		if a.PlacementScheme == "" {
			return "", ""
		}
		schemes = append(schemes, a.PlacementScheme)
		if a.PlacementDescription != "" {
			descs = append(descs, a.Name+": "+a.PlacementDescription)
		}
	}
	if len(schemes) == 0 {
		return "", ""
	}
	if same(schemes) {
		scheme = placementScheme[schemes[0]]
		if len(descs) == 1 || len(descs) == len(t.Arrays) && same(trimNames(descs)) {
			return scheme, strings.SplitN(descs[0], ": ", 2)[1]
		}
		return scheme, strings.Join(descs, "; ")
	}
	var each []string
	for i, a := range t.Arrays {
		each = append(each, a.Name+": "+schemes[i])
	}
	return "Other", "schemes differ between the arrays (" + strings.Join(each, ", ") + "); " + strings.Join(descs, "; ")
}

// trimNames drops the "ARRAY: " prefix of each description.
func trimNames(descs []string) []string {
	out := make([]string, len(descs))
	for i, d := range descs {
		out[i] = strings.SplitN(d, ": ", 2)[1]
	}
	return out
}

func same(vs []string) bool {
	for _, v := range vs {
		if v != vs[0] {
			return false
		}
	}
	return true
}

// arrayOf maps an export report source "ARRAY/CHANNEL" to its array and
// channel.
func arrayOf(t *record.Trial, source string) (*record.Array, *record.Channel) {
	name, label, ok := strings.Cut(source, "/")
	if !ok {
		return nil, nil
	}
	for i := range t.Arrays {
		if t.Arrays[i].Name == name {
			for k := range t.Arrays[i].Channels {
				if t.Arrays[i].Channels[k].Label == label {
					return &t.Arrays[i], &t.Arrays[i].Channels[k]
				}
			}
		}
	}
	return nil, nil
}

func (w *writer) channels(t *record.Trial, er *convert.EDFFileReport, base string) error {
	head := []string{"name", "type", "units", "description", "sampling_frequency", "low_cutoff", "high_cutoff", "status", "status_description", "group", "target_muscle", "interelectrode_distance", "reference"}
	var rows [][]string
	for _, s := range er.Signals {
		switch s.Source {
		case "force", "force_target":
			d := "measured force"
			if s.Source == "force_target" {
				d = "target force shown to the participant"
			}
			rate := t.Force.SamplingRateHz
			if s.Source == "force_target" {
				rate = t.ForceTarget.SamplingRateHz
			}
			rows = append(rows, []string{s.Label, "MISC", s.Unit, d, num(rate), "", "", "good", "", "", "", "", ""})
			continue
		}
		a, c := arrayOf(t, s.Source)
		if a == nil {
			return fmt.Errorf("signal %s has no array", s.Source)
		}
		status, why := "good", ""
		if !c.Usable {
			status, why = "bad", "marked not usable in the muarc file"
		}
		muscle := a.Muscle
		if a.Side != "" && muscle != "" {
			muscle = a.Side + " " + muscle
		}
		rows = append(rows, []string{s.Label, "EMG", s.Unit, "electrode " + c.Label + " of array " + a.Name, num(a.SamplingRateHz),
			num(a.FilterLowHz), num(a.FilterHighHz), status, why, a.Name, muscle, num(a.IEDMm), a.Reference})
	}
	return w.tsv(base+"_channels.tsv", head, rows)
}

// electrodes writes each EMG electrode's position in its grid's own frame
// (millimetres; x along columns, y along rows, from the electrode centre
// when known, else column and row times the inter-electrode distance).
func (w *writer) electrodes(t *record.Trial, er *convert.EDFFileReport, base string) error {
	var rows [][]string
	for _, s := range er.Signals {
		a, c := arrayOf(t, s.Source)
		if a == nil {
			continue
		}
		x, y := c.XMm, c.YMm
		if math.IsNaN(x) && c.Column != record.NotOnGrid && !math.IsNaN(a.IEDMm) {
			x = float64(c.Column) * a.IEDMm
		}
		if math.IsNaN(y) && c.Row != record.NotOnGrid && !math.IsNaN(a.IEDMm) {
			y = float64(c.Row) * a.IEDMm
		}
		z := "n/a"
		if !math.IsNaN(x) && !math.IsNaN(y) {
			z = "0"
		}
		rows = append(rows, []string{s.Label, num(x), num(y), z, Label(a.Name), "EMG", a.Name})
	}
	if err := w.tsv(base+"_electrodes.tsv", []string{"name", "x", "y", "z", "coordinate_system", "type", "group"}, rows); err != nil {
		return err
	}
	var grids []string
	for _, a := range t.Arrays {
		grids = append(grids, fmt.Sprintf("%s: the %d x %d electrode grid %s on %s, origin at the centre of the electrode in row 0 column 0, x along the columns, y along the rows, z = 0 in the grid plane",
			Label(a.Name), a.Rows, a.Columns, a.Name, a.Muscle))
	}
	return w.json(base+"_coordsystem.json", map[string]any{
		"EMGCoordinateSystem":            "Other",
		"EMGCoordinateUnits":             "mm",
		"EMGCoordinateSystemDescription": "Each electrode grid has its own planar frame, named in the coordinate_system column of the electrodes file. " + strings.Join(grids, "; "),
	})
}

// events writes the trapezoid phases of the target force as events, with
// onsets from the first sample of the data file.
func (w *writer) events(t *record.Trial, base string) error {
	p := t.Profile
	start := 0.0
	if a := firstArray(t); a != nil {
		start = a.StartS
	}
	var rows [][]string
	at := 0.0
	for _, ph := range []struct {
		name string
		d    float64
	}{{"rest", p.RestS}, {"ramp_up", p.RampUpS}, {"plateau", p.PlateauS}, {"ramp_down", p.RampDownS}} {
		if math.IsNaN(ph.d) || ph.d <= 0 {
			if !math.IsNaN(ph.d) {
				continue
			}
			break
		}
		rows = append(rows, []string{num(at - start), num(ph.d), ph.name, num(t.TargetPctMVC)})
		at += ph.d
	}
	if err := w.tsv(base+"_events.tsv", []string{"onset", "duration", "trial_type", "target_pct_mvc"}, rows); err != nil {
		return err
	}
	return w.json(base+"_events.json", map[string]any{
		"onset":          map[string]any{"Description": "start of the phase from the first sample of the data file", "Units": "s"},
		"duration":       map[string]any{"Description": "duration of the phase", "Units": "s"},
		"trial_type":     map[string]any{"Description": "phase of the trapezoidal force target", "Levels": map[string]string{"rest": "rest before the ramp", "ramp_up": "linear rise to the plateau", "plateau": "constant target", "ramp_down": "linear fall to rest"}},
		"target_pct_mvc": map[string]any{"Description": "plateau target level of the trial", "Units": "%"},
	})
}
