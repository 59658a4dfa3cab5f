package convert

import (
	"testing"

	"muarc/record"
)

// FuzzReadDerivedUnits: any text read as a derived-figures table either
// fails with a ParseError or gives one row per unit of the decomposition,
// in its order, with the unit ids.
func FuzzReadDerivedUnits(f *testing.F) {
	head := "derived: x\nsoftware: muarc 0.1.0\ncomputed: 2026-03-14T09:30:00Z\nmethod: {\"a\":1}\nforce unit: N\n\nunit,muarc_id,recruit_pct_mvc [%],derecruit_pct_mvc [%],recruit_force [N],derecruit_force [N],initial_rate_pps [/s],plateau_rate_pps [/s],plateau_isi_cov [1],plateau_isi_count\n"
	f.Add(head + "MU-a,1,1,2,3,4,5,6,0.1,7\nMU-b,2,,,,,,,,0\n")
	f.Add(head + "MU-b,2,1e308,-0,NaN,Inf,5,6,0.1,7\nMU-a,1,,,,,,,,0\n")
	f.Add(head + "\"MU-a\",1,1,2,3,4,5,6,0.1,7\n")
	f.Add("derived: \"a\\nb\"\nmethod: \"{}\"\n\nunit,muarc_id\n")
	f.Add("unit,muarc_id\nMU-a,1\n")
	dir := f.TempDir()
	d := &record.Decomposition{Name: "auto", Units: []record.Unit{record.NewUnit(1), record.NewUnit(2)}}
	d.Units[0].Label, d.Units[1].Label = "MU-a", "MU-b"
	f.Fuzz(func(t *testing.T, text string) {
		dv, err := readDerivedUnits(fuzzFile(dir, text), d)
		if err != nil {
			if AsParseError(err) == nil {
				t.Fatalf("not a ParseError: %v", err)
			}
			return
		}
		if len(dv.Units) != len(d.Units) {
			t.Fatalf("%d rows for %d units", len(dv.Units), len(d.Units))
		}
		for i, u := range dv.Units {
			if u.ID != d.Units[i].ID {
				t.Fatalf("row %d is unit %d, want %d", i, u.ID, d.Units[i].ID)
			}
		}
	})
}
