package validate

import (
	"slices"
	"testing"

	"muarc/record"
)

// TestIntegrityChecks: the metadata digest's absence is a note in a layout
// 1.0 file and an error from 1.1 on (schema/LAYOUT.md, "Metadata digest");
// an edit of a string is found by the digest; a channel label used twice
// and a string tagged UTF-8 that is not UTF-8 are errors. Edits are made
// with h5py (Debian python3-h5py), a writer outside muarc.
func TestIntegrityChecks(t *testing.T) {
	dir := t.TempDir()
	snippets := []string{
		"f.attrs['layout_version'] = '1.0'; del f.attrs['metadata_sha256']",
		"del f.attrs['metadata_sha256']",
		"f['study'].attrs['contact'] = 'someone else'",
		"",
	}
	paths := make([]string, len(snippets))
	for i := range snippets {
		p, err := writeRecording(t, dir, "i"+string(rune('0'+i)), nil)
		if err != nil {
			t.Fatal(err)
		}
		paths[i] = p
	}
	h5pyEdits(t, paths[:3], snippets[:3])
	want := []struct {
		check string
		sev   Severity
	}{
		{"integrity.digest_absent", Note},
		{"integrity.metadata_digest", Error},
		{"integrity.metadata_digest", Error},
	}
	for i, w := range want {
		r := File(paths[i], DefaultOptions())
		found := false
		for _, f := range r.Findings {
			if f.Check == w.check && f.Severity == w.sev {
				found = true
			}
			if i == 0 && f.Check == "integrity.metadata_digest" {
				t.Fatalf("a 1.0 file without a digest got an error: %v", f)
			}
		}
		if !found {
			t.Errorf("edit %q: want %s %s, got %v", snippets[i], w.sev, w.check, r.Findings)
		}
	}
	if r := File(paths[3], DefaultOptions()); slices.ContainsFunc(r.Findings, func(f Finding) bool {
		return f.Check == "integrity.metadata_digest" || f.Check == "integrity.digest_absent"
	}) {
		t.Fatalf("an untouched file: %v", r.Findings)
	}

	dup, err := writeRecording(t, dir, "dup", func(r *record.Recording) {
		ch := r.Trials[0].Arrays[0].Channels
		ch[3].Label = ch[2].Label
	})
	if err != nil {
		t.Fatal(err)
	}
	if r := File(dup, DefaultOptions()); !slices.Contains(checksOf(r.Findings, Error), "channels.label_duplicate") {
		t.Fatalf("duplicate label not found: %v", r.Findings)
	}
	bad, err := writeRecording(t, dir, "utf8", func(r *record.Recording) { r.Study.Title = "caf\xe9 au lait" })
	if err != nil {
		t.Fatal(err)
	}
	r := File(bad, DefaultOptions())
	if !slices.Contains(checksOf(r.Findings, Error), "strings.utf8") {
		t.Fatalf("invalid UTF-8 not found: %v", r.Findings)
	}
	// Written that way on purpose, the digest itself still matches.
	if slices.Contains(checksOf(r.Findings, Error), "integrity.metadata_digest") {
		t.Fatalf("digest mismatch on a file written as it is: %v", r.Findings)
	}
}
