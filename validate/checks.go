package validate

import (
	"sort"
	"strings"
)

// CheckInfo describes one check: its stable id, its default severity and
// what it looks at.
type CheckInfo struct {
	ID       string   `json:"id"`
	Severity Severity `json:"severity"`
	About    string   `json:"about"`
}

// checks lists every check id a finding may carry. Metadata findings carry
// "metadata.<keyword>" after the JSON Schema keyword that failed; they are
// listed here under "metadata.schema" and switched off together by
// "metadata.*".
var checks = []CheckInfo{
	{"metadata.schema", Error, "the metadata view breaks the JSON Schema schema/recording.schema.json"},
	{"layout.version", Error, "root attribute layout_version missing, malformed or of a newer major version"},
	{"layout.name", Error, "root attribute layout is not \"muarc-recording\""},
	{"structure.missing", Error, "a required group, dataset or attribute is missing"},
	{"structure.type", Error, "a dataset or attribute has the wrong HDF5 type"},
	{"structure.shape", Error, "a dataset has the wrong rank or length"},
	{"structure.chunked", Error, "samples are not chunked"},
	{"samples.scale", Error, "integer samples without a usable scale_factor / add_offset (or units disagreeing with the array's unit) (layout 1.2)"},
	{"structure.fletcher32", Error, "samples carry no Fletcher-32 checksum filter"},
	{"structure.compression", Note, "samples are stored without shuffle + deflate"},
	{"structure.list_position", Warning, "a trial, array or decomposition lacks list_position or it disagrees with creation order (layout 1.1)"},
	{"structure.unexpected", Note, "an object the layout does not name (not read; see the hint)"},
	{"channels.count", Error, "channel table length differs from the samples' channel count"},
	{"channels.grid_duplicate", Error, "two channels share one grid position"},
	{"channels.grid_outside", Error, "a channel's grid position lies outside rows x columns"},
	{"offsets.start", Error, "discharge_offsets does not start at 0"},
	{"offsets.order", Error, "discharge_offsets decreases"},
	{"offsets.end", Error, "discharge_offsets does not end at the length of discharges"},
	{"offsets.length", Error, "discharge_offsets is not one longer than the unit table"},
	{"units.id_unique", Error, "two units share an id"},
	{"units.discharge_count", Error, "discharge_count differs from the unit's discharges"},
	{"units.column_length", Error, "a unit column's length differs from the number of units"},
	{"checksum.chunk", Error, "a stored chunk fails its Fletcher-32 checksum"},
	{"checksum.scan", Error, "the chunk checksum scan could not run"},
	{"integrity.metadata_digest", Error, "attributes or string datasets differ from the metadata_sha256 written with them (or it is missing, layout 1.1 and later)"},
	{"integrity.digest_absent", Note, "a layout 1.0 file carries no metadata digest: damage to its attributes and strings cannot be found"},
	{"strings.utf8", Error, "a string tagged UTF-8 is not valid UTF-8"},
	{"channels.label_duplicate", Error, "two channels of one array share a label"},
	{"content.read", Error, "the recording's content could not be read"},
	{"content.skipped", Note, "later checks did not run because of the structural errors found"},
	{"discharge.sorted", Error, "a unit's discharges are not in ascending order"},
	{"discharge.duplicate", Error, "a unit has the same discharge twice"},
	{"discharge.range", Error, "a discharge lies outside the array's samples"},
	{"discharge.doublet", Note, "an inter-discharge interval shorter than doublet_isi_ms"},
	{"discharge.rate_high", Warning, "a sustained discharge rate above max_rate_pps"},
	{"decomposition.empty", Note, "a decomposition without motor units (kept; nothing to analyse)"},
	{"discharge.few", Warning, "a unit with fewer than min_discharges discharges"},
	{"rate.positive", Error, "a sampling rate is zero, negative or not a number"},
	{"emg.rate_low", Warning, "surface EMG sampled below emg_min_rate_hz"},
	{"force.unit", Warning, "a force or MVC unit outside force_units"},
	{"force.unit_missing", Note, "a force trace without a unit"},
	{"force.length", Error, "force and force_target of one trial differ in rate or length"},
	{"trial.mvc", Error, "MVC is zero, negative or infinite"},
	{"values.infinite", Warning, "EMG samples (with the chunk scan), a force trace, unit figure, extra unit column or MUAP template hold an infinity (NaN is \"not known\"; an infinity is a value no instrument gives)"},
	{"trial.target_high", Warning, "target level above target_max_pct_mvc"},
	{"trial.target_negative", Error, "target level below 0 % MVC"},
	{"quality.silhouette", Warning, "silhouette below silhouette_min: low-confidence unit"},
	{"quality.pnr", Warning, "PNR below pnr_min_db: low-confidence unit"},
	{"muaps.shape", Error, "MUAP templates do not match the unit and channel counts"},
	{"names.unique", Error, "two trials, arrays or decompositions share a name"},
}

// Checks returns every check id with its default severity, sorted by id.
func Checks() []CheckInfo {
	out := append([]CheckInfo(nil), checks...)
	sort.Slice(out, func(i, j int) bool { return out[i].ID < out[j].ID })
	return out
}

func checkInfo(id string) (CheckInfo, bool) {
	if strings.HasPrefix(id, "metadata.") {
		return checks[0], true
	}
	for _, c := range checks {
		if c.ID == id {
			return c, true
		}
	}
	return CheckInfo{}, false
}

// defaultSeverity is the severity a check's findings get before rules.
func defaultSeverity(id string) Severity {
	c, ok := checkInfo(id)
	if !ok {
		return Error
	}
	return c.Severity
}

// matchCheck reports whether pattern (an id, or a prefix ending in ".*")
// selects id.
func matchCheck(pattern, id string) bool {
	if p, ok := strings.CutSuffix(pattern, ".*"); ok {
		return strings.HasPrefix(id, p+".")
	}
	return pattern == id
}

// knownPattern reports whether a rules-file pattern selects some check.
func knownPattern(p string) bool {
	if p == "*" {
		return true
	}
	for _, c := range checks {
		if matchCheck(p, c.ID) {
			return true
		}
	}
	return strings.HasPrefix(p, "metadata.")
}
