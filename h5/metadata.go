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
