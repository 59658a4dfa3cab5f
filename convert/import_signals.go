package convert

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"muarc/record"
)

// Reading the force and EMG files of a recording into its trials and
// arrays (first pass; EMG samples stream in the second).

func (pl *Plan) force(it input, opt SignalOptions, prof *Profile) error {
	opt.DType = record.Float64
	if t := trialNamed(pl.Rec, it.trial); t.Force.SamplingRateHz > 0 {
		opt.DefaultRateHz, opt.DefaultStartS = t.Force.SamplingRateHz, t.Force.StartS
	}
	s, err := ScanSignals(it.path, opt)
	if err != nil {
		return err
	}
	cols, err := s.Columns()
	if err != nil {
		return err
	}
	t := trialNamed(pl.Rec, it.trial)
	fi, ti := -1, -1
	if r := t.Force.SamplingRateHz; r > 0 && math.Abs(r-s.RateHz) > 1e-9*s.RateHz {
		return perr(it.path, 0, 0, "fix the rate in the metadata (trials[].force.sampling_rate_hz) or in the force file", "force rate %g Hz, the metadata says %g Hz for trial %s", s.RateHz, r, t.Name)
	}
	for i, l := range s.Labels {
		switch {
		case prof.Force.TargetColumn != "" && strings.EqualFold(l, prof.Force.TargetColumn),
			prof.Force.TargetColumn == "" && strings.Contains(strings.ToLower(l), "target"):
			ti = i
		case prof.Force.Column != "" && strings.EqualFold(l, prof.Force.Column), prof.Force.Column == "" && fi < 0:
			fi = i
		default:
			return perr(it.path, s.lay.headerLine, i+1, "a force file holds a force column and optionally a target column; name them in the profile (force.column, force.target_column)", "column %q is neither the force nor the target", l)
		}
	}
	if fi < 0 {
		return perr(it.path, s.lay.headerLine, 0, "name the force column in the profile (force.column)", "no force column")
	}
	// The force unit: the file's header, else the metadata's
	// (trials[].force.unit), else the profile's; a header and metadata
	// that disagree are refused, naming both.
	metaUnit := t.Force.Unit
	if u := s.Units[fi]; u != "" && metaUnit != "" && u != metaUnit {
		return perr(it.path, s.lay.headerLine, 0, "fix the unit in the metadata (trials[].force.unit) or in the header", "force unit %q, the metadata says %q for trial %s", u, metaUnit, t.Name)
	}
	unit := func(i int) string {
		switch {
		case s.Units[i] != "":
			return s.Units[i]
		case metaUnit != "":
			return metaUnit
		}
		return prof.Force.Unit
	}
	t.Force = record.Signal{SamplingRateHz: s.RateHz, StartS: s.StartS, Unit: unit(fi), Values: cols[fi]}
	if ti >= 0 {
		t.ForceTarget = record.Signal{SamplingRateHz: s.RateHz, StartS: s.StartS, Unit: unit(ti), Values: cols[ti]}
	}
	if t.MVCUnit == "" {
		t.MVCUnit = t.Force.Unit
	}
	if err := checkCount(s, "samples", s.Samples); err != nil {
		return err
	}
	for k, v := range MetaExtra(dropKeys(s.Meta, "samples")) {
		if t.Extra == nil {
			t.Extra = record.Extra{}
		}
		t.Extra["force_"+k] = v
	}
	fr := FileReport{Name: it.rel, Role: "force", Trial: t.Name, Delimiter: DelimiterName(s.Dialect.Delimiter), Rows: s.Rows,
		RateHz: s.RateHz, JitterS: s.JitterS, Gaps: s.Gaps, DType: "float64", DTypeWhy: "force traces are kept as float64", Notes: s.Notes}
	pl.Report.Files = append(pl.Report.Files, fr)
	return nil
}

func dropKeys(meta []MetaLine, keys ...string) []MetaLine {
	var out []MetaLine
	for _, m := range meta {
		drop := false
		for _, k := range keys {
			drop = drop || normKey(m.Key) == k
		}
		if !drop {
			out = append(out, m)
		}
	}
	return out
}

// checkCount compares a "samples: N" or "channels: N" line with the table.
func checkCount(s *Signals, key string, want int) error {
	v := metaValue(s.Meta, key)
	if v == "" {
		return nil
	}
	if v != fmt.Sprint(want) {
		return perr(s.File, metaLineOf(s.Meta, key), 0, "the file may be cut short or padded; check it", "the line above the table says %s: %s but the table has %d", key, v, want)
	}
	return nil
}

func (pl *Plan) emg(it input, opt SignalOptions, prof *Profile) error {
	if a := arrayNamed(trialNamed(pl.Rec, it.trial), it.array); a.SamplingRateHz > 0 {
		// The metadata's rate and start are defaults the file may confirm.
		opt.DefaultRateHz, opt.DefaultStartS = a.SamplingRateHz, a.StartS
	}
	s, err := ScanSignals(it.path, opt)
	if err != nil {
		return err
	}
	t := trialNamed(pl.Rec, it.trial)
	a := arrayNamed(t, it.array)
	if a.SamplingRateHz > 0 && math.Abs(a.SamplingRateHz-s.RateHz) > 1e-9*s.RateHz {
		return perr(it.path, 0, 0, "fix the rate in the metadata or in the EMG file", "EMG rate %g Hz, the metadata says %g Hz for array %s", s.RateHz, a.SamplingRateHz, a.Name)
	}
	a.SamplingRateHz, a.StartS = s.RateHz, s.StartS
	unit := ""
	for i, u := range s.Units {
		if i > 0 && u != unit {
			return perr(it.path, s.lay.headerLine, 0, fmt.Sprintf("all EMG channels of one array share one unit; a column that is not a channel (a trigger, an auxiliary signal) is named in emg.skip of a profile (--profile lab.yaml holding \"emg: {skip: [%s]}\", see convert/PROFILES.md)", s.Labels[i]),
				"column %q has %s, the channels before it have %s", s.Labels[i], describeUnit(u), describeUnit(unit))
		}
		unit = u
	}
	if unit != "" {
		if a.Unit != "" && a.Unit != unit {
			return perr(it.path, s.lay.headerLine, 0, "fix the unit in the metadata or in the header", "EMG unit %q, the metadata says %q", unit, a.Unit)
		}
		a.Unit = unit
	}
	if v := metaValue(s.Meta, "array"); v != "" && v != a.Name {
		return perr(it.path, metaLineOf(s.Meta, "array"), 0, "the file name and the array line above the table must agree", "file says array %q, its name gives %q", v, a.Name)
	}
	if v := metaValue(s.Meta, "muscle"); v != "" && a.Muscle == "" {
		a.Muscle = v
	}
	if err := checkCount(s, "samples", s.Samples); err != nil {
		return err
	}
	if err := checkCount(s, "channels", len(s.Labels)); err != nil {
		return err
	}
	for k, v := range MetaExtra(dropKeys(s.Meta, "samples", "channels", "array", "muscle")) {
		if a.Extra == nil {
			a.Extra = record.Extra{}
		}
		if _, ok := a.Extra[k]; !ok {
			a.Extra[k] = v
		}
	}
	// Channels: the metadata's (matched by label) or new ones.
	if len(a.Channels) > 0 {
		if len(a.Channels) != len(s.Labels) {
			return perr(it.path, s.lay.headerLine, 0, "the metadata's channel list and the EMG columns must match", "%d EMG columns, the metadata lists %d channels", len(s.Labels), len(a.Channels))
		}
		for i, l := range s.Labels {
			if a.Channels[i].Label != l {
				return perr(it.path, s.lay.headerLine, i+2, "list the channels in the metadata in the order of the EMG columns", "column %q, the metadata's channel %d is %q", l, i+1, a.Channels[i].Label)
			}
		}
	} else {
		for _, l := range s.Labels {
			a.Channels = append(a.Channels, record.Channel{Label: l, Row: record.NotOnGrid, Column: record.NotOnGrid, XMm: math.NaN(), YMm: math.NaN(), Usable: true})
		}
		if len(prof.EMG.Channels) == 0 {
			s.Notes = append(s.Notes, "no grid positions given (metadata or profile): channels are not on the grid")
		}
	}
	placeChannels(a.Channels, prof.EMG.Channels)
	a.SampleType, a.Scale = s.DType, s.Scale
	s.Notes = append(it.notes, s.Notes...)
	src := s.Source()
	a.Samples = src.samples()
	pl.sources = append(pl.sources, src)
	pl.sigs = append(pl.sigs, s)
	pl.reportIdx = append(pl.reportIdx, len(pl.Report.Files))
	pl.arrays = append(pl.arrays, [2]string{t.Name, a.Name})
	fr := FileReport{Name: it.rel, Role: "emg", Trial: t.Name, Array: a.Name, Delimiter: DelimiterName(s.Dialect.Delimiter), Rows: s.Rows,
		Channels: len(s.Labels), RateHz: s.RateHz, Gaps: s.Gaps, DType: string(s.DType), DTypeWhy: s.DTypeWhy,
		LossyCells: s.LossyCells, MaxAbsError: s.MaxAbsError, Notes: s.Notes}
	fr.setCounts(s)
	pl.Report.Files = append(pl.Report.Files, fr)
	return nil
}

func describeUnit(u string) string {
	if u == "" {
		return "no unit"
	}
	return "unit " + strconv.Quote(u)
}
