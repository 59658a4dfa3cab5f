package convert

import (
	"slices"
	"testing"

	"muarc/schema"
)

// The unit-table field names convert spells (for the header spellings) are
// the registry's, and unitFields lists every number field of the
// registry's unit group, so a figure added there is read and exported.
func TestUnitFieldsFollowRegistry(t *testing.T) {
	for _, name := range []string{FieldID, FieldSilhouette, FieldPNR, FieldAccuracy, FieldISICoV, FieldRecruit, FieldDerecruit, FieldInitialRate, FieldMeanRate} {
		if !slices.Contains(schema.FieldNames("unit", false), name) {
			t.Errorf("%q is not a field of the registry's unit group", name)
		}
	}
	if len(unitFields) != 8 || unitFields[1] != FieldPNR {
		t.Errorf("unit figures %v", unitFields)
	}
	// The export's heads carry the registry's units (UCUM), none for
	// ratios (unit "1").
	for name, want := range map[string]string{FieldPNR: "pnr_db [dB]", FieldSilhouette: "silhouette", FieldMeanRate: "mean_rate_pps [/s]", FieldRecruit: "recruit_pct_mvc [%]"} {
		if got := fieldHead(name); got != want {
			t.Errorf("head of %s: %q, want %q", name, got, want)
		}
	}
}
