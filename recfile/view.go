package recfile

import (
	"encoding/json"
	"math"
	"strconv"
	"strings"

	"muarc/h5"
	"muarc/schema"
)

// MetadataView builds the JSON metadata view of a file straight from its
// HDF5 attributes and table columns, as stored: an attribute of the wrong
// type shows up with that type, so the JSON Schema can report it. Numbers
// that are NaN (unknown) are left out; infinities become the strings "inf"
// and "-inf". Table columns become arrays of row objects. Parameters and
// history details that hold valid JSON are parsed.
func MetadataView(path string) (map[string]any, error) {
	f, err := h5.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return MetadataViewOf(f)
}

// MetadataViewOf is MetadataView of a file the caller opened (and closes).
func MetadataViewOf(f *h5.File) (map[string]any, error) {
	root, err := f.Root()
	if err != nil {
		return nil, err
	}
	defer root.Close()
	view := map[string]any{}
	if err := attrsInto(view, root); err != nil {
		return nil, err
	}
	for _, name := range []string{grpStudy, grpSubject, grpSession} {
		if root.Has(name) {
			m := map[string]any{}
			if err := subgroup(root, name, func(g *h5.Group) error { return attrsInto(m, g) }); err != nil {
				return nil, err
			}
			view[name] = m
		}
	}
	if root.Has(grpTrials) {
		trials, err := childList(root, grpTrials, viewTrial)
		if err != nil {
			return nil, err
		}
		view["trials"] = trials
	}
	if root.Has(grpProvenance) {
		p := map[string]any{}
		err := subgroup(root, grpProvenance, func(g *h5.Group) error {
			for _, name := range []string{grpSources, grpHistory} {
				if !g.Has(name) {
					continue
				}
				err := subgroup(g, name, func(t *h5.Group) error {
					rows, err := tableRows(t)
					p[name] = rows
					return err
				})
				if err != nil {
					return err
				}
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
		if h, ok := p[grpHistory].([]any); ok {
			for _, r := range h {
				parseJSONFields(r.(map[string]any), "history")
			}
		}
		view["provenance"] = p
	}
	return view, nil
}

func subgroup(parent *h5.Group, name string, fn func(*h5.Group) error) error {
	g, err := parent.OpenGroup(name)
	if err != nil {
		return err
	}
	defer g.Close()
	return fn(g)
}

// childList builds one object per member group of parent/name.
func childList(parent *h5.Group, name string, fn func(*h5.Group, map[string]any) error) ([]any, error) {
	var out []any
	err := subgroup(parent, name, func(g *h5.Group) error {
		kids, err := g.Children()
		if err != nil {
			return err
		}
		out = []any{}
		for _, k := range kids {
			m := map[string]any{"name": k.Name}
			if k.Kind != h5.KindGroup {
				m["kind"] = "not a group"
				out = append(out, m)
				continue
			}
			if err := subgroup(g, k.Name, func(c *h5.Group) error {
				if err := attrsInto(m, c); err != nil {
					return err
				}
				// The list's order in the view states the position.
				delete(m, attrListPosition)
				return fn(c, m)
			}); err != nil {
				return err
			}
			out = append(out, m)
		}
		return nil
	})
	return out, err
}

func viewTrial(g *h5.Group, m map[string]any) error {
	for _, name := range []string{dsForce, dsForceTarget} {
		if !g.Has(name) {
			continue
		}
		d, err := g.OpenDataset(name, 0)
		if err != nil {
			return err
		}
		s := map[string]any{}
		err = attrsInto(s, d)
		if len(d.Shape) > 0 {
			s["samples"] = d.Shape[0]
		}
		d.Close()
		if err != nil {
			return err
		}
		m[name] = s
	}
	if g.Has(grpArrays) {
		arrays, err := childList(g, grpArrays, viewArray)
		if err != nil {
			return err
		}
		m["arrays"] = arrays
	}
	return nil
}

func viewArray(g *h5.Group, m map[string]any) error {
	parseJSONFields(m, "array")
	if g.Has(dsSamples) {
		d, err := g.OpenDataset(dsSamples, 0)
		if err != nil {
			return err
		}
		m["sample_type"] = d.Type
		if len(d.Shape) == 2 {
			m["samples"] = d.Shape[0]
			m["channel_count"] = d.Shape[1]
		}
		d.Close()
	}
	if g.Has(grpChannels) {
		if err := subgroup(g, grpChannels, func(c *h5.Group) error {
			rows, err := tableRows(c)
			m["channels"] = rows
			return err
		}); err != nil {
			return err
		}
	}
	if g.Has(grpDecomps) {
		decs, err := childList(g, grpDecomps, viewDecomposition)
		if err != nil {
			return err
		}
		m["decompositions"] = decs
	}
	return nil
}

func viewDecomposition(g *h5.Group, m map[string]any) error {
	parseJSONFields(m, "decomposition")
	if g.Has(grpUnits) {
		if err := subgroup(g, grpUnits, func(u *h5.Group) error {
			rows, err := tableRows(u)
			m["units"] = rows
			return err
		}); err != nil {
			return err
		}
	}
	if err := viewMUAPs(g, m); err != nil {
		return err
	}
	if g.Has(grpDerived) {
		dv := map[string]any{}
		if err := subgroup(g, grpDerived, func(d *h5.Group) error {
			if err := attrsInto(dv, d); err != nil {
				return err
			}
			parseJSONFields(dv, "derived")
			if d.Has(grpUnits) {
				if err := subgroup(d, grpUnits, func(u *h5.Group) error {
					rows, err := tableRows(u)
					dv["units"] = rows
					return err
				}); err != nil {
					return err
				}
			}
			return viewMUAPs(d, dv)
		}); err != nil {
			return err
		}
		m["derived"] = dv
	}
	return nil
}

// viewMUAPs puts the shape and attributes of g's muaps dataset, if any, into
// m["muaps"].
func viewMUAPs(g *h5.Group, m map[string]any) error {
	if !g.Has(dsMUAPs) {
		return nil
	}
	d, err := g.OpenDataset(dsMUAPs, 0)
	if err != nil {
		return err
	}
	mu := map[string]any{}
	err = attrsInto(mu, d)
	if len(d.Shape) == 3 {
		mu["units"], mu["channels"], mu["lags"] = d.Shape[0], d.Shape[1], d.Shape[2]
	}
	d.Close()
	if err != nil {
		return err
	}
	m["muaps"] = mu
	return nil
}

// parseJSONFields replaces the JSON-text fields of a registry group
// (schema.KindJSON) that hold valid JSON by the value they encode.
func parseJSONFields(m map[string]any, group string) {
	for _, f := range schema.FieldsOf(group) {
		if f.Kind != schema.KindJSON {
			continue
		}
		s, ok := m[f.Name].(string)
		if !ok {
			continue
		}
		var v any
		if json.Unmarshal([]byte(s), &v) == nil {
			m[f.Name] = v
		}
	}
}

// jsonValue turns an attribute or cell value into a JSON-ready value; ok is
// false for NaN (unknown, left out).
func jsonValue(v any) (any, bool) {
	switch x := v.(type) {
	case float64:
		switch {
		case math.IsNaN(x):
			return nil, false
		case math.IsInf(x, 1):
			return "inf", true
		case math.IsInf(x, -1):
			return "-inf", true
		}
		return x, true
	case []float64:
		out := make([]any, len(x))
		for i, f := range x {
			out[i], _ = jsonValue(f)
		}
		return out, true
	}
	return v, true
}

type attrHolder interface{ Attrs() ([]h5.Attr, error) }

func attrsInto(m map[string]any, o attrHolder) error {
	as, err := o.Attrs()
	if err != nil {
		return err
	}
	for _, a := range as {
		if v, ok := jsonValue(a.Value); ok {
			m[a.Name] = v
		}
	}
	return nil
}

// tableRows reads every 1-D dataset of a group as a column and returns one
// object per row. Columns of unequal length give rows up to the longest,
// each with the cells that exist (the validator reports the mismatch from
// the structure).
func tableRows(g *h5.Group) ([]any, error) {
	kids, err := g.Children()
	if err != nil {
		return nil, err
	}
	type col struct {
		name string
		vals []any
	}
	var cols []col
	n := 0
	for _, k := range kids {
		if k.Kind != h5.KindDataset {
			continue
		}
		d, err := g.OpenDataset(k.Name, 0)
		if err != nil {
			return nil, err
		}
		var vals []any
		switch {
		case len(d.Shape) != 1:
		case d.Type == "bool":
			b, e := d.Bools()
			err = e
			for _, x := range b {
				vals = append(vals, x)
			}
		case strings.HasPrefix(d.Type, "string"):
			s, e := d.Strings()
			err = e
			for _, x := range s {
				vals = append(vals, x)
			}
		case strings.HasPrefix(d.Type, "int") || strings.HasPrefix(d.Type, "uint"):
			v, e := d.Int64s()
			err = e
			for _, x := range v {
				vals = append(vals, x)
			}
		case strings.HasPrefix(d.Type, "float"):
			v, e := d.Float64s()
			err = e
			for _, x := range v {
				vals = append(vals, x)
			}
		}
		d.Close()
		if err != nil {
			return nil, err
		}
		cols = append(cols, col{k.Name, vals})
		n = max(n, len(vals))
	}
	rows := make([]any, n)
	for i := range rows {
		r := map[string]any{}
		for _, c := range cols {
			if i < len(c.vals) {
				if v, ok := jsonValue(c.vals[i]); ok {
					r[c.name] = v
				}
			}
		}
		rows[i] = r
	}
	return rows, nil
}

// HDF5Path maps a JSON Pointer into the metadata view (RFC 6901, e.g.
// "/trials/0/arrays/1/sampling_rate_hz") to the HDF5 object it came from:
// "/trials/ramp_10/arrays/ta_grid@sampling_rate_hz". An attribute is
// written after "@"; a table cell as "column[row]", e.g.
// "/trials/ramp_10/arrays/ta_grid/channels/label[5]".
func HDF5Path(view map[string]any, pointer string) string {
	p := hdf5Path(view, pointer)
	if !strings.HasPrefix(p, "/") {
		p = "/" + p
	}
	return p
}

func hdf5Path(view map[string]any, pointer string) string {
	toks := strings.Split(strings.TrimPrefix(pointer, "/"), "/")
	for i, t := range toks {
		toks[i] = strings.ReplaceAll(strings.ReplaceAll(t, "~1", "/"), "~0", "~")
	}
	if pointer == "" || pointer == "/" {
		return "/"
	}
	var cur any = view
	p := ""
	for i := 0; i < len(toks); i++ {
		t := toks[i]
		m, _ := cur.(map[string]any)
		switch t {
		case "trials", "arrays", "decompositions":
			p += "/" + t
			if i+1 >= len(toks) {
				return p
			}
			list, _ := m[t].([]any)
			k, err := strconv.Atoi(toks[i+1])
			if err != nil || k < 0 || k >= len(list) {
				return p
			}
			el, _ := list[k].(map[string]any)
			name, _ := el["name"].(string)
			p += "/" + name
			cur = el
			i++
		case "channels", "units", "sources", "history":
			p += "/" + t
			if i+2 < len(toks) {
				return p + "/" + toks[i+2] + "[" + toks[i+1] + "]"
			}
			if i+1 < len(toks) {
				return p + "[" + toks[i+1] + "]"
			}
			return p
		case "study", "subject", "session", "provenance", "force", "force_target", "muaps", "derived":
			p += "/" + t
			cur = m[t]
		case "name":
			return p
		default:
			if p == "" {
				p = "/"
			}
			return p + "@" + t
		}
	}
	if p == "" {
		return "/"
	}
	return p
}
