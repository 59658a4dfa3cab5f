package recfile

import (
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"muarc/h5"
	"muarc/schema"
)

// TestMetadataDigestByH5py recomputes the metadata digest of files with
// awkward text (non-ASCII, characters above U+FFFF, control characters,
// quotes, backslashes, bytes that are not UTF-8) with the reference
// implementation in schema/LAYOUT.md, which reads the file with h5py
// (Debian python3-h5py) and serialises with Python's json module: the
// outside reader must agree with the digest muarc wrote and with
// MetadataDigest.
func TestMetadataDigestByH5py(t *testing.T) {
	py := needH5py(t)
	var ref string
	for _, b := range pythonBlocks(schema.Layout) {
		if strings.Contains(b, "metadata_sha256") && strings.Contains(b, "hashlib") {
			ref = b
		}
	}
	if ref == "" {
		t.Fatal("LAYOUT.md has no reference implementation of the digest")
	}
	texts := []string{
		"plain",
		"Müller – 𝄞 \"q\" \\ tab\there\nnew\rline\bback\fform\x01\x1f\x7f end",
		"damaged \xff\xfe then \xe2\x82 truncated, \xed\xa0\x80 a surrogate, ok é",
		"\u2028\u2029 \ufeff \U0001F600",
	}
	dir := t.TempDir()
	for i, s := range texts {
		rec := fixture()
		rec.Study.Title = s
		rec.Subject.Notes = s
		rec.Trials[0].Arrays[0].Channels[0].Label = "ch " + s
		p := filepath.Join(dir, "d"+string(rune('0'+i))+".h5")
		if err := Write(p, rec, WriteOptions{}); err != nil {
			t.Fatalf("text %d: %v", i, err)
		}
		out, err := exec.Command(py, "-c", "import sys\npath = sys.argv[1]\n"+ref+"\nprint(digest)", p).CombinedOutput()
		if err != nil {
			t.Fatalf("text %d: the reference failed: %v\n%s", i, err, out)
		}
		objs, err := h5.Metadata(p)
		if err != nil {
			t.Fatal(err)
		}
		if got, want := MetadataDigest(objs), strings.TrimSpace(string(out)); got != want || StoredDigest(objs) != want {
			t.Fatalf("text %d: muarc %s, stored %s, h5py reference %s", i, got, StoredDigest(objs), want)
		}
	}
}
