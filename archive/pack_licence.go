// The deposit's licence.

package archive

import (
	"fmt"
	"regexp"
	"strings"
)

var spdxID = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9.+-]*( (AND|OR|WITH) [A-Za-z0-9][A-Za-z0-9.+-]*)*$`)

// licence picks the deposit licence: the option, else the recordings'
// agreed study licence.
func (p *packer) licence(sums []RecordingSummary) (string, error) {
	seen := map[string][]string{}
	for _, s := range sums {
		if s.Study.License != "" {
			seen[s.Study.License] = append(seen[s.Study.License], s.File)
		}
	}
	if l := p.opt.Licence; l != "" {
		if !spdxID.MatchString(l) {
			return "", fmt.Errorf("--licence %q is not an SPDX licence identifier or expression (e.g. CC-BY-4.0, CC0-1.0)", l)
		}
		for other, fs := range seen {
			if other != l {
				p.note("%d recordings name licence %s in /study; the deposit is licensed %s as --licence asks", len(fs), other, l)
			}
		}
		return l, nil
	}
	switch len(seen) {
	case 0:
		return "", fmt.Errorf("no licence: the recordings' /study has none; give --licence SPDX (e.g. CC-BY-4.0)")
	case 1:
		for l := range seen {
			if !spdxID.MatchString(l) {
				return "", fmt.Errorf("study licence %q is not an SPDX identifier; give --licence SPDX", l)
			}
			return l, nil
		}
	}
	var parts []string
	for _, l := range sortedKeys(seen) {
		parts = append(parts, fmt.Sprintf("%s (%s)", l, seen[l][0]))
	}
	return "", fmt.Errorf("the recordings name different licences: %s; give --licence SPDX for the deposit", strings.Join(parts, ", "))
}
