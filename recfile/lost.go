package recfile

import (
	"sort"
	"strings"

	"muarc/h5"
)

// Lost lists what the file at src holds that the file at dst does not:
// groups, datasets and links by HDF5 path, attributes as "PATH@NAME".
// Paths inside a derived/ group are left out (muarc writes those anew).
// A command that rewrites a recording compares the old file with the new
// one before it replaces the old: anything muarc's model does not carry (a
// lab's own group, a trigger dataset, an external link) would otherwise be
// lost without a word.
func Lost(src, dst string) ([]string, error) {
	have := func(path string) (map[string]bool, error) {
		objs, err := h5.Describe(path)
		if err != nil {
			return nil, err
		}
		m := map[string]bool{}
		for _, o := range objs {
			m[o.Path] = true
			for _, a := range o.Attrs {
				m[o.Path+"@"+a.Name] = true
			}
		}
		return m, nil
	}
	old, err := have(src)
	if err != nil {
		return nil, err
	}
	now, err := have(dst)
	if err != nil {
		return nil, err
	}
	var lost []string
	for p := range old {
		base, _, _ := strings.Cut(p, "@")
		if !now[p] && !strings.Contains(base+"/", "/derived/") {
			lost = append(lost, p)
		}
	}
	sort.Strings(lost)
	return lost, nil
}
