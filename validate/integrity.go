package validate

import (
	"fmt"
	"strings"
	"unicode/utf8"

	"muarc/h5"
	"muarc/recfile"
	"muarc/schema"
)

// checkMetadataIntegrity recomputes the metadata digest (recfile
// .CanonicalMetadata, since layout 1.1) and compares it with the stored
// one, and finds strings tagged UTF-8 that are not valid UTF-8. version is
// the file's layout_version.
func checkMetadataIntegrity(objs []h5.MetaObject, version string, add addFunc) {
	for _, o := range objs {
		for _, a := range o.Attrs {
			if !a.UTF8 {
				continue
			}
			var vals []string
			switch v := a.Value.(type) {
			case string:
				vals = []string{v}
			case []string:
				vals = v
			}
			for i, s := range vals {
				if !utf8.ValidString(s) {
					at := o.Path + "@" + a.Name
					if len(vals) > 1 {
						at += fmt.Sprintf("[%d]", i)
					}
					add("strings.utf8", at, "", "the string's bytes were damaged or written by a program that ignored the UTF-8 tag; restore the file from a copy",
						"the value tagged UTF-8 is not valid UTF-8: %q", s)
				}
			}
		}
		if o.StringDataset && o.UTF8 {
			for i, s := range o.Strings {
				if !utf8.ValidString(s) {
					add("strings.utf8", fmt.Sprintf("%s[%d]", o.Path, i), "", "restore the file from a copy",
						"the value tagged UTF-8 is not valid UTF-8: %q", s)
				}
			}
		}
	}
	stored := recfile.StoredDigest(objs)
	if stored == "" {
		if digestRequired(version) {
			add("integrity.metadata_digest", "/@"+recfile.AttrMetadataSHA256, "", "files of layout 1.1 and later carry it; it was removed, or the file was not written by muarc",
				"root attribute %s is missing", recfile.AttrMetadataSHA256)
		} else {
			add("integrity.digest_absent", "/", "", "rewrite the file with a current muarc (e.g. muarc deidentify or muarc stats --write) to add one",
				"layout %s carries no metadata digest: damage to attributes and strings cannot be found", orUnknown(version))
		}
		return
	}
	if got := recfile.MetadataDigest(objs); got != strings.ToLower(stored) {
		add("integrity.metadata_digest", "/@"+recfile.AttrMetadataSHA256, "", "an attribute or a string (labels, units, study text, provenance) changed since the file was written; HDF5 keeps no checksum over them. Restore the file from a copy",
			"the metadata no longer matches its digest: stored %s, computed %s", stored, got)
	}
}

func orUnknown(v string) string {
	if v == "" {
		return "unknown"
	}
	return v
}

// digestRequired: layout 1.1 and later carry metadata_sha256.
func digestRequired(version string) bool {
	maj, min, err := schema.ParseVersion(version)
	return err == nil && (maj > 1 || maj == 1 && min >= 1)
}

// integrityChecks are the checks whose errors mean the file's bytes are
// damaged (rather than its content breaking a rule): chunk checksums, the
// HDF5 structure the layout needs, the metadata digest and string
// encoding, and reads that failed.
var integrityChecks = []string{"checksum.*", "integrity.*", "strings.*", "structure.missing", "structure.type", "structure.shape",
	"content.read", "layout.*", "channels.count", "offsets.*", "units.column_length"}

// IsIntegrityCheck reports whether a check id is one of the integrity
// checks (see Report.Damage).
func IsIntegrityCheck(id string) bool {
	for _, p := range integrityChecks {
		if matchCheck(p, id) {
			return true
		}
	}
	return false
}

// Damage lists what makes the file's bytes untrustworthy: its read error
// (as a finding of check "content.read") and every error finding of an
// integrity check. deidentify and pack refuse a file with damage unless
// told to accept it.
func (r *Report) Damage() []Finding {
	var out []Finding
	if r.ReadError != "" {
		out = append(out, Finding{Severity: Error, Check: "content.read", Message: r.ReadError, HDF5Path: "/"})
	}
	for _, f := range r.Findings {
		if f.Severity == Error && IsIntegrityCheck(f.Check) {
			out = append(out, f)
		}
	}
	return out
}

// DamageText is Damage as one line per finding ("check at path: message"),
// at most max lines and a count of the rest.
func (r *Report) DamageText(max int) string {
	d := r.Damage()
	var lines []string
	for i, f := range d {
		if i == max {
			lines = append(lines, fmt.Sprintf("and %d more", len(d)-max))
			break
		}
		at := f.HDF5Path
		if at == "" {
			at = "/"
		}
		lines = append(lines, fmt.Sprintf("%s at %s: %s", f.Check, at, f.Message))
	}
	return strings.Join(lines, "; ")
}
