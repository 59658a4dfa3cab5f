package recfile

import "muarc/schema"

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
	colLabel       = "label"
	attrColumnUnit = "unit"
	// attrRate is the one attribute of a trace or array the reader insists
	// on (samples without a rate have no time); validate reports the other
	// required ones (schema.Field.Required).
	attrRate = "sampling_rate_hz"
	// attrListPosition is the 0-based place of a trial, array or
	// decomposition among its siblings (layout 1.1), for readers that list
	// group members alphabetically.
	attrListPosition = "list_position"
)

// unitColumns are the fixed unit-table figure columns after id and
// discharge_count, in order (from the field registry).
var unitColumns = schema.FieldNamesOfKind("unit", schema.KindNumber)

// reserved lists the names a group's Extra may not use, per group kind
// (from the field registry).
var (
	studyFields   = schema.FieldNames("study", true)
	subjectFields = schema.FieldNames("subject", true)
	sessionFields = schema.FieldNames("session", true)
	trialFields   = schema.FieldNames("trial", true)
	arrayFields   = schema.FieldNames("array", true)
	decompFields  = schema.FieldNames("decomposition", true)
	signalFields  = schema.FieldNames("signal", true)
)
