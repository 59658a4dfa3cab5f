package recfile

// Reading the tables of a recording: channels, unit tables with discharges
// and MUAP templates, and provenance.

import (
	"encoding/json"
	"slices"
	"time"

	"muarc/h5"
	"muarc/record"
)

func elemSize(t string) int {
	if t == "float64" {
		return 8
	}
	return 4
}

// column reads a 1-D column of a group and checks its length.
type columns struct {
	file string
	g    *h5.Group
	n    int
}

func (c *columns) open(name string) (*h5.Dataset, error) {
	if !c.g.Has(name) {
		return nil, formatErr(c.file, c.g.Path()+"/"+name, "LAYOUT.md lists the required columns", "required column is missing")
	}
	d, err := c.g.OpenDataset(name, 0)
	if err != nil {
		return nil, err
	}
	if len(d.Shape) != 1 || d.Shape[0] != c.n {
		d.Close()
		return nil, formatErr(c.file, d.Path(), "every column of a table has one value per row", "shape %v, want [%d]", d.Shape, c.n)
	}
	return d, nil
}

// readColumn opens a column, checks it and reads it with get.
func readColumn[T any](c *columns, name string, get func(*h5.Dataset) ([]T, error)) ([]T, error) {
	d, err := c.open(name)
	if err != nil {
		return nil, err
	}
	defer d.Close()
	return get(d)
}

func (c *columns) f64(name string) ([]float64, error) {
	return readColumn(c, name, (*h5.Dataset).Float64s)
}
func (c *columns) i64(name string) ([]int64, error) { return readColumn(c, name, (*h5.Dataset).Int64s) }
func (c *columns) strs(name string) ([]string, error) {
	return readColumn(c, name, (*h5.Dataset).Strings)
}
func (c *columns) bools(name string) ([]bool, error) { return readColumn(c, name, (*h5.Dataset).Bools) }

func (f *File) readChannels(parent *h5.Group, n int) ([]record.Channel, error) {
	g, err := mustGroup(f.path, parent, grpChannels)
	if err != nil {
		return nil, err
	}
	defer g.Close()
	c := &columns{file: f.path, g: g, n: n}
	label, err := c.strs("label")
	if err != nil {
		return nil, err
	}
	row, err := c.i64("row")
	if err != nil {
		return nil, err
	}
	col, err := c.i64("column")
	if err != nil {
		return nil, err
	}
	x, err := c.f64("x_mm")
	if err != nil {
		return nil, err
	}
	y, err := c.f64("y_mm")
	if err != nil {
		return nil, err
	}
	ok, err := c.bools("usable")
	if err != nil {
		return nil, err
	}
	out := make([]record.Channel, n)
	for i := range out {
		out[i] = record.Channel{Label: label[i], Row: int(row[i]), Column: int(col[i]), XMm: x[i], YMm: y[i], Usable: ok[i]}
	}
	return out, nil
}

func (f *File) readDecomposition(parent *h5.Group, name string, channels int) (record.Decomposition, error) {
	dec := record.Decomposition{Name: name}
	g, a, err := openListMember(f.path, parent, name)
	if err != nil {
		return dec, err
	}
	defer g.Close()
	a.fields(&dec, "decomposition")
	if x := a.extra(); len(x) > 0 && a.err == nil {
		keys := make([]string, 0, len(x))
		for k := range x {
			keys = append(keys, k)
		}
		slices.Sort(keys)
		return dec, formatErr(f.path, g.Path(), "decompositions have no extra attributes; put per-unit figures in units/", "unknown attributes %v", keys)
	}
	if a.err != nil {
		return dec, a.err
	}
	if dec.Parameters != "" && !json.Valid([]byte(dec.Parameters)) {
		return dec, formatErr(f.path, g.Path(), "parameters is a JSON object text", "parameters are not valid JSON")
	}
	units, err := mustGroup(f.path, g, grpUnits)
	if err != nil {
		return dec, err
	}
	defer units.Close()
	if !units.Has(colID) {
		return dec, formatErr(f.path, units.Path()+"/"+colID, "LAYOUT.md lists the required columns", "required column is missing")
	}
	idd, err := units.OpenDataset(colID, 0)
	if err != nil {
		return dec, err
	}
	n := idd.Len()
	idd.Close()
	c := &columns{file: f.path, g: units, n: n}
	ids, err := c.i64(colID)
	if err != nil {
		return dec, err
	}
	counts, err := c.i64(colDischargeN)
	if err != nil {
		return dec, err
	}
	figs := make([][]float64, len(unitColumns))
	for k, name := range unitColumns {
		if figs[k], err = c.f64(name); err != nil {
			return dec, err
		}
	}
	// Labels (since layout 1.1): in a 1.0 file a column named label is an
	// extra column like any other, and units have no label.
	var labels []string
	hasLabels := units.Has(colLabel) && f.rec != nil && labelsInLayout(f.rec.LayoutVersion)
	if hasLabels {
		if labels, err = c.strs(colLabel); err != nil {
			return dec, err
		}
	}
	// Offsets and discharges.
	oc := &columns{file: f.path, g: g, n: n + 1}
	off, err := oc.i64(dsOffsets)
	if err != nil {
		return dec, err
	}
	if !g.Has(dsDischarges) {
		return dec, formatErr(f.path, g.Path()+"/"+dsDischarges, "LAYOUT.md lists the required datasets", "required dataset is missing")
	}
	dd, err := g.OpenDataset(dsDischarges, 0)
	if err != nil {
		return dec, err
	}
	dis, err := dd.Int64s()
	dd.Close()
	if err != nil {
		return dec, err
	}
	if off[0] != 0 || off[n] != int64(len(dis)) {
		return dec, formatErr(f.path, g.Path()+"/"+dsOffsets, "offsets start at 0 and end at the length of discharges", "offsets run %d..%d for %d discharges", off[0], off[n], len(dis))
	}
	dec.Units = make([]record.Unit, n)
	v := make([]float64, len(unitColumns))
	for i := range dec.Units {
		if off[i+1] < off[i] {
			return dec, formatErr(f.path, g.Path()+"/"+dsOffsets, "offsets never decrease", "offset %d (%d) is below offset %d (%d)", i+1, off[i+1], i, off[i])
		}
		if counts[i] != off[i+1]-off[i] {
			return dec, formatErr(f.path, units.Path()+"/"+colDischargeN, "discharge_count equals the unit's span in discharge_offsets", "unit %d: count %d, offsets give %d", ids[i], counts[i], off[i+1]-off[i])
		}
		u := &dec.Units[i]
		u.ID = ids[i]
		if hasLabels {
			u.Label = labels[i]
		}
		u.Discharges = slices.Clone(dis[off[i]:off[i+1]])
		for k := range v {
			v[k] = figs[k][i]
		}
		setUnitFigures(u, v)
	}
	// Extra columns: every other dataset in units/, in creation order.
	kids, err := units.Children()
	if err != nil {
		return dec, err
	}
	for _, k := range kids {
		if k.Name == colID || k.Name == colDischargeN || slices.Contains(unitColumns, k.Name) || (hasLabels && k.Name == colLabel) {
			continue
		}
		d, err := c.open(k.Name)
		if err != nil {
			return dec, err
		}
		col := record.Column{Name: k.Name}
		das, err := d.Attrs()
		if err == nil {
			if u, ok := h5.AttrMap(das)[attrColumnUnit].Value.(string); ok {
				col.Unit = u
			}
			if len(d.Type) >= 6 && d.Type[:6] == "string" {
				col.Text, err = d.Strings()
			} else {
				col.Values, err = d.Float64s()
			}
		}
		d.Close()
		if err != nil {
			return dec, err
		}
		dec.ExtraColumns = append(dec.ExtraColumns, col)
	}
	if g.Has(dsMUAPs) {
		if dec.MUAPs, err = f.readMUAPs(g, dsMUAPs, n, channels); err != nil {
			return dec, err
		}
	}
	if dec.Derived, err = f.readDerived(g, ids, channels); err != nil {
		return dec, err
	}
	return dec, nil
}

func (f *File) readProvenance(root *h5.Group) (record.Provenance, error) {
	var p record.Provenance
	g, err := root.OpenGroup(grpProvenance)
	if err != nil {
		return p, err
	}
	defer g.Close()
	read := func(name string, cols []string, fn func(n int, vals []any) error) error {
		sub, err := mustGroup(f.path, g, name)
		if err != nil {
			return err
		}
		defer sub.Close()
		if !sub.Has(cols[0]) {
			return formatErr(f.path, sub.Path()+"/"+cols[0], "LAYOUT.md lists the provenance columns", "required column is missing")
		}
		d, err := sub.OpenDataset(cols[0], 0)
		if err != nil {
			return err
		}
		n := d.Len()
		d.Close()
		c := &columns{file: f.path, g: sub, n: n}
		vals := make([]any, len(cols))
		for i, name := range cols {
			if name == "bytes" {
				vals[i], err = c.i64(name)
			} else {
				vals[i], err = c.strs(name)
			}
			if err != nil {
				return err
			}
		}
		return fn(n, vals)
	}
	err = read(grpSources, []string{"name", "role", "sha256", "bytes"}, func(n int, v []any) error {
		for i := 0; i < n; i++ {
			p.Sources = append(p.Sources, record.SourceFile{Name: v[0].([]string)[i], Role: v[1].([]string)[i],
				SHA256: v[2].([]string)[i], Bytes: v[3].([]int64)[i]})
		}
		return nil
	})
	if err != nil {
		return p, err
	}
	err = read(grpHistory, []string{"action", "software", "time", "details"}, func(n int, v []any) error {
		for i := 0; i < n; i++ {
			ts := v[2].([]string)[i]
			t, err := time.Parse(time.RFC3339Nano, ts)
			if err != nil {
				return formatErr(f.path, "/provenance/history/time", "times are RFC 3339", "entry %d: %q is not an RFC 3339 time", i, ts)
			}
			p.History = append(p.History, record.Operation{Action: v[0].([]string)[i], Software: v[1].([]string)[i],
				Time: t, Details: v[3].([]string)[i]})
		}
		return nil
	})
	return p, err
}
