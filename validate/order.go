package validate

import (
	"fmt"

	"muarc/schema"
)

// listPositions checks that every trial, array and decomposition group
// carries list_position equal to its place among its siblings in creation
// order (layout 1.1, "Order" in LAYOUT.md). Readers that list members
// alphabetically rely on it; a file of layout 1.0 has none and is not
// asked for one.
func (s *structure) listPositions() {
	_, minor, err := schema.ParseVersion(s.version)
	wanted := err == nil && minor >= 1
	check := func(list, jp string) {
		for i, name := range s.t.kids[list] {
			o, ok := s.t.group(list + "/" + name)
			if !ok {
				continue
			}
			p, j := o.Path+"@list_position", fmt.Sprintf("%s/%d", jp, i)
			a, ok := attr(o, "list_position")
			switch {
			case !ok && wanted:
				s.add("structure.list_position", p, j, "rewrite the file with muarc; readers that list members alphabetically need list_position to find the order",
					"%s has no list_position attribute (layout %s wants one)", o.Path, s.version)
			case ok && a.Value != any(int64(i)):
				s.add("structure.list_position", p, j, "the file's creation order and list_position disagree; rewrite the file with muarc",
					"%s has list_position %v but is member %d of %s in creation order", o.Path, a.Value, i, list)
			}
		}
	}
	check("/trials", "/trials")
	for ti, tn := range s.t.kids["/trials"] {
		ap, aj := "/trials/"+tn+"/arrays", fmt.Sprintf("/trials/%d/arrays", ti)
		check(ap, aj)
		for ai, an := range s.t.kids[ap] {
			check(ap+"/"+an+"/decompositions", fmt.Sprintf("%s/%d/decompositions", aj, ai))
		}
	}
}
