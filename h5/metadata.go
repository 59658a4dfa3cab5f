package h5

import "strings"

// MetaObject is one group or dataset with everything the metadata digest
// of a recording covers (schema/LAYOUT.md, "Metadata digest"): its
// attributes and, for a string dataset, its values.
type MetaObject struct {
	Path      string
	IsDataset bool
	Attrs     []Attr
	// StringDataset is set for datasets of a string type; Strings then
	// holds their values in storage order and UTF8 says whether the type is
	// tagged UTF-8.
	StringDataset bool
	Strings       []string
	UTF8          bool
}

// Metadata reads every group and dataset of the open file, depth first,
// with all attributes and the values of string datasets. It reads no
// numeric dataset, so it is cheap next to the samples.
func (f *File) Metadata() ([]MetaObject, error) {
	root, err := f.Root()
	if err != nil {
		return nil, err
	}
	defer root.Close()
	var out []MetaObject
	err = walk(root, func(g *Group) error {
		attrs, err := g.Attrs()
		out = append(out, MetaObject{Path: g.path, Attrs: attrs})
		return err
	}, func(d *Dataset) error {
		attrs, err := d.Attrs()
		if err != nil {
			return err
		}
		o := MetaObject{Path: d.path, IsDataset: true, Attrs: attrs}
		if strings.HasPrefix(d.Type, "string") {
			o.StringDataset, o.UTF8 = true, d.UTF8
			if o.Strings, err = d.Strings(); err != nil {
				return err
			}
		}
		out = append(out, o)
		return nil
	}, nil)
	return out, err
}

// Metadata opens the file read-only and returns File.Metadata.
func Metadata(name string) ([]MetaObject, error) {
	f, err := Open(name)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return f.Metadata()
}

// Survey walks the open file once and returns what Describe and Metadata
// return, so that a caller needing both (validate) opens every object
// once. A failure to read an object's attributes or layout ends the walk
// (err, as Describe); a failure to read a string dataset's values only
// makes metaErr (as Metadata would fail) and the walk goes on, so objs is
// still complete.
func (f *File) Survey() (objs []Object, meta []MetaObject, metaErr, err error) {
	root, err := f.Root()
	if err != nil {
		return nil, nil, nil, err
	}
	defer root.Close()
	err = walk(root, func(g *Group) error {
		attrs, err := g.Attrs()
		objs = append(objs, Object{Path: g.path, Attrs: attrs})
		meta = append(meta, MetaObject{Path: g.path, Attrs: attrs})
		return err
	}, func(d *Dataset) error {
		o, err := describeDataset(d)
		objs = append(objs, o)
		if err != nil {
			return err
		}
		m := MetaObject{Path: d.path, IsDataset: true, Attrs: o.Attrs}
		if strings.HasPrefix(d.Type, "string") && metaErr == nil {
			m.StringDataset, m.UTF8 = true, d.UTF8
			m.Strings, metaErr = d.Strings()
		}
		meta = append(meta, m)
		return nil
	}, func(path string) {
		objs = append(objs, Object{Path: path, Type: "link"})
	})
	if err != nil && metaErr == nil {
		metaErr = err
	}
	return objs, meta, metaErr, err
}
