package recfile

import (
	"encoding/json"
	"time"

	"muarc/h5"
	"muarc/record"
)

// Names of the derived-figures group of a decomposition (since layout 1.1).
const (
	grpDerived      = "derived"
	attrDerivedWhen = "computed"
	attrMethod      = "method"
	attrForceUnit   = "force_unit"
)

// derivedColumn is one column of derived/units/: its name, unit and how to
// get and set it.
type derivedColumn struct {
	name, unit string
	get        func(*record.DerivedUnit) float64
	set        func(*record.DerivedUnit, float64)
}

// derivedColumns are the columns of derived/units/ after id, in order. A
// unit of "" is replaced by the force unit.
var derivedColumns = []derivedColumn{
	{"recruit_pct_mvc", "%", func(u *record.DerivedUnit) float64 { return u.RecruitPctMVC }, func(u *record.DerivedUnit, v float64) { u.RecruitPctMVC = v }},
	{"derecruit_pct_mvc", "%", func(u *record.DerivedUnit) float64 { return u.DerecruitPctMVC }, func(u *record.DerivedUnit, v float64) { u.DerecruitPctMVC = v }},
	{"recruit_force", "", func(u *record.DerivedUnit) float64 { return u.RecruitForce }, func(u *record.DerivedUnit, v float64) { u.RecruitForce = v }},
	{"derecruit_force", "", func(u *record.DerivedUnit) float64 { return u.DerecruitForce }, func(u *record.DerivedUnit, v float64) { u.DerecruitForce = v }},
	{"initial_rate_pps", "/s", func(u *record.DerivedUnit) float64 { return u.InitialRatePPS }, func(u *record.DerivedUnit, v float64) { u.InitialRatePPS = v }},
	{"plateau_rate_pps", "/s", func(u *record.DerivedUnit) float64 { return u.PlateauRatePPS }, func(u *record.DerivedUnit, v float64) { u.PlateauRatePPS = v }},
	{"plateau_isi_cov", "1", func(u *record.DerivedUnit) float64 { return u.PlateauISICoV }, func(u *record.DerivedUnit, v float64) { u.PlateauISICoV = v }},
}

const colPlateauISIs = "plateau_isi_count"

// checkDerived checks a decomposition's derived figures before writing.
func checkDerived(where string, d *record.Decomposition, channels int) error {
	dv := d.Derived
	if dv == nil {
		return nil
	}
	if len(dv.Units) != len(d.Units) {
		return invalid(where, "derived figures for %d units, the decomposition has %d", len(dv.Units), len(d.Units))
	}
	for i := range dv.Units {
		if dv.Units[i].ID != d.Units[i].ID {
			return invalid(where, "derived figures row %d is unit %d, the unit table's row %d is unit %d", i, dv.Units[i].ID, i, d.Units[i].ID)
		}
	}
	if dv.Method != "" && !json.Valid([]byte(dv.Method)) {
		return invalid(where, "derived method is not valid JSON")
	}
	return checkMUAPs(where+" derived", dv.MUAPs, len(d.Units), channels)
}

// checkMUAPs checks templates against the unit and channel counts. An
// empty decomposition has no templates to store: m must then be nil.
func checkMUAPs(where string, m *record.MUAPs, units, channels int) error {
	if m == nil {
		return nil
	}
	if m.Units != units || m.Channels != channels || m.Lags <= 0 || len(m.Data) != m.Units*m.Channels*m.Lags || m.Units == 0 {
		return invalid(where, "MUAPs %dx%dx%d with %d values do not fit %d units x %d channels (a decomposition without units has no templates)", m.Units, m.Channels, m.Lags, len(m.Data), units, channels)
	}
	return nil
}

// writeMUAPs writes templates as dataset name of g.
func writeMUAPs(g *h5.Group, name string, m *record.MUAPs) error {
	if err := g.WriteFloat32Array(name, []int{m.Units, m.Channels, m.Lags}, m.Data); err != nil {
		return err
	}
	return datasetFields(g, name, m, "muaps")
}

// writeDerived writes d.Derived as the group derived/ of dec.
func writeDerived(dec *h5.Group, d *record.Decomposition) error {
	dv := d.Derived
	if dv == nil {
		return nil
	}
	g, err := dec.CreateGroup(grpDerived)
	if err != nil {
		return err
	}
	defer g.Close()
	method := dv.Method
	if method == "" {
		method = "{}"
	}
	var a attrs
	a.str(attrSoftware, dv.Software)
	if !dv.Computed.IsZero() {
		a.any(attrDerivedWhen, dv.Computed.UTC().Format(time.RFC3339Nano))
	}
	a.any(attrMethod, method)
	a.str(attrForceUnit, dv.ForceUnit)
	if err := a.write(g, nil); err != nil {
		return err
	}
	units, err := g.CreateGroup(grpUnits)
	if err != nil {
		return err
	}
	defer units.Close()
	n := len(dv.Units)
	ids := make([]int64, n)
	counts := make([]int64, n)
	for i, u := range dv.Units {
		ids[i], counts[i] = u.ID, u.PlateauISIs
	}
	if err := units.WriteColumn(colID, ids); err != nil {
		return err
	}
	for _, c := range derivedColumns {
		v := make([]float64, n)
		for i := range dv.Units {
			v[i] = c.get(&dv.Units[i])
		}
		unit := c.unit
		if unit == "" {
			unit = dv.ForceUnit
		}
		if err := writeUnitColumn(units, c.name, v, unit); err != nil {
			return err
		}
	}
	if err := writeUnitColumn(units, colPlateauISIs, counts, ""); err != nil {
		return err
	}
	if dv.MUAPs != nil {
		return writeMUAPs(g, dsMUAPs, dv.MUAPs)
	}
	return nil
}

// writeUnitColumn writes a table column with an optional unit attribute.
func writeUnitColumn(g *h5.Group, name string, v any, unit string) error {
	if err := g.WriteColumn(name, v); err != nil {
		return err
	}
	if unit == "" {
		return nil
	}
	ds, err := g.OpenDataset(name, 0)
	if err != nil {
		return err
	}
	defer ds.Close()
	return ds.SetAttr(attrColumnUnit, unit)
}

// readMUAPs reads the templates dataset name of g for n units.
func (f *File) readMUAPs(g *h5.Group, name string, n, channels int) (*record.MUAPs, error) {
	d, err := g.OpenDataset(name, 0)
	if err != nil {
		return nil, err
	}
	defer d.Close()
	if len(d.Shape) != 3 || d.Shape[0] != n || d.Shape[1] != channels {
		return nil, formatErr(f.path, d.Path(), "muaps are [unit, channel, lag]", "shape %v for %d units and %d channels", d.Shape, n, channels)
	}
	das, err := d.Attrs()
	if err != nil {
		return nil, err
	}
	ma := newAttrGet(f.path, d.Path(), das)
	m := &record.MUAPs{Units: n, Channels: channels, Lags: d.Shape[2]}
	ma.fields(m, "muaps")
	if ma.err != nil {
		return nil, ma.err
	}
	if m.Data, err = d.Float32s(); err != nil {
		return nil, err
	}
	return m, nil
}

// readDerived reads the derived/ group of a decomposition with n units
// (ids in unit order), or nil when there is none.
func (f *File) readDerived(dec *h5.Group, ids []int64, channels int) (*record.Derived, error) {
	if !dec.Has(grpDerived) {
		return nil, nil
	}
	g, a, err := openWithAttrs(f.path, dec, grpDerived)
	if err != nil {
		return nil, err
	}
	defer g.Close()
	dv := &record.Derived{Software: a.str(attrSoftware), Method: a.str(attrMethod), ForceUnit: a.str(attrForceUnit)}
	if c := a.str(attrDerivedWhen); c != "" {
		t, err := time.Parse(time.RFC3339Nano, c)
		if err != nil {
			return nil, formatErr(f.path, g.Path(), "computed is an RFC 3339 time", "attribute %q is %q", attrDerivedWhen, c)
		}
		dv.Computed = t
	}
	if a.err != nil {
		return nil, a.err
	}
	if dv.Method != "" && !json.Valid([]byte(dv.Method)) {
		return nil, formatErr(f.path, g.Path(), "method is a JSON object text", "method is not valid JSON")
	}
	units, err := mustGroup(f.path, g, grpUnits)
	if err != nil {
		return nil, err
	}
	defer units.Close()
	n := len(ids)
	c := &columns{file: f.path, g: units, n: n}
	got, err := c.i64(colID)
	if err != nil {
		return nil, err
	}
	dv.Units = make([]record.DerivedUnit, n)
	for i := range got {
		if got[i] != ids[i] {
			return nil, formatErr(f.path, units.Path()+"/"+colID, "derived rows follow the unit table's rows", "row %d is unit %d, the unit table has %d", i, got[i], ids[i])
		}
		dv.Units[i].ID = got[i]
	}
	for _, col := range derivedColumns {
		v, err := c.f64(col.name)
		if err != nil {
			return nil, err
		}
		for i := range v {
			col.set(&dv.Units[i], v[i])
		}
	}
	counts, err := c.i64(colPlateauISIs)
	if err != nil {
		return nil, err
	}
	for i := range counts {
		dv.Units[i].PlateauISIs = counts[i]
	}
	if g.Has(dsMUAPs) {
		if dv.MUAPs, err = f.readMUAPs(g, dsMUAPs, n, channels); err != nil {
			return nil, err
		}
	}
	return dv, nil
}
