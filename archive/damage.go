package archive

import (
	"fmt"
	"os"
	"path"
	"path/filepath"
	"strings"

	"muarc/archive/bagit"
)

// acceptedDamageLabel is the bag-info.txt label naming recordings packed
// with --accept-damaged although they fail integrity checks.
const acceptedDamageLabel = "Accepted-Damage"

// acceptedDamageText follows the recording's path (relative to
// data/recordings/) in an Accepted-Damage value.
const acceptedDamageText = " fails its integrity checks and was packed as it is (--accept-damaged)"

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
			"%s%s: %s", f.Path, acceptedDamageText, strings.Join(f.Damage, "; "))})
	}
	return out
}

// acceptedInBag gives the bag-relative paths of the recordings that the
// deposit's bag-info.txt names under Accepted-Damage and whose bytes the
// bag check found unchanged (no problem names them): their damage is the
// one accepted at packing. A bag-info.txt that cannot be read accepts
// nothing.
func acceptedInBag(dir string, problems []bagit.Problem) map[string]bool {
	f, err := os.Open(filepath.Join(dir, "bag-info.txt"))
	if err != nil {
		return nil
	}
	defer f.Close()
	fields, err := bagit.ParseInfo(f, "bag-info.txt")
	if err != nil {
		return nil
	}
	changed := map[string]bool{}
	for _, p := range problems {
		changed[p.File] = true
	}
	out := map[string]bool{}
	for _, fl := range fields {
		if !strings.EqualFold(fl.Label, acceptedDamageLabel) {
			continue
		}
		rel, _, ok := strings.Cut(fl.Value, acceptedDamageText)
		if !ok {
			continue
		}
		p := path.Join("data", RecordingsDir, rel)
		if !changed[p] {
			out[p] = true
		}
	}
	return out
}
