package recfile

// Names of groups, datasets and attributes in layout v1. LAYOUT.md is the
// specification; these constants must agree with it.
const (
	grpStudy       = "study"
	grpSubject     = "subject"
	grpSession     = "session"
	grpTrials      = "trials"
	grpArrays      = "arrays"
	grpChannels    = "channels"
	grpDecomps     = "decompositions"
	grpUnits       = "units"
	grpProvenance  = "provenance"
	grpSources     = "sources"
	grpHistory     = "history"
	dsForce        = "force"
	dsForceTarget  = "force_target"
	dsSamples      = "samples"
	dsDischarges   = "discharges"
	dsOffsets      = "discharge_offsets"
	dsMUAPs        = "muaps"
	attrLayout     = "layout"
	attrVersion    = "layout_version"
	attrCreated    = "created"
	attrSoftware   = "software"
	colDischargeN  = "discharge_count"
	colID          = "id"
	attrColumnUnit = "unit"
)

// unitColumns are the fixed unit-table columns after id and
// discharge_count, in order.
var unitColumns = []string{"silhouette", "pnr_db", "accuracy_pct", "isi_cov",
	"recruit_pct_mvc", "derecruit_pct_mvc", "initial_rate_pps", "mean_rate_pps"}

// reserved lists the names a group's Extra may not use, per group kind.
var (
	studyFields   = []string{"id", "title", "description", "contact", "license"}
	subjectFields = []string{"id", "name", "birth_date", "age_years", "age_band", "sex", "height_cm", "mass_kg", "dominant_side", "phone", "email", "notes"}
	sessionFields = []string{"id", "date", "site", "operator", "notes"}
	trialFields   = []string{"task", "target_pct_mvc", "mvc", "mvc_unit", "profile_shape", "rest_s", "ramp_up_s", "plateau_s", "ramp_down_s", "notes"}
	arrayFields   = []string{"muscle", "side", "rows", "columns", "ied_mm", "gain", "adc_bits", "filter_low_hz", "filter_high_hz", "montage", "reference", "sampling_rate_hz", "start_s", "unit"}
	decompFields  = []string{"method", "method_version", "parameters", "edited_by_hand", "notes"}
	signalFields  = []string{"sampling_rate_hz", "start_s", "unit"}
)
