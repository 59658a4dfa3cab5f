package archive

import (
	"fmt"
	"strings"

	"muarc/archive/bagit"
)

// acceptedDamageLabel is the bag-info.txt label naming recordings packed
// with --accept-damaged although they fail integrity checks.
const acceptedDamageLabel = "Accepted-Damage"

// acceptedDamage reports whether fr's validation errors are all integrity
// damage that the options accept.
func (p *packer) acceptedDamage(fr *FileRecord) bool {
	return p.opt.AcceptDamaged && len(fr.Damage) > 0 && fr.ValidationErrors == len(fr.Damage)
}

// acceptedDamageFields gives one bag-info.txt field per recording packed
// despite integrity damage, saying what failed: whoever reuses the deposit
// learns that these bytes are not what was recorded.
func acceptedDamageFields(files []FileRecord) []bagit.Field {
	var out []bagit.Field
	for _, f := range files {
		if f.Status != StatusOK || len(f.Damage) == 0 {
			continue
		}
		out = append(out, bagit.Field{Label: acceptedDamageLabel, Value: fmt.Sprintf(
			"%s fails its integrity checks and was packed as it is (--accept-damaged): %s", f.Path, strings.Join(f.Damage, "; "))})
	}
	return out
}
