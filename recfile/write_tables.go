package recfile

// Writing the tables of a recording: channels, decompositions (unit table,
// discharges, templates) and provenance.

import (
	"encoding/json"
	"time"

	"muarc/h5"
	"muarc/internal/fieldbind"
	"muarc/record"
	"muarc/schema"
)

func writeChannels(parent *h5.Group, chs []record.Channel) error {
	g, err := parent.CreateGroup(grpChannels)
	if err != nil {
		return err
	}
	defer g.Close()
	n := len(chs)
	label := make([]string, n)
	row := make([]int32, n)
	col := make([]int32, n)
	x := make([]float64, n)
	y := make([]float64, n)
	ok := make([]bool, n)
	for i, c := range chs {
		label[i], row[i], col[i], x[i], y[i], ok[i] = c.Label, int32(c.Row), int32(c.Column), c.XMm, c.YMm, c.Usable
	}
	for _, c := range []struct {
		name string
		v    any
	}{{"label", label}, {"row", row}, {"column", col}, {"x_mm", x}, {"y_mm", y}, {"usable", ok}} {
		if err := writeColumn(g, "channel", c.name, c.v); err != nil {
			return err
		}
	}
	return nil
}

// writeColumn writes a table column of one of the registry's table groups
// with a `unit` attribute when the registry gives the column a unit
// (layout 1.1), so a reader finds every column's unit beside its values.
func writeColumn(g *h5.Group, group, name string, v any) error {
	if err := g.WriteColumn(name, v); err != nil {
		return err
	}
	for _, f := range schema.FieldsOf(group) {
		if f.Name != name || f.Unit == "" {
			continue
		}
		return setColumnUnit(g, name, f.Unit)
	}
	return nil
}

func setColumnUnit(g *h5.Group, name, unit string) error {
	ds, err := g.OpenDataset(name, 0)
	if err != nil {
		return err
	}
	defer ds.Close()
	return ds.SetAttr(attrColumnUnit, unit)
}

func writeDecomposition(parent *h5.Group, d *record.Decomposition, pos int) error {
	dc := *d
	if dc.Parameters == "" {
		dc.Parameters = "{}"
	}
	g, err := listMember(parent, d.Name, pos, &dc, "decomposition", nil)
	if err != nil {
		return err
	}
	defer g.Close()
	n := len(d.Units)
	ids := make([]int64, n)
	counts := make([]int64, n)
	figs := make([][]float64, len(unitColumns))
	for k := range figs {
		figs[k] = make([]float64, n)
	}
	offsets := make([]int64, n+1)
	total := 0
	for _, u := range d.Units {
		total += len(u.Discharges)
	}
	dis := make([]int64, 0, total)
	labels := make([]string, n)
	for i, u := range d.Units {
		ids[i] = u.ID
		labels[i] = u.Label
		counts[i] = int64(len(u.Discharges))
		for k, v := range unitFigures(&u) {
			figs[k][i] = v
		}
		dis = append(dis, u.Discharges...)
		offsets[i+1] = int64(len(dis))
	}
	units, err := g.CreateGroup(grpUnits)
	if err != nil {
		return err
	}
	defer units.Close()
	if err := units.WriteColumn(colID, ids); err != nil {
		return err
	}
	if err := units.WriteColumn(colLabel, labels); err != nil {
		return err
	}
	if err := units.WriteColumn(colDischargeN, counts); err != nil {
		return err
	}
	for k, name := range unitColumns {
		if err := writeColumn(units, "unit", name, figs[k]); err != nil {
			return err
		}
	}
	for _, c := range d.ExtraColumns {
		var v any = c.Values
		if c.Text != nil {
			v = c.Text
		}
		if err := units.WriteColumn(c.Name, v); err != nil {
			return err
		}
		if c.Unit != "" {
			if err := setColumnUnit(units, c.Name, c.Unit); err != nil {
				return err
			}
		}
	}
	if err := g.WriteColumn(dsDischarges, dis); err != nil {
		return err
	}
	if err := g.WriteColumn(dsOffsets, offsets); err != nil {
		return err
	}
	if m := d.MUAPs; m != nil {
		if err := writeMUAPs(g, dsMUAPs, m); err != nil {
			return err
		}
	}
	return writeDerived(g, d)
}

// unitFigures lists a unit's figures in unitColumns order: the number
// fields of the registry's unit group that record.Unit holds.
func unitFigures(u *record.Unit) []float64 {
	var out []float64
	for _, b := range fieldbind.Bind(u, "unit") {
		if b.Field.Kind == schema.KindNumber {
			out = append(out, b.Get().(float64))
		}
	}
	return out
}

// setUnitFigures is the inverse of unitFigures.
func setUnitFigures(u *record.Unit, v []float64) {
	i := 0
	for _, b := range fieldbind.Bind(u, "unit") {
		if b.Field.Kind == schema.KindNumber {
			b.Set(v[i])
			i++
		}
	}
}

func writeProvenance(root *h5.Group, p record.Provenance) error {
	g, err := root.CreateGroup(grpProvenance)
	if err != nil {
		return err
	}
	defer g.Close()
	src, err := g.CreateGroup(grpSources)
	if err != nil {
		return err
	}
	defer src.Close()
	n := len(p.Sources)
	name, role, sha := make([]string, n), make([]string, n), make([]string, n)
	bytes := make([]int64, n)
	for i, s := range p.Sources {
		if filepathIsAbs(s.Name) {
			return invalid("provenance", "source name %q is absolute; store names relative to the source folder", s.Name)
		}
		name[i], role[i], sha[i], bytes[i] = s.Name, s.Role, s.SHA256, s.Bytes
	}
	for _, c := range []struct {
		n string
		v any
	}{{"name", name}, {"role", role}, {"sha256", sha}, {"bytes", bytes}} {
		if err := writeColumn(src, "source", c.n, c.v); err != nil {
			return err
		}
	}
	his, err := g.CreateGroup(grpHistory)
	if err != nil {
		return err
	}
	defer his.Close()
	m := len(p.History)
	action, soft, when, details := make([]string, m), make([]string, m), make([]string, m), make([]string, m)
	for i, h := range p.History {
		d := h.Details
		if d == "" {
			d = "{}"
		}
		if !json.Valid([]byte(d)) {
			return invalid("provenance", "history entry %d details are not valid JSON", i)
		}
		action[i], soft[i], when[i], details[i] = h.Action, h.Software, h.Time.UTC().Format(time.RFC3339Nano), d
	}
	for _, c := range []struct {
		n string
		v any
	}{{"action", action}, {"software", soft}, {"time", when}, {"details", details}} {
		if err := his.WriteColumn(c.n, c.v); err != nil {
			return err
		}
	}
	return nil
}
