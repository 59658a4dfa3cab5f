package deid

import (
	"encoding/json"
	"fmt"
	"math"
	"muarc/record"
	"muarc/schema"
	"regexp"
	"strconv"
	"strings"
	"time"
)

func (a *applier) trial(i int, in *record.Trial) (record.Trial, error) {
	p := fmt.Sprintf("trials[%d]", i)
	out := record.Trial{TargetPctMVC: math.NaN(), MVC: math.NaN(),
		Profile: record.ForceProfile{RestS: math.NaN(), RampUpS: math.NaN(), PlateauS: math.NaN(), RampDownS: math.NaN()}}
	out.Name = in.Name
	a.str(p+".name", in.Name, func(s string) { out.Name = s })
	a.str(p+".task", in.Task, func(s string) { out.Task = s })
	a.num(p+".target_pct_mvc", in.TargetPctMVC, func(v float64) { out.TargetPctMVC = v })
	a.num(p+".mvc", in.MVC, func(v float64) { out.MVC = v })
	a.str(p+".mvc_unit", in.MVCUnit, func(s string) { out.MVCUnit = s })
	a.str(p+".profile_shape", in.Profile.Shape, func(s string) { out.Profile.Shape = s })
	a.num(p+".rest_s", in.Profile.RestS, func(v float64) { out.Profile.RestS = v })
	a.num(p+".ramp_up_s", in.Profile.RampUpS, func(v float64) { out.Profile.RampUpS = v })
	a.num(p+".plateau_s", in.Profile.PlateauS, func(v float64) { out.Profile.PlateauS = v })
	a.num(p+".ramp_down_s", in.Profile.RampDownS, func(v float64) { out.Profile.RampDownS = v })
	a.str(p+".notes", in.Notes, func(s string) { out.Notes = s })
	if a.present(p+".force", in.Force.Present()) {
		out.Force = in.Force
	}
	if a.present(p+".force_target", in.ForceTarget.Present()) {
		out.ForceTarget = in.ForceTarget
	}
	out.Extra = a.extra(p, in.Extra)
	for j := range in.Arrays {
		arr, err := a.array(fmt.Sprintf("%s.arrays[%d]", p, j), &in.Arrays[j])
		if err != nil {
			return out, err
		}
		out.Arrays = append(out.Arrays, arr)
	}
	return out, nil
}

func (a *applier) array(p string, in *record.Array) (record.Array, error) {
	out := record.Array{IEDMm: math.NaN(), Gain: math.NaN(), FilterLowHz: math.NaN(), FilterHighHz: math.NaN()}
	out.Name = in.Name
	a.str(p+".name", in.Name, func(s string) { out.Name = s })
	a.str(p+".muscle", in.Muscle, func(s string) { out.Muscle = s })
	a.str(p+".side", in.Side, func(s string) { out.Side = s })
	a.integer(p+".rows", in.Rows, func(v int) { out.Rows = v })
	a.integer(p+".columns", in.Columns, func(v int) { out.Columns = v })
	a.num(p+".ied_mm", in.IEDMm, func(v float64) { out.IEDMm = v })
	a.num(p+".gain", in.Gain, func(v float64) { out.Gain = v })
	a.integer(p+".adc_bits", in.ADCBits, func(v int) { out.ADCBits = v })
	a.num(p+".filter_low_hz", in.FilterLowHz, func(v float64) { out.FilterLowHz = v })
	a.num(p+".filter_high_hz", in.FilterHighHz, func(v float64) { out.FilterHighHz = v })
	a.str(p+".montage", in.Montage, func(s string) { out.Montage = s })
	a.str(p+".reference", in.Reference, func(s string) { out.Reference = s })
	a.str(p+".software_filters", in.SoftwareFilters, func(s string) { out.SoftwareFilters = s })
	a.str(p+".placement_scheme", in.PlacementScheme, func(s string) { out.PlacementScheme = s })
	a.str(p+".placement_description", in.PlacementDescription, func(s string) { out.PlacementDescription = s })
	a.str(p+".unit", in.Unit, func(s string) { out.Unit = s })
	// The recorded data: always carried.
	out.SamplingRateHz, out.StartS, out.SampleType, out.Scale = in.SamplingRateHz, in.StartS, in.SampleType, in.Scale
	out.Samples = in.Samples
	out.Channels = a.labels(p, in.Channels)
	out.Extra = a.extra(p, in.Extra)
	for k := range in.Decompositions {
		out.Decompositions = append(out.Decompositions, a.decomposition(fmt.Sprintf("%s.decompositions[%d]", p, k), &in.Decompositions[k]))
	}
	return out, nil
}

func (a *applier) decomposition(p string, in *record.Decomposition) record.Decomposition {
	out := record.Decomposition{Name: in.Name, Parameters: "{}"}
	a.str(p+".name", in.Name, func(s string) { out.Name = s })
	a.str(p+".method", in.Method, func(s string) { out.Method = s })
	a.str(p+".method_version", in.MethodVersion, func(s string) { out.MethodVersion = s })
	if in.Parameters != "" && in.Parameters != "{}" {
		a.str(p+".parameters", in.Parameters, func(s string) { out.Parameters = s })
	}
	out.EditedByHand = in.EditedByHand // a yes/no with no "unknown": always carried
	a.str(p+".notes", in.Notes, func(s string) { out.Notes = s })
	out.Units = a.unitLabels(p, in.Units)
	if a.present(p+".muaps", in.MUAPs != nil) {
		out.MUAPs = in.MUAPs
	}
	if in.Derived != nil {
		// Derived figures are carried; the time they were computed follows
		// the policy as history times do.
		dv := *in.Derived
		if !dv.Computed.IsZero() {
			act, named := a.action(p + ".derived.computed")
			switch act {
			case Keep:
			case Shift:
				dv.Computed = dv.Computed.AddDate(0, 0, a.shift)
			case Year:
				dv.Computed = time.Date(dv.Computed.Year(), 1, 1, 0, 0, 0, 0, time.UTC)
			default:
				act, dv.Computed = Drop, time.Time{}
			}
			a.note(p+".derived.computed", act, named, "")
		}
		out.Derived = &dv
	}
	for _, c := range in.ExtraColumns {
		path := p + ".units[].extra." + c.Name
		act, named := a.action(path)
		note := ""
		if _, own := a.pol.Fields[policyPath(path)]; c.Text != nil && !own && act != Drop {
			// free text: a pattern ("units[].extra.*") keeps number columns only
			act, note = Drop, fmt.Sprintf("text column dropped: a pattern keeps number columns only; to keep it, name it (%q: scrub or keep)", policyPath(path))
		}
		switch act {
		case Keep:
			out.ExtraColumns = append(out.ExtraColumns, c)
		case Drop:
		default:
			if c.Text == nil {
				act, note = Drop, "dropped: "+string(act)+" needs text; the column holds numbers"
				break
			}
			nc := record.Column{Name: c.Name, Unit: c.Unit, Text: make([]string, len(c.Text))}
			ok := true
			for i, s := range c.Text {
				switch act {
				case Scrub:
					t, rm := ScrubText(s, a.own)
					for _, r := range rm {
						a.removed[r.Kind] += r.Count
					}
					nc.Text[i] = t
				case Pseudonymize:
					if s != "" {
						nc.Text[i] = a.ps.Extra(policyPath(path), a.subj, s)
					}
				default:
					ok = false
				}
			}
			if ok {
				out.ExtraColumns = append(out.ExtraColumns, nc)
			} else {
				act, note = Drop, "dropped: "+string(act)+" does not apply to a unit column"
			}
		}
		if act != Keep && act != Scrub {
			for _, s := range c.Text {
				a.text = append(a.text, valueNeedles(s, 4)...)
			}
		}
		a.note(path, act, named, note)
	}
	return out
}

func (a *applier) provenance(rec *record.Recording, out *record.Recording, now time.Time) {
	seen := map[string]int{}
	for i, s := range rec.Provenance.Sources {
		p := fmt.Sprintf("provenance.sources[%d]", i)
		act, named := a.action(p + ".name")
		a.note(p+".name", act, named, "")
		if s.Name != "" {
			a.needles = append(a.needles, sourceNeedles(s.Name)...)
		}
		if act != Pseudonymize {
			continue
		}
		n := seen[s.Name] // the same name listed more than once gets distinct pseudonyms
		seen[s.Name]++
		o := record.SourceFile{Name: a.ps.sourceN(a.subj, s.Name, n)}
		a.str(p+".role", s.Role, func(v string) { o.Role = v })
		a.str(p+".sha256", s.SHA256, func(v string) { o.SHA256 = v })
		if s.Bytes != 0 {
			ba, bn := a.action(p + ".bytes")
			if ba == Keep {
				o.Bytes = s.Bytes
			} else {
				ba = Drop
			}
			a.note(p+".bytes", ba, bn, "")
		}
		out.Provenance.Sources = append(out.Provenance.Sources, o)
	}
	timeNote := ""
	for i, h := range rec.Provenance.History {
		p := fmt.Sprintf("provenance.history[%d]", i)
		o := record.Operation{Details: "{}"}
		a.str(p+".action", h.Action, func(v string) { o.Action = v })
		a.str(p+".software", h.Software, func(v string) { o.Software = v })
		if !h.Time.IsZero() {
			act, named := a.action(p + ".time")
			switch act {
			case Keep:
				o.Time = h.Time
			case Shift:
				o.Time = h.Time.AddDate(0, 0, a.shift)
				timeNote = "earlier history times shifted by the subject's offset"
			case Year:
				o.Time = time.Date(h.Time.Year(), 1, 1, 0, 0, 0, 0, time.UTC)
				act = Year
				timeNote = "earlier history times reduced to the year (written as 1 January, 00:00 UTC)"
			}
			a.note(p+".time", act, named, "")
		}
		if h.Details != "" && h.Details != "{}" {
			a.str(p+".details", h.Details, func(v string) { o.Details = v })
		}
		out.Provenance.History = append(out.Provenance.History, o)
	}
	details := map[string]any{
		"policy":                  a.pol.Name,
		"policy_sha256":           a.pol.SHA256(),
		"key_fingerprint":         a.ps.Fingerprint(),
		"unlisted_fields_dropped": len(a.res.Unlisted),
	}
	if act, _ := a.pol.ActionFor("session.date"); act == Shift {
		details["dates"] = "shifted per subject by whole days (offset not recorded)"
	}
	if timeNote != "" {
		details["history"] = timeNote
	}
	if len(a.damage) > 0 {
		// Check ids and counts only: the findings' paths and messages may
		// hold original names.
		details["source_damage_accepted"] = a.damage
		details["source_integrity"] = "the source failed its integrity checks and was de-identified as read, on request (--accept-damaged): values may differ from what was recorded"
	}
	b, _ := json.Marshal(details)
	out.Provenance.History = append(out.Provenance.History, record.Operation{
		Action: "deidentify", Software: schema.Software, Time: now.UTC().Truncate(time.Second), Details: string(b)})
}

// plainLabel matches channel labels that are plain electrode codes: a
// number of at most three digits with an optional short prefix ("e12",
// "ch 3", "EMG-07", "A4"), or a grid position ("r2c5", "3-4", "3x4").
var plainLabel = regexp.MustCompile(`(?i)^(?:(?:el|elec|electrode|ch|chan|channel|emg|aux|ref|[a-z])[ _\-.]?)?[0-9]{1,3}$|^r[0-9]{1,3}[ _\-]?c[0-9]{1,3}$|^[0-9]{1,3}[\-_:,/x][0-9]{1,3}$`)

// IsPlainLabel reports whether a channel label is a plain electrode code
// (plainLabel) or a bipolar pair of two ("e1-e2"); such labels say nothing
// about a person. Empty counts as plain.
func IsPlainLabel(s string) bool {
	s = strings.TrimSpace(s)
	if s == "" || plainLabel.MatchString(s) {
		return true
	}
	x, y, ok := strings.Cut(s, "-")
	return ok && plainLabel.MatchString(x) && plainLabel.MatchString(y)
}

// PositionLabel is the label de-identification gives a channel in place of
// its own: "r<row>c<column>" from the 0-based grid position, or
// "ch<index>" (0-based column of the sample matrix) for a channel not on
// the grid.
func PositionLabel(c record.Channel, index int) string {
	if c.Row == record.NotOnGrid || c.Column == record.NotOnGrid {
		return "ch" + strconv.Itoa(index)
	}
	return "r" + strconv.Itoa(c.Row) + "c" + strconv.Itoa(c.Column)
}

// labels applies the policy to an array's channel labels: keep, drop
// (every label replaced by PositionLabel) or generalize (when any label is
// not a plain electrode code, every label of the array replaced, so the
// new labels stay unique).
func (a *applier) labels(p string, in []record.Channel) []record.Channel {
	out := append([]record.Channel(nil), in...)
	path := p + ".channels[].label"
	act, named := a.action(path)
	odd := 0
	for _, c := range in {
		if !IsPlainLabel(c.Label) {
			odd++
		}
	}
	note := ""
	switch {
	case len(in) == 0:
		return out
	case act == Keep:
	case act == Generalize && odd == 0:
		act, note = Keep, "every label a plain electrode code"
	default:
		if act != Drop && act != Generalize {
			act = Drop
		}
		for i := range out {
			out[i].Label = PositionLabel(in[i], i)
			if !IsPlainLabel(in[i].Label) {
				a.text = append(a.text, valueNeedles(in[i].Label, 4)...)
			}
		}
		note = fmt.Sprintf("%d of %d label(s) not plain electrode codes; every label replaced by its grid position (r<row>c<column>, 0-based) or column (ch<index>)", odd, len(in))
	}
	a.note(path, act, named, note)
	return out
}

// plainUnitLabel matches unit labels that are plain unit numbers: "MU 7",
// "u12", "unit-3", "#4", "07", "1.5" (a number of at most four digits, an
// optional decimal part, an optional short prefix).
var plainUnitLabel = regexp.MustCompile(`(?i)^(?:mu|mn|u|unit|motor unit|#)?[ _\-.#]?[0-9]{1,4}(?:\.[0-9]{1,3})?$`)

// IsPlainUnitLabel reports whether a unit label is a plain unit number
// (empty counts as plain).
func IsPlainUnitLabel(s string) bool {
	s = strings.TrimSpace(s)
	return s == "" || plainUnitLabel.MatchString(s)
}

// unitLabels applies the policy to a decomposition's unit labels: keep,
// drop (every label emptied: the unit id names the unit) or generalize
// (every label emptied when any is not a plain unit number).
func (a *applier) unitLabels(p string, in []record.Unit) []record.Unit {
	out := append([]record.Unit(nil), in...)
	odd, any := 0, false
	for _, u := range in {
		any = any || u.Label != ""
		if !IsPlainUnitLabel(u.Label) {
			odd++
		}
	}
	if !any {
		return out
	}
	path := p + ".units[].label"
	act, named := a.action(path)
	note := ""
	switch {
	case act == Keep:
	case act == Generalize && odd == 0:
		act, note = Keep, "every label a plain unit number"
	default:
		if act != Drop && act != Generalize {
			act = Drop
		}
		for i := range out {
			if !IsPlainUnitLabel(in[i].Label) {
				a.text = append(a.text, valueNeedles(in[i].Label, 4)...)
			}
			out[i].Label = ""
		}
		note = fmt.Sprintf("%d of %d label(s) not plain unit numbers; every label emptied (the unit id names each unit)", odd, len(in))
	}
	a.note(path, act, named, note)
	return out
}
