package record

import (
	"math"
	"strconv"
	"time"
)

// Recording is one session of one subject: the unit stored in one muarc file.
type Recording struct {
	// LayoutVersion is the layout version read from a file ("1.0"); the
	// writer ignores it and always writes schema.LayoutVersion.
	LayoutVersion string
	// Created is when the file was written (UTC, RFC 3339 on disk).
	Created time.Time
	// Software names the program and version that wrote the file.
	Software string

	Study   Study
	Subject Subject
	Session Session
	Trials  []Trial

	Provenance Provenance
}

// Study describes the study a recording belongs to.
type Study struct {
	ID          string `layout:"id"`
	Title       string `layout:"title"`
	Description string `layout:"description"`
	// Contact is the study's contact for data requests (name or role and an
	// address); it is study metadata, not subject data.
	Contact string `layout:"contact"`
	// License is an SPDX licence identifier for shared data, e.g. "CC-BY-4.0".
	License string `layout:"license"`
	Extra   Extra
}

// Subject is the participant. Before sharing, ID is a pseudonym and the
// identifying fields (Name, BirthDate, Phone, Email, Notes) are empty; see
// package deid.
type Subject struct {
	// ID is the subject identifier: the lab's code before de-identification,
	// a keyed pseudonym after.
	ID string `layout:"id"`
	// Name is the participant's name. Identifying.
	Name string `layout:"name"`
	// BirthDate is an ISO 8601 calendar date "YYYY-MM-DD" (or "YYYY" once
	// reduced to the year). Identifying.
	BirthDate string `layout:"birth_date"`
	// AgeYears is the age at the session in years; NaN when not known.
	AgeYears float64 `layout:"age_years"`
	// AgeBand is a generalised age such as "30-39" or "90 or older"; empty
	// when the exact age is kept or not known.
	AgeBand string `layout:"age_band"`
	// Sex is "female", "male", "other" or empty when not recorded.
	Sex string `layout:"sex"`
	// HeightCm is body height in centimetres; NaN when not known.
	HeightCm float64 `layout:"height_cm"`
	// MassKg is body mass in kilograms; NaN when not known.
	MassKg float64 `layout:"mass_kg"`
	// HeightBandCm and MassBandKg are height and mass as bands "lo-hi"
	// (lo <= value < hi, in cm and kg), written by de-identification in
	// place of HeightCm and MassKg; empty when none.
	HeightBandCm string `layout:"height_band_cm"`
	MassBandKg   string `layout:"mass_band_kg"`
	// DominantSide is "left", "right", "both" or empty.
	DominantSide string `layout:"dominant_side"`
	// Phone and Email are contact details. Identifying.
	Phone string `layout:"phone"`
	Email string `layout:"email"`
	// Notes is free text about the subject. May identify.
	Notes string `layout:"notes"`
	Extra Extra
}

// Session is one visit of the subject to the lab.
type Session struct {
	ID string `layout:"id"`
	// Date is the session start as RFC 3339 ("2026-03-14T09:30:00Z") or an
	// ISO 8601 calendar date ("2026-03-14").
	Date string `layout:"date"`
	// Site and Operator are free text. May identify.
	Site     string `layout:"site"`
	Operator string `layout:"operator"`
	Notes    string `layout:"notes"`
	// PowerLineHz is the mains frequency where the session was recorded
	// (50 or 60 Hz); 0 when not known (the writer leaves it out).
	PowerLineHz float64 `layout:"power_line_hz"`
	// DateYear is the session's year, written by de-identification in
	// place of Date when the policy keeps the year only; 0 when none.
	DateYear int `layout:"date_year"`
	Extra    Extra
}

// ForceProfile is the trapezoidal target: rest, linear ramp up to the target
// level, plateau, linear ramp down, rest. Durations in seconds; NaN when not
// known.
type ForceProfile struct {
	// Shape is "trapezoid" for the profile described by the durations, or
	// another word ("ramp", "step", "sine", "free") when it differs.
	Shape     string  `layout:"profile_shape"`
	RestS     float64 `layout:"rest_s"`      // rest before the ramp up, s
	RampUpS   float64 `layout:"ramp_up_s"`   // ramp up duration, s
	PlateauS  float64 `layout:"plateau_s"`   // plateau duration, s
	RampDownS float64 `layout:"ramp_down_s"` // ramp down duration, s
}

// Trial is one contraction (or one task block) within a session.
type Trial struct {
	// Name is the trial's group name in the file: letters, digits, '_', '-'
	// and '.', unique within the recording, e.g. "ramp_30pct_1".
	Name string `layout:"name"`
	// Task describes the task in words, e.g. "isometric ankle dorsiflexion".
	Task string `layout:"task"`
	// TargetPctMVC is the plateau target level in % MVC; NaN when not known.
	TargetPctMVC float64 `layout:"target_pct_mvc"`
	// MVC is the maximal voluntary contraction value in MVCUnit; NaN when not
	// known.
	MVC float64 `layout:"mvc"`
	// MVCUnit is the UCUM unit of MVC and of the force trace ("N", "N.m").
	MVCUnit string       `layout:"mvc_unit"`
	Profile ForceProfile `layout:",inline"`
	// Force is the measured force or torque trace. Optional: a zero
	// SamplingRateHz means none was recorded.
	Force Signal
	// ForceTarget is the trajectory shown to the subject; optional as Force.
	ForceTarget Signal
	Arrays      []Array
	Notes       string `layout:"notes"`
	Extra       Extra
}

// Signal is a 1-D, evenly sampled trace held in memory (force, target).
type Signal struct {
	// SamplingRateHz is the sampling rate in hertz; 0 means no signal.
	SamplingRateHz float64 `layout:"sampling_rate_hz"`
	// StartS is the time of the first sample in seconds from the trial start.
	StartS float64 `layout:"start_s"`
	// Unit is the UCUM unit of the values, e.g. "N", "N.m", "%".
	Unit   string `layout:"unit"`
	Values []float64
}

// Present reports whether the signal holds data.
func (s Signal) Present() bool { return s.SamplingRateHz > 0 && len(s.Values) > 0 }

// DurationS is the signal's duration in seconds (samples / rate).
func (s Signal) DurationS() float64 {
	if s.SamplingRateHz <= 0 {
		return 0
	}
	return float64(len(s.Values)) / s.SamplingRateHz
}

// SampleType is the stored type of EMG samples: float32, float64, or
// integer counts (int8, int16, int32) with a CountScale.
type SampleType string

// Sample types.
const (
	Float32 SampleType = "float32"
	Float64 SampleType = "float64"
)

// Array is one electrode array (grid) on one muscle, with its raw EMG.
type Array struct {
	// Name is the array's group name, unique within the trial, e.g. "ta_grid".
	Name string `layout:"name"`
	// Muscle names the muscle in words, e.g. "tibialis anterior".
	Muscle string `layout:"muscle"`
	// Side is "left" or "right" (or empty).
	Side string `layout:"side"`
	// Rows and Columns give the electrode grid size.
	Rows    int `layout:"rows"`
	Columns int `layout:"columns"`
	// IEDMm is the inter-electrode distance in millimetres; NaN when not known.
	IEDMm float64 `layout:"ied_mm"`
	// Gain is the total amplifier gain in V/V; NaN when not known.
	Gain float64 `layout:"gain"`
	// ADCBits is the converter resolution in bits; 0 when not known.
	ADCBits int `layout:"adc_bits"`
	// FilterLowHz and FilterHighHz are the analogue band-pass corners in
	// hertz; NaN when not known.
	FilterLowHz  float64 `layout:"filter_low_hz"`
	FilterHighHz float64 `layout:"filter_high_hz"`
	// Montage is "monopolar", "bipolar" or "differential" (single or double).
	Montage string `layout:"montage"`
	// Reference describes the reference electrode, e.g. "ankle strap".
	Reference string `layout:"reference"`
	// SoftwareFilters is a JSON object naming the digital filters applied
	// to the samples before they were stored, each with an object of its
	// parameters; "{}" when none was applied, empty when not known.
	SoftwareFilters string `layout:"software_filters"`
	// PlacementScheme says how electrode positions were decided:
	// "measured", "channel specific", "other", or empty when not known.
	PlacementScheme string `layout:"placement_scheme"`
	// PlacementDescription describes the placement in words.
	PlacementDescription string `layout:"placement_description"`
	// SamplingRateHz is the EMG sampling rate in hertz.
	SamplingRateHz float64 `layout:"sampling_rate_hz"`
	// StartS is the time of sample 0 in seconds from the trial start.
	StartS float64 `layout:"start_s"`
	// Unit is the UCUM unit of the samples, e.g. "uV" or "mV".
	Unit string `layout:"unit"`
	// SampleType is the on-disk type; empty means Float32. For an integer
	// type the samples are counts and Scale turns them into physical
	// values (Samples then gives physical values; a CountSource also gives
	// the counts).
	SampleType SampleType
	// Scale is the count scale of integer samples (unused for floats).
	Scale CountScale
	// Channels describes each column of the sample matrix, in order.
	Channels []Channel
	// Samples provides the [sample, channel] matrix. The writer reads it in
	// blocks; the reader sets it to a view backed by the open file.
	Samples        SampleSource
	Decompositions []Decomposition
	Extra          Extra
}

// DurationS is the EMG duration in seconds.
func (a Array) DurationS() float64 {
	if a.Samples == nil || a.SamplingRateHz <= 0 {
		return 0
	}
	n, _ := a.Samples.Shape()
	return float64(n) / a.SamplingRateHz
}

// NotOnGrid is the Row and Column of a channel that has no grid position
// (an auxiliary or reference channel).
const NotOnGrid = -1

// Channel describes one column of an array's sample matrix.
type Channel struct {
	Label string `layout:"label"`
	// Row and Column are the 0-based grid position, or NotOnGrid.
	Row    int `layout:"row"`
	Column int `layout:"column"`
	// XMm and YMm are the electrode centre in millimetres in the array's own
	// frame; NaN when not known.
	XMm float64 `layout:"x_mm"`
	YMm float64 `layout:"y_mm"`
	// Usable is false for a channel marked bad (noise, lost contact).
	Usable bool `layout:"usable"`
}

// Decomposition is one decomposition of an array into motor units.
type Decomposition struct {
	// Name is the decomposition's group name, unique within the array,
	// e.g. "auto" or "edited".
	Name string `layout:"name"`
	// Method names the algorithm family in words; MethodVersion its version.
	Method        string `layout:"method"`
	MethodVersion string `layout:"method_version"`
	// Parameters is a JSON object text with the method's parameters ("{}"
	// when none).
	Parameters string `layout:"parameters"`
	// EditedByHand is true when discharges were inspected and edited.
	EditedByHand bool `layout:"edited_by_hand"`
	Units        []Unit
	// ExtraColumns are per-unit figures outside the layout's fixed columns,
	// one value per unit, kept as given.
	ExtraColumns []Column
	// MUAPs holds optional motor unit action potential templates.
	MUAPs *MUAPs
	Notes string `layout:"notes"`
	// Derived holds the figures muarc computed from this decomposition
	// (muarc stats --write), kept apart from the lab's own unit table and
	// templates, which they never replace; nil when none were stored.
	Derived *Derived
}

// Derived are the figures a program derived from one decomposition, with
// how they were computed. Units follow the decomposition's unit order.
type Derived struct {
	// Software is the program and version that computed them.
	Software string
	// Computed is when they were computed (UTC).
	Computed time.Time
	// Method is a JSON object text naming the method and its parameters.
	Method string
	// ForceUnit is the unit of RecruitForce and DerecruitForce.
	ForceUnit string
	Units     []DerivedUnit
	// MUAPs are spike-triggered average templates computed from the
	// array's samples; nil when not computed.
	MUAPs *MUAPs
}

// DerivedUnit holds one unit's derived figures; NaN is unknown.
type DerivedUnit struct {
	// ID is the unit's id in the decomposition.
	ID int64
	// RecruitPctMVC and DerecruitPctMVC are the force at the first and the
	// last discharge in % MVC; RecruitForce and DerecruitForce the same in
	// Derived.ForceUnit.
	RecruitPctMVC, DerecruitPctMVC float64
	RecruitForce, DerecruitForce   float64
	// InitialRatePPS is the discharge rate at recruitment, pps.
	InitialRatePPS float64
	// PlateauRatePPS is the mean discharge rate on the force plateau, pps,
	// and PlateauISICoV the coefficient of variation of its intervals.
	PlateauRatePPS float64
	PlateauISICoV  float64
	// PlateauISIs is the number of intervals wholly on the plateau.
	PlateauISIs int64
}

// ReportedDecomposition is the index of the decomposition that summaries
// (inspect, index, report, study analysis) speak for: the last one edited
// by hand, else the last one (the latest made); -1 when there is none.
func ReportedDecomposition(ds []Decomposition) int {
	for k := len(ds) - 1; k >= 0; k-- {
		if ds[k].EditedByHand {
			return k
		}
	}
	return len(ds) - 1
}

// Unit is one motor unit: its discharges and its quality figures. A figure
// not known is NaN.
type Unit struct {
	// ID is the unit's identifier within the decomposition (unique). muarc
	// assigns it (import numbers units 1..N in file order); it is never
	// read out of the digits of a label.
	ID int64 `layout:"id"`
	// Label is the unit's name exactly as the lab wrote it ("MU 7", "1.5",
	// "07"); empty when the source gave none (and in layout 1.0 files).
	Label string `layout:"label"`
	// Discharges are sample indices (0-based) into the array's samples,
	// sorted ascending.
	Discharges []int64
	// Silhouette is the silhouette measure of the unit's source, 0..1.
	Silhouette float64 `layout:"silhouette"`
	// PNRdB is the pulse-to-noise ratio in decibels.
	PNRdB float64 `layout:"pnr_db"`
	// AccuracyPct is the decomposition accuracy the method reports, in %.
	AccuracyPct float64 `layout:"accuracy_pct"`
	// ISICoV is the coefficient of variation of inter-discharge intervals
	// (dimensionless).
	ISICoV float64 `layout:"isi_cov"`
	// RecruitPctMVC and DerecruitPctMVC are the force at the first and last
	// discharge in % MVC.
	RecruitPctMVC   float64 `layout:"recruit_pct_mvc"`
	DerecruitPctMVC float64 `layout:"derecruit_pct_mvc"`
	// InitialRatePPS and MeanRatePPS are discharge rates in pulses per second.
	InitialRatePPS float64 `layout:"initial_rate_pps"`
	MeanRatePPS    float64 `layout:"mean_rate_pps"`
}

// Name is the label, or the id as text when the unit has no label: what a
// table or figure shows for the unit.
func (u *Unit) Name() string {
	if u.Label != "" {
		return u.Label
	}
	return strconv.FormatInt(u.ID, 10)
}

// NewUnit returns a unit with the given id and every figure NaN.
func NewUnit(id int64) Unit {
	n := math.NaN()
	return Unit{ID: id, Silhouette: n, PNRdB: n, AccuracyPct: n, ISICoV: n,
		RecruitPctMVC: n, DerecruitPctMVC: n, InitialRatePPS: n, MeanRatePPS: n}
}

// Column is one extra per-unit column. Exactly one of Values and Text is set,
// with one entry per unit in Decomposition.Units order.
type Column struct {
	Name string
	// Unit is the column's UCUM unit; empty when dimensionless or unknown.
	Unit   string
	Values []float64
	Text   []string
}

// MUAPs are motor unit action potential templates, [unit][channel][lag],
// flattened row-major into Data.
type MUAPs struct {
	Units, Channels, Lags int
	// FirstLag is the lag of Data's first lag index in samples relative to the
	// discharge (negative: before it).
	FirstLag int `layout:"first_lag"`
	// Unit is the UCUM unit of the values (as the array's samples).
	Unit string `layout:"unit"`
	Data []float32
}

// At returns the template value of unit u, channel c, lag index l.
func (m *MUAPs) At(u, c, l int) float32 { return m.Data[(u*m.Channels+c)*m.Lags+l] }

// Provenance records where a recording came from and what was done to it.
type Provenance struct {
	Sources []SourceFile
	History []Operation
}

// SourceFile is one input file a recording was made from.
type SourceFile struct {
	// Name is the file name relative to the source folder; never absolute.
	Name string
	// Role says what the file held: "force", "emg", "discharges", "units",
	// "metadata", "profile" or another word.
	Role string
	// SHA256 is the lower-case hex SHA-256 of the file's bytes.
	SHA256 string
	// Bytes is the file size in bytes.
	Bytes int64
}

// Operation is one step in a recording's history.
type Operation struct {
	// Action is a verb: "import", "generate", "deidentify", "stats", ...
	Action string
	// Software is the program and version, e.g. "muarc 0.1.0".
	Software string
	// Time is when the step ran (UTC).
	Time time.Time
	// Details is a JSON object text with the step's parameters ("{}" if none).
	Details string
}

// Extra holds metadata fields outside the layout's named ones, kept as given.
// Values are string, float64, int64, bool or []float64; other types are
// refused by the writer.
type Extra map[string]any

// EachDecomposition calls fn for every decomposition of every array of
// every trial, in order, and stops at the first error fn returns.
func (r *Recording) EachDecomposition(fn func(t *Trial, a *Array, d *Decomposition) error) error {
	for ti := range r.Trials {
		t := &r.Trials[ti]
		for ai := range t.Arrays {
			a := &t.Arrays[ai]
			for di := range a.Decompositions {
				if err := fn(t, a, &a.Decompositions[di]); err != nil {
					return err
				}
			}
		}
	}
	return nil
}
