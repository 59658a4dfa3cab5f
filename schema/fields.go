package schema

import (
	"slices"
	"strings"
)

// Kind is the value type of a metadata field as the metadata view and the
// HDF5 file hold it (LAYOUT.md, "Conventions").
type Kind string

// Field kinds.
const (
	KindString   Kind = "string"       // UTF-8 text
	KindNumber   Kind = "number"       // float64; NaN (or absent) when not known
	KindInteger  Kind = "integer"      // int64 (int32 for grid positions)
	KindBoolean  Kind = "boolean"      // 8-bit enum FALSE=0, TRUE=1
	KindDate     Kind = "date"         // ISO 8601 "YYYY-MM-DD", or "YYYY" once reduced
	KindTime     Kind = "time"         // RFC 3339 date-time, UTC
	KindDateTime Kind = "time or date" // RFC 3339 date-time or "YYYY-MM-DD"
	KindUnit     Kind = "unit"         // a UCUM code, case-sensitive
	KindJSON     Kind = "JSON text"    // a JSON object stored as a string
	KindName     Kind = "name"         // a group name (letters, digits, _ - .)
	KindData     Kind = "data"         // a dataset (signal, templates); not a value
)

// Class says what a field is to de-identification; it decides which
// actions a policy may choose for it.
type Class string

// De-identification classes.
const (
	ClassValue   Class = "value"    // a number, enum or descriptive text not about the person
	ClassID      Class = "id"       // an identifier
	ClassText    Class = "text"     // free text that may identify
	ClassDate    Class = "date"     // a calendar date or date-time about the person
	ClassAge     Class = "age"      // age in years
	ClassAgeBand Class = "age band" // an age band
	ClassMeasure Class = "measure"  // body height or mass
	ClassName    Class = "name"     // a group name (trial, array, decomposition): must stay present
	ClassTime    Class = "time"     // a history time stamp: must stay present
	ClassSource  Class = "source"   // a source file name
	ClassData    Class = "data"     // a signal or template block
	ClassFixed   Class = "fixed"    // always carried unchanged (a yes/no without "unknown")
	ClassLabel   Class = "label"    // a short code a lab types (a channel or unit label): kept, or replaced when it is more than a plain code
	ClassCarried Class = "carried"  // recorded data and their description: always carried bit-exact, not a policy field
	ClassFile    Class = "file"     // written by muarc itself (root attributes)
)

// Action names a de-identification action (deid.Action has the same words).
const (
	ActKeep         = "keep"
	ActDrop         = "drop"
	ActPseudonymize = "pseudonymize"
	ActScrub        = "scrub"
	ActShift        = "shift"
	ActYear         = "year"
	ActGeneralize   = "generalize"
)

// ClassActions lists, per class, the actions a policy may choose. Extra
// fields (any value type) allow every action but generalize.
var ClassActions = map[Class][]string{
	ClassValue:   {ActKeep, ActDrop},
	ClassID:      {ActKeep, ActDrop, ActPseudonymize},
	ClassText:    {ActKeep, ActDrop, ActScrub},
	ClassDate:    {ActKeep, ActDrop, ActShift, ActYear},
	ClassAge:     {ActKeep, ActDrop, ActGeneralize},
	ClassAgeBand: {ActKeep, ActDrop, ActGeneralize},
	ClassMeasure: {ActKeep, ActDrop, ActGeneralize},
	ClassName:    {ActKeep, ActPseudonymize},
	ClassTime:    {ActKeep, ActShift, ActYear},
	ClassSource:  {ActDrop, ActPseudonymize},
	ClassData:    {ActKeep, ActDrop},
	ClassFixed:   {ActKeep},
	ClassLabel:   {ActKeep, ActGeneralize, ActDrop},
	ClassCarried: {ActKeep},
	ClassFile:    {ActKeep},
}

// ExtraActions are the actions a policy may choose for an extra field.
var ExtraActions = []string{ActKeep, ActDrop, ActPseudonymize, ActScrub, ActShift, ActYear}

// Group names a place in the layout that holds fields. Each has a policy
// prefix (the metadata-view path of its fields, "[]" for list elements) and
// an HDF5 path pattern.
type Group struct {
	// Name is the group's short name: "study", "subject", "trial", ...
	Name string
	// Prefix is the metadata-view path of the group in policy form, e.g.
	// "trials[].arrays[]"; "" for the root.
	Prefix string
	// HDF5 is the HDF5 path pattern of the group, e.g.
	// "/trials/<trial>/arrays/<array>".
	HDF5 string
	// Table is true when the fields are columns of a table (one dataset per
	// column, one value per row) rather than attributes.
	Table bool
	// Extras is true when the group may carry fields beyond the listed
	// ones (LAYOUT.md, "Extra fields").
	Extras bool
}

// Groups lists the field-holding groups of the layout, in LAYOUT.md order.
var Groups = []Group{
	{Name: "root", Prefix: "", HDF5: "/"},
	{Name: "study", Prefix: "study", HDF5: "/study", Extras: true},
	{Name: "subject", Prefix: "subject", HDF5: "/subject", Extras: true},
	{Name: "session", Prefix: "session", HDF5: "/session", Extras: true},
	{Name: "trial", Prefix: "trials[]", HDF5: "/trials/<trial>", Extras: true},
	{Name: "signal", Prefix: "trials[].force", HDF5: "/trials/<trial>/force"},
	{Name: "array", Prefix: "trials[].arrays[]", HDF5: "/trials/<trial>/arrays/<array>", Extras: true},
	{Name: "channel", Prefix: "trials[].arrays[].channels[]", HDF5: "/trials/<trial>/arrays/<array>/channels", Table: true},
	{Name: "decomposition", Prefix: "trials[].arrays[].decompositions[]", HDF5: "/trials/<trial>/arrays/<array>/decompositions/<name>"},
	{Name: "unit", Prefix: "trials[].arrays[].decompositions[].units[]", HDF5: "/trials/<trial>/arrays/<array>/decompositions/<name>/units", Table: true, Extras: true},
	{Name: "muaps", Prefix: "trials[].arrays[].decompositions[].muaps", HDF5: "/trials/<trial>/arrays/<array>/decompositions/<name>/muaps"},
	{Name: "derived", Prefix: "trials[].arrays[].decompositions[].derived", HDF5: "/trials/<trial>/arrays/<array>/decompositions/<name>/derived"},
	{Name: "derived_unit", Prefix: "trials[].arrays[].decompositions[].derived.units[]", HDF5: "/trials/<trial>/arrays/<array>/decompositions/<name>/derived/units", Table: true},
	{Name: "source", Prefix: "provenance.sources[]", HDF5: "/provenance/sources", Table: true},
	{Name: "history", Prefix: "provenance.history[]", HDF5: "/provenance/history", Table: true},
}

// Field is one named metadata field of the layout. It is the one place that
// states a field's name, where it lives, its kind and unit, the values it
// may take, whether it identifies a person, and what de-identification may
// do with it; the JSON Schema, the reader and writer, the sidecar reader,
// the de-identification policy and the docs follow it (fields_test.go
// checks that they agree).
type Field struct {
	// Group is the Groups entry the field belongs to.
	Group string
	// Name is the attribute or column name on disk and the key in the
	// metadata view and in a sidecar.
	Name string
	// Kind is the value type.
	Kind Kind
	// Storage is the dataset type of a table column ("float64", "int64",
	// "int32", "string", "boolean"); empty for attributes.
	Storage string
	// Unit is the UCUM unit of a number ("1" for a dimensionless ratio);
	// "" when the field is not a quantity or carries its unit elsewhere.
	Unit string
	// Enum lists the allowed values of a string field, or of a number
	// field written in decimal ("50"); nil for any.
	Enum []string
	// Required is true when every file has the field.
	Required bool
	// Identifying is true when the value identifies a person directly
	// (Safe Harbor, 45 CFR 164.514(b)(2)(i)) or is free text that may.
	Identifying bool
	// Class is what the field is to de-identification.
	Class Class
	// Default is the built-in policy's action (deid/default_policy.json);
	// "" for fields that are not policy fields.
	Default string
	// ViewOnly is true for a field the metadata view derives from the data
	// (a dataset's length) rather than a stored attribute or column.
	ViewOnly bool
	// Since is the layout version that added the field ("1.0" for the
	// first layout).
	Since string
	// Meaning says what the field is, in words, for the docs.
	Meaning string
}

// Path is the field's metadata-view path in policy form, e.g.
// "trials[].arrays[].muscle" or "subject.name".
func (f Field) Path() string {
	g := GroupByName(f.Group)
	if g.Prefix == "" {
		return f.Name
	}
	return g.Prefix + "." + f.Name
}

// Actions are the de-identification actions a policy may choose for the
// field.
func (f Field) Actions() []string { return ClassActions[f.Class] }

// Allows reports whether a policy may apply action act to the field.
func (f Field) Allows(act string) bool { return slices.Contains(f.Actions(), act) }

// GroupByName returns the group called name; it panics on a name that is
// not in Groups (a programming error).
func GroupByName(name string) Group {
	for _, g := range Groups {
		if g.Name == name {
			return g
		}
	}
	panic("schema: no field group " + name)
}

// FieldsOf returns the fields of a group in registry order.
func FieldsOf(group string) []Field {
	var out []Field
	for _, f := range Fields {
		if f.Group == group {
			out = append(out, f)
		}
	}
	return out
}

// FieldNames returns the names of a group's stored fields (not ViewOnly) in
// registry order; with attrsOnly, group names (KindName) are left out, as
// they are the HDF5 link name and not an attribute.
func FieldNames(group string, attrsOnly bool) []string {
	var out []string
	for _, f := range FieldsOf(group) {
		if f.ViewOnly || attrsOnly && f.Kind == KindName {
			continue
		}
		out = append(out, f.Name)
	}
	return out
}

// FieldNamesOfKind returns the names of a group's fields of one kind in
// registry order, e.g. the unit table's figures (KindNumber of "unit").
func FieldNamesOfKind(group string, kind Kind) []string {
	var out []string
	for _, f := range FieldsOf(group) {
		if f.Kind == kind {
			out = append(out, f.Name)
		}
	}
	return out
}

// FieldByPath returns the field with the given policy-form path.
func FieldByPath(path string) (Field, bool) {
	for _, f := range Fields {
		if f.Path() == path {
			return f, true
		}
	}
	return Field{}, false
}

// ExtraGroupOf returns the group whose extra fields a policy path such as
// "subject.extra.shoe_size" or "subject.extra.*" names, and the extra
// field's name ("*" for all).
func ExtraGroupOf(path string) (group, name string, ok bool) {
	for _, g := range Groups {
		if !g.Extras {
			continue
		}
		rest, found := strings.CutPrefix(path, g.Prefix+".extra.")
		if found && (rest == "*" || rest != "" && !strings.ContainsAny(rest, "[]*")) {
			return g.Name, rest, true
		}
	}
	return "", "", false
}

// Fields is the registry: every named metadata field of the layout, group
// by group in LAYOUT.md order.
var Fields = []Field{
	// Root attributes, written by muarc.
	{Group: "root", Name: "layout", Kind: KindString, Required: true, Class: ClassFile, Since: "1.0", Meaning: "always `muarc-recording`"},
	{Group: "root", Name: "layout_version", Kind: KindString, Required: true, Class: ClassFile, Since: "1.0", Meaning: "`major.minor` of this document"},
	{Group: "root", Name: "created", Kind: KindTime, Required: true, Class: ClassFile, Since: "1.0", Meaning: "when the file was written"},
	{Group: "root", Name: "software", Kind: KindString, Required: true, Class: ClassFile, Since: "1.0", Meaning: "program and version that wrote it, e.g. `muarc 0.1.0`"},
	{Group: "root", Name: "metadata_sha256", Kind: KindString, Required: true, Class: ClassFile, Since: "1.1", Meaning: "SHA-256 of the file's canonical metadata text, 64 lowercase hex digits (see \"Metadata digest\" below); a 1.0 file has none"},

	{Group: "study", Name: "id", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "the study's identifier"},
	{Group: "study", Name: "title", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "short title"},
	{Group: "study", Name: "description", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "what the study is"},
	{Group: "study", Name: "contact", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "contact for data requests (a role and an address); study metadata, not subject data"},
	{Group: "study", Name: "license", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "SPDX licence identifier of shared data, e.g. `CC-BY-4.0`"},

	{Group: "subject", Name: "id", Kind: KindString, Class: ClassID, Default: ActPseudonymize, Since: "1.0", Meaning: "subject code; a keyed pseudonym once shared"},
	{Group: "subject", Name: "name", Kind: KindString, Identifying: true, Class: ClassText, Default: ActDrop, Since: "1.0", Meaning: "the participant's name"},
	{Group: "subject", Name: "birth_date", Kind: KindDate, Identifying: true, Class: ClassDate, Default: ActYear, Since: "1.0", Meaning: "date of birth; the built-in policy keeps the year only"},
	{Group: "subject", Name: "age_years", Kind: KindNumber, Unit: "a", Class: ClassAge, Default: ActGeneralize, Since: "1.0", Meaning: "age at the session; the built-in policy replaces it by `age_band`"},
	{Group: "subject", Name: "age_band", Kind: KindString, Class: ClassAgeBand, Default: ActGeneralize, Since: "1.0", Meaning: "generalised age, e.g. `30-39`, `90 or older`"},
	{Group: "subject", Name: "sex", Kind: KindString, Enum: []string{"female", "male", "other"}, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "sex as recorded"},
	{Group: "subject", Name: "height_cm", Kind: KindNumber, Unit: "cm", Class: ClassMeasure, Default: ActGeneralize, Since: "1.0", Meaning: "body height; the built-in policy replaces it by `height_band_cm`"},
	{Group: "subject", Name: "mass_kg", Kind: KindNumber, Unit: "kg", Class: ClassMeasure, Default: ActGeneralize, Since: "1.0", Meaning: "body mass; the built-in policy replaces it by `mass_band_kg`"},
	{Group: "subject", Name: "height_band_cm", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.2", Meaning: "body height as a band `lo-hi` in cm, lo <= height < hi (e.g. `170-180`); written by de-identification in place of `height_cm`"},
	{Group: "subject", Name: "mass_band_kg", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.2", Meaning: "body mass as a band `lo-hi` in kg, lo <= mass < hi; written by de-identification in place of `mass_kg`"},
	{Group: "subject", Name: "dominant_side", Kind: KindString, Enum: []string{"left", "right", "both"}, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "dominant side"},
	{Group: "subject", Name: "phone", Kind: KindString, Identifying: true, Class: ClassText, Default: ActDrop, Since: "1.0", Meaning: "phone number"},
	{Group: "subject", Name: "email", Kind: KindString, Identifying: true, Class: ClassText, Default: ActDrop, Since: "1.0", Meaning: "e-mail address"},
	{Group: "subject", Name: "notes", Kind: KindString, Identifying: true, Class: ClassText, Default: ActDrop, Since: "1.0", Meaning: "free text about the subject; may identify"},

	{Group: "session", Name: "id", Kind: KindString, Class: ClassID, Default: ActPseudonymize, Since: "1.0", Meaning: "session code; a keyed pseudonym once shared"},
	{Group: "session", Name: "date", Kind: KindDateTime, Identifying: true, Class: ClassDate, Default: ActShift, Since: "1.0", Meaning: "start of the session; shifted per subject once shared"},
	{Group: "session", Name: "site", Kind: KindString, Identifying: true, Class: ClassText, Default: ActDrop, Since: "1.0", Meaning: "where; free text, may identify"},
	{Group: "session", Name: "operator", Kind: KindString, Identifying: true, Class: ClassText, Default: ActDrop, Since: "1.0", Meaning: "who ran the session; free text, may identify"},
	{Group: "session", Name: "notes", Kind: KindString, Identifying: true, Class: ClassText, Default: ActDrop, Since: "1.0", Meaning: "free text; may identify"},
	{Group: "session", Name: "power_line_hz", Kind: KindNumber, Unit: "Hz", Enum: []string{"50", "60"}, Class: ClassValue, Default: ActKeep, Since: "1.2", Meaning: "frequency of the mains power grid where the session was recorded, the source of line interference (BIDS `PowerLineFrequency`); `50` or `60`"},
	{Group: "session", Name: "date_year", Kind: KindInteger, Class: ClassValue, Default: ActKeep, Since: "1.2", Meaning: "the session's year; written by de-identification in place of `date` when the policy keeps the year only (`date` must be a full date)"},

	{Group: "trial", Name: "name", Kind: KindName, Required: true, Class: ClassName, Default: ActKeep, Since: "1.0", Meaning: "the trial's group name, unique within the recording, e.g. `ramp_30pct`"},
	{Group: "trial", Name: "task", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "the task in words, e.g. `isometric ankle dorsiflexion`"},
	{Group: "trial", Name: "target_pct_mvc", Kind: KindNumber, Unit: "%", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "plateau target in % of MVC"},
	{Group: "trial", Name: "mvc", Kind: KindNumber, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "maximal voluntary contraction value, in `mvc_unit`"},
	{Group: "trial", Name: "mvc_unit", Kind: KindUnit, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "unit of `mvc` and of the force trace, e.g. `N`"},
	{Group: "trial", Name: "profile_shape", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "`trapezoid`, or `ramp`, `step`, `sine`, `free`"},
	{Group: "trial", Name: "rest_s", Kind: KindNumber, Unit: "s", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "rest before the ramp up"},
	{Group: "trial", Name: "ramp_up_s", Kind: KindNumber, Unit: "s", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "duration of the ramp up"},
	{Group: "trial", Name: "plateau_s", Kind: KindNumber, Unit: "s", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "duration of the plateau"},
	{Group: "trial", Name: "ramp_down_s", Kind: KindNumber, Unit: "s", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "duration of the ramp down"},
	{Group: "trial", Name: "notes", Kind: KindString, Identifying: true, Class: ClassText, Default: ActDrop, Since: "1.0", Meaning: "free text; may identify"},
	{Group: "trial", Name: "force", Kind: KindData, Class: ClassData, Default: ActKeep, ViewOnly: true, Since: "1.0", Meaning: "the measured force or torque (dataset)"},
	{Group: "trial", Name: "force_target", Kind: KindData, Class: ClassData, Default: ActKeep, ViewOnly: true, Since: "1.0", Meaning: "the trajectory shown to the subject (dataset)"},

	{Group: "signal", Name: "sampling_rate_hz", Kind: KindNumber, Unit: "Hz", Required: true, Class: ClassCarried, Since: "1.0", Meaning: "sampling rate"},
	{Group: "signal", Name: "start_s", Kind: KindNumber, Unit: "s", Required: true, Class: ClassCarried, Since: "1.0", Meaning: "time of the first value from the trial start"},
	{Group: "signal", Name: "unit", Kind: KindUnit, Class: ClassCarried, Since: "1.0", Meaning: "unit of the values, e.g. `N`, `N.m`, `%`"},

	{Group: "array", Name: "name", Kind: KindName, Required: true, Class: ClassName, Default: ActKeep, Since: "1.0", Meaning: "the array's group name, unique within the trial"},
	{Group: "array", Name: "muscle", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "the muscle in words"},
	{Group: "array", Name: "side", Kind: KindString, Enum: []string{"left", "right"}, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "body side of the muscle"},
	{Group: "array", Name: "rows", Kind: KindInteger, Required: true, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "grid rows; 0 when not known or not a grid"},
	{Group: "array", Name: "columns", Kind: KindInteger, Required: true, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "grid columns; 0 when not known or not a grid"},
	{Group: "array", Name: "ied_mm", Kind: KindNumber, Unit: "mm", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "inter-electrode distance"},
	{Group: "array", Name: "gain", Kind: KindNumber, Unit: "V/V", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "total amplifier gain"},
	{Group: "array", Name: "adc_bits", Kind: KindInteger, Unit: "bit", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "converter resolution"},
	{Group: "array", Name: "filter_low_hz", Kind: KindNumber, Unit: "Hz", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "analogue band-pass lower corner"},
	{Group: "array", Name: "filter_high_hz", Kind: KindNumber, Unit: "Hz", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "analogue band-pass upper corner"},
	{Group: "array", Name: "montage", Kind: KindString, Enum: []string{"monopolar", "bipolar", "differential", "single differential", "double differential"}, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "electrode montage"},
	{Group: "array", Name: "reference", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "where the reference electrode was, in words"},
	{Group: "array", Name: "software_filters", Kind: KindJSON, Class: ClassValue, Default: ActKeep, Since: "1.2", Meaning: "digital filters applied to `samples` before they were stored, a JSON object naming each filter with an object of its parameters, e.g. `{\"notch\": {\"frequency (Hz)\": 50}}`; `{}` when none was applied; absent when not known (the form of BIDS `SoftwareFilters`)"},
	{Group: "array", Name: "placement_scheme", Kind: KindString, Enum: []string{"measured", "channel specific", "other"}, Class: ClassValue, Default: ActKeep, Since: "1.2", Meaning: "how the electrode positions were decided: `measured` from anatomical landmarks, `channel specific` (each channel's place given with the channel), or `other` (BIDS `EMGPlacementScheme`); `placement_description` says how"},
	{Group: "array", Name: "placement_description", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.2", Meaning: "the placement in words: landmarks, distances, orientation of the columns to the fibres (BIDS `EMGPlacementSchemeDescription`)"},
	{Group: "array", Name: "sampling_rate_hz", Kind: KindNumber, Unit: "Hz", Required: true, Class: ClassCarried, Since: "1.0", Meaning: "EMG sampling rate"},
	{Group: "array", Name: "start_s", Kind: KindNumber, Unit: "s", Required: true, Class: ClassCarried, Since: "1.0", Meaning: "time of sample 0 from the trial start"},
	{Group: "array", Name: "unit", Kind: KindUnit, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "unit of the samples, e.g. `uV`"},
	{Group: "array", Name: "sample_type", Kind: KindString, Enum: []string{"float32", "float64", "int8", "int16", "int32"}, Class: ClassCarried, ViewOnly: true, Since: "1.0", Meaning: "stored type of `samples`: a float width, or (since 1.2) integer counts with `scale_factor` and `add_offset`"},
	{Group: "array", Name: "samples", Kind: KindInteger, Class: ClassCarried, ViewOnly: true, Since: "1.0", Meaning: "number of sample rows"},
	{Group: "array", Name: "channel_count", Kind: KindInteger, Class: ClassCarried, ViewOnly: true, Since: "1.0", Meaning: "number of channels (sample columns)"},

	{Group: "channel", Name: "label", Kind: KindString, Storage: "string", Class: ClassLabel, Default: ActGeneralize, Since: "1.0", Meaning: "channel label, e.g. `e12`; the built-in policy replaces a label that is not a plain electrode code by the grid position (`r2c5`)"},
	{Group: "channel", Name: "row", Kind: KindInteger, Storage: "int32", Class: ClassCarried, Since: "1.0", Meaning: "0-based grid row; -1 when not on the grid"},
	{Group: "channel", Name: "column", Kind: KindInteger, Storage: "int32", Class: ClassCarried, Since: "1.0", Meaning: "0-based grid column; -1 when not on the grid"},
	{Group: "channel", Name: "x_mm", Kind: KindNumber, Storage: "float64", Unit: "mm", Class: ClassCarried, Since: "1.0", Meaning: "electrode centre x in the array's frame; NaN when not known"},
	{Group: "channel", Name: "y_mm", Kind: KindNumber, Storage: "float64", Unit: "mm", Class: ClassCarried, Since: "1.0", Meaning: "electrode centre y in the array's frame; NaN when not known"},
	{Group: "channel", Name: "usable", Kind: KindBoolean, Storage: "boolean", Class: ClassCarried, Since: "1.0", Meaning: "false for a channel marked bad"},

	{Group: "decomposition", Name: "name", Kind: KindName, Required: true, Class: ClassName, Default: ActKeep, Since: "1.0", Meaning: "the decomposition's group name, unique within the array, e.g. `auto`, `edited`"},
	{Group: "decomposition", Name: "method", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "the algorithm family in words"},
	{Group: "decomposition", Name: "method_version", Kind: KindString, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "its version"},
	{Group: "decomposition", Name: "parameters", Kind: KindJSON, Required: true, Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "a JSON object with the method's parameters (`{}` when none)"},
	{Group: "decomposition", Name: "edited_by_hand", Kind: KindBoolean, Required: true, Class: ClassFixed, Default: ActKeep, Since: "1.0", Meaning: "discharges were inspected and edited"},
	{Group: "decomposition", Name: "notes", Kind: KindString, Identifying: true, Class: ClassText, Default: ActDrop, Since: "1.0", Meaning: "free text; may identify"},
	{Group: "decomposition", Name: "muaps", Kind: KindData, Class: ClassData, Default: ActKeep, ViewOnly: true, Since: "1.0", Meaning: "the MUAP templates (dataset)"},

	{Group: "unit", Name: "id", Kind: KindInteger, Storage: "int64", Required: true, Class: ClassCarried, Since: "1.0", Meaning: "unit identifier, unique within the decomposition; assigned by the writer (muarc's import numbers units 1..N in the order of the discharge file), never read out of a label"},
	{Group: "unit", Name: "label", Kind: KindString, Storage: "string", Class: ClassLabel, Default: ActGeneralize, Since: "1.1", Meaning: "the unit's name exactly as the lab wrote it (`MU 7`, `1.5`, `07`); empty when the source gave none; the built-in policy empties the labels of a decomposition when one is not a plain unit number, so the id names each unit"},
	{Group: "unit", Name: "discharge_count", Kind: KindInteger, Storage: "int64", Required: true, Class: ClassCarried, Since: "1.0", Meaning: "number of discharges (equals the unit's span in `discharge_offsets`)"},
	{Group: "unit", Name: "silhouette", Kind: KindNumber, Storage: "float64", Unit: "1", Class: ClassCarried, Since: "1.0", Meaning: "silhouette measure of the unit's source, 0..1"},
	{Group: "unit", Name: "pnr_db", Kind: KindNumber, Storage: "float64", Unit: "dB", Class: ClassCarried, Since: "1.0", Meaning: "pulse-to-noise ratio"},
	{Group: "unit", Name: "accuracy_pct", Kind: KindNumber, Storage: "float64", Unit: "%", Class: ClassCarried, Since: "1.0", Meaning: "decomposition accuracy the method reports"},
	{Group: "unit", Name: "isi_cov", Kind: KindNumber, Storage: "float64", Unit: "1", Class: ClassCarried, Since: "1.0", Meaning: "coefficient of variation of inter-discharge intervals"},
	{Group: "unit", Name: "recruit_pct_mvc", Kind: KindNumber, Storage: "float64", Unit: "%", Class: ClassCarried, Since: "1.0", Meaning: "force at the first discharge, % MVC"},
	{Group: "unit", Name: "derecruit_pct_mvc", Kind: KindNumber, Storage: "float64", Unit: "%", Class: ClassCarried, Since: "1.0", Meaning: "force at the last discharge, % MVC"},
	{Group: "unit", Name: "initial_rate_pps", Kind: KindNumber, Storage: "float64", Unit: "/s", Class: ClassCarried, Since: "1.0", Meaning: "discharge rate at recruitment, pulses per second"},
	{Group: "unit", Name: "mean_rate_pps", Kind: KindNumber, Storage: "float64", Unit: "/s", Class: ClassCarried, Since: "1.0", Meaning: "mean discharge rate, pulses per second, as the lab's method gives it (muarc's own figures go to `derived/`)"},

	{Group: "derived", Name: "software", Kind: KindString, Class: ClassCarried, Since: "1.1", Meaning: "program and version that computed the figures"},
	{Group: "derived", Name: "computed", Kind: KindTime, Class: ClassTime, Default: ActShift, Since: "1.1", Meaning: "when they were computed"},
	{Group: "derived", Name: "method", Kind: KindJSON, Required: true, Class: ClassCarried, Since: "1.1", Meaning: "a JSON object naming the method and its parameters (plateau rule, intervals of the initial rate, MUAP window)"},
	{Group: "derived", Name: "force_unit", Kind: KindUnit, Class: ClassCarried, Since: "1.1", Meaning: "unit of `recruit_force` and `derecruit_force`"},
	{Group: "derived", Name: "muaps", Kind: KindData, Class: ClassCarried, ViewOnly: true, Since: "1.1", Meaning: "spike-triggered average templates of the array's samples, shaped and described as `muaps`"},

	{Group: "derived_unit", Name: "id", Kind: KindInteger, Storage: "int64", Required: true, Class: ClassCarried, Since: "1.1", Meaning: "unit identifier, as in `units/` (same row order)"},
	{Group: "derived_unit", Name: "recruit_pct_mvc", Kind: KindNumber, Storage: "float64", Unit: "%", Class: ClassCarried, Since: "1.1", Meaning: "force (linearly interpolated) at the first discharge, % MVC"},
	{Group: "derived_unit", Name: "derecruit_pct_mvc", Kind: KindNumber, Storage: "float64", Unit: "%", Class: ClassCarried, Since: "1.1", Meaning: "force at the last discharge, % MVC"},
	{Group: "derived_unit", Name: "recruit_force", Kind: KindNumber, Storage: "float64", Class: ClassCarried, Since: "1.1", Meaning: "force at the first discharge, in `force_unit` (the column's `unit` attribute)"},
	{Group: "derived_unit", Name: "derecruit_force", Kind: KindNumber, Storage: "float64", Class: ClassCarried, Since: "1.1", Meaning: "force at the last discharge, in `force_unit`"},
	{Group: "derived_unit", Name: "initial_rate_pps", Kind: KindNumber, Storage: "float64", Unit: "/s", Class: ClassCarried, Since: "1.1", Meaning: "1 / mean of the first 3 inter-discharge intervals"},
	{Group: "derived_unit", Name: "plateau_rate_pps", Kind: KindNumber, Storage: "float64", Unit: "/s", Class: ClassCarried, Since: "1.1", Meaning: "1 / mean of the intervals wholly on the force plateau (at least 3)"},
	{Group: "derived_unit", Name: "plateau_isi_cov", Kind: KindNumber, Storage: "float64", Unit: "1", Class: ClassCarried, Since: "1.1", Meaning: "standard deviation / mean of those intervals"},
	{Group: "derived_unit", Name: "plateau_isi_count", Kind: KindInteger, Storage: "int64", Class: ClassCarried, Since: "1.1", Meaning: "number of those intervals"},

	{Group: "muaps", Name: "first_lag", Kind: KindInteger, Unit: "sample", Required: true, Class: ClassCarried, Since: "1.0", Meaning: "lag of index 0 relative to the discharge (negative: before it)"},
	{Group: "muaps", Name: "unit", Kind: KindUnit, Class: ClassCarried, Since: "1.0", Meaning: "unit of the values"},

	{Group: "source", Name: "name", Kind: KindString, Storage: "string", Class: ClassSource, Default: ActPseudonymize, Since: "1.0", Meaning: "file name relative to the source folder, never absolute"},
	{Group: "source", Name: "role", Kind: KindString, Storage: "string", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "`force`, `emg`, `discharges`, `units`, `metadata`, `profile`, ..."},
	{Group: "source", Name: "sha256", Kind: KindString, Storage: "string", Class: ClassValue, Default: ActDrop, Since: "1.0", Meaning: "lower-case hex SHA-256 of the file's bytes (empty once de-identified)"},
	{Group: "source", Name: "bytes", Kind: KindInteger, Storage: "int64", Unit: "By", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "file size in bytes"},

	{Group: "history", Name: "action", Kind: KindString, Storage: "string", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "a verb: `import`, `deidentify`, `stats`, ..."},
	{Group: "history", Name: "software", Kind: KindString, Storage: "string", Class: ClassValue, Default: ActKeep, Since: "1.0", Meaning: "program and version"},
	{Group: "history", Name: "time", Kind: KindTime, Storage: "string", Class: ClassTime, Default: ActShift, Since: "1.0", Meaning: "RFC 3339 time, UTC"},
	{Group: "history", Name: "details", Kind: KindJSON, Storage: "string", Class: ClassValue, Default: ActDrop, Since: "1.0", Meaning: "a JSON object with the step's parameters"},
}
