package bagit

import (
	"bytes"
	"crypto/sha256"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

// FIPS 180-4 SHA-256 examples (NIST "Cryptographic Standards and Guidelines:
// Examples with Intermediate Values", SHA256.pdf, and FIPS 180-2 appendix B):
// "abc", the 448-bit message, and one million 'a'.
var fipsVectors = []struct {
	name, msg, sum string
}{
	{"abc", "abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"},
	{"448-bit", "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq", "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"},
	{"million-a", strings.Repeat("a", 1000000), "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0"},
}

func TestHashFileFIPS180_4(t *testing.T) {
	dir := t.TempDir()
	for _, v := range fipsVectors {
		p := filepath.Join(dir, v.name)
		if err := os.WriteFile(p, []byte(v.msg), 0o644); err != nil {
			t.Fatal(err)
		}
		// A small buffer makes the million 'a' cross many reads.
		for _, buf := range [][]byte{nil, make([]byte, 7)} {
			sum, n, err := HashFile(p, buf)
			if err != nil {
				t.Fatal(err)
			}
			if sum != v.sum || n != int64(len(v.msg)) {
				t.Errorf("%s (buf %d): got %s %d bytes, FIPS 180-4 gives %s", v.name, len(buf), sum, n, v.sum)
			}
		}
	}
}

// RFC 8493 section 2.1.1: bagit.txt is exactly these two lines.
func TestDeclarationRFC8493(t *testing.T) {
	if Declaration != "BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n" {
		t.Fatalf("declaration %q", Declaration)
	}
}

// RFC 8493 section 2.1.3: CR, LF and % in a manifest path are written as
// %0D, %0A and %25 (from memory: only these three are encoded).
func TestPathEncodingRFC8493(t *testing.T) {
	cases := []struct{ raw, enc string }{
		{"data/plain.h5", "data/plain.h5"},
		{"data/a%b", "data/a%25b"},
		{"data/line\nbreak", "data/line%0Abreak"},
		{"data/cr\rhere", "data/cr%0Dhere"},
		{"data/100%\r\n", "data/100%25%0D%0A"},
		{"data/space name.txt", "data/space name.txt"},
	}
	for _, c := range cases {
		if got := EncodePath(c.raw); got != c.enc {
			t.Errorf("EncodePath(%q) = %q, want %q", c.raw, got, c.enc)
		}
		back, err := DecodePath(c.enc)
		if err != nil || back != c.raw {
			t.Errorf("DecodePath(%q) = %q, %v; want %q", c.enc, back, err, c.raw)
		}
	}
	// Lower-case hex is read too; other escapes are refused, not guessed.
	if got, err := DecodePath("data/a%0a"); err != nil || got != "data/a\n" {
		t.Errorf("lower-case escape: %q %v", got, err)
	}
	for _, bad := range []string{"data/%20", "data/%2", "data/%"} {
		if _, err := DecodePath(bad); err == nil {
			t.Errorf("DecodePath(%q) accepted", bad)
		}
	}
}

// RFC 8493 section 2.1.3: a manifest line is the checksum, linear white
// space, and the path; the example bag in section 4 (from memory) uses one
// space, sha256sum writes two; both are read.
func TestManifestFormat(t *testing.T) {
	a := strings.Repeat("a", 64)
	b := strings.Repeat("b", 64)
	got := string(FormatManifest([]Entry{{"data/z.h5", b}, {"data/a\nb.h5", a}}))
	want := a + "  data/a%0Ab.h5\n" + b + "  data/z.h5\n"
	if got != want {
		t.Fatalf("manifest\n%q\nwant\n%q", got, want)
	}
	in := a + " data/one space\r\n" + b + "\tdata/tab\n\n"
	es, err := ParseManifest(strings.NewReader(in), "m", 64)
	if err != nil {
		t.Fatal(err)
	}
	if len(es) != 2 || es[0].Path != "data/one space" || es[1].Path != "data/tab" || es[1].Sum != b {
		t.Fatalf("parsed %+v", es)
	}
	bad := []struct{ text, why string }{
		{"abc data/x\n", "short checksum"},
		{a + "\n", "no path"},
		{a + "  ../outside\n", "leaves the bag"},
		{a + "  /abs\n", "absolute"},
		{a + "  data/x\n" + b + "  data/x\n", "listed twice"},
		{a + "  data/%41\n", "unknown escape"},
	}
	for _, c := range bad {
		_, err := ParseManifest(strings.NewReader(c.text), "m.txt", 64)
		if err == nil {
			t.Errorf("%s: accepted %q", c.why, c.text)
			continue
		}
		if !strings.HasPrefix(err.Error(), "m.txt:") {
			t.Errorf("%s: error %q does not name the file and line", c.why, err)
		}
	}
}

// RFC 8493 section 2.2.2: Payload-Oxum is "<octets>.<streams>".
func TestPayloadOxum(t *testing.T) {
	if s := PayloadOxum(279164409, 1967); s != "279164409.1967" {
		t.Fatal(s)
	}
	o, n, err := ParsePayloadOxum("279164409.1967")
	if err != nil || o != 279164409 || n != 1967 {
		t.Fatal(o, n, err)
	}
	for _, bad := range []string{"", "12", "a.b", "1.-2", "1.2.3"} {
		if _, _, err := ParsePayloadOxum(bad); err == nil {
			t.Errorf("accepted %q", bad)
		}
	}
}

// RFC 8493 section 2.2.2: labels repeat, values fold onto lines that start
// with white space.
func TestInfoRoundTrip(t *testing.T) {
	fields := []Field{{"Contact-Name", "Data steward"}, {"External-Description", "line one\nline two"}, {"Contact-Name", "Second"}}
	text := FormatInfo(fields)
	if string(text) != "Contact-Name: Data steward\nExternal-Description: line one\n  line two\nContact-Name: Second\n" {
		t.Fatalf("%q", text)
	}
	back, err := ParseInfo(bytes.NewReader(text), "bag-info.txt")
	if err != nil {
		t.Fatal(err)
	}
	if len(back) != 3 || back[1].Value != "line one\nline two" {
		t.Fatalf("%+v", back)
	}
	if v, ok := Lookup(back, "contact-name"); !ok || v != "Data steward" {
		t.Fatal(v, ok)
	}
	if _, err := ParseInfo(strings.NewReader(" leading\n"), "x"); err == nil {
		t.Fatal("continuation before a label accepted")
	}
}

// makeBag writes a small bag in the shape of the RFC 8493 section 4.1
// example (from memory: data/ with a nested folder, manifest, bagit.txt).
func makeBag(t *testing.T, withTag bool) string {
	t.Helper()
	dir := t.TempDir()
	files := map[string]string{
		"data/27613-h/images/q172.png": "not really a picture\n",
		"data/27613-h/images/q172.txt": "caption\n",
		"data/odd%name.txt":            "percent\n",
	}
	var es []Entry
	var octets int64
	for rel, content := range files {
		p := filepath.Join(dir, filepath.FromSlash(rel))
		os.MkdirAll(filepath.Dir(p), 0o755)
		os.WriteFile(p, []byte(content), 0o644)
		s := sha256.Sum256([]byte(content))
		es = append(es, Entry{rel, hexOf(s[:])})
		octets += int64(len(content))
	}
	os.WriteFile(filepath.Join(dir, DeclarationFile), []byte(Declaration), 0o644)
	man := FormatManifest(es)
	os.WriteFile(filepath.Join(dir, ManifestName("sha256")), man, 0o644)
	info := FormatInfo([]Field{{"Payload-Oxum", PayloadOxum(octets, int64(len(files)))}})
	os.WriteFile(filepath.Join(dir, InfoFile), info, 0o644)
	if withTag {
		var tes []Entry
		for _, n := range []string{DeclarationFile, InfoFile, ManifestName("sha256")} {
			b, _ := os.ReadFile(filepath.Join(dir, n))
			s := sha256.Sum256(b)
			tes = append(tes, Entry{n, hexOf(s[:])})
		}
		os.WriteFile(filepath.Join(dir, TagManifestName("sha256")), FormatManifest(tes), 0o644)
	}
	return dir
}

func hexOf(b []byte) string {
	const digits = "0123456789abcdef"
	out := make([]byte, 2*len(b))
	for i, c := range b {
		out[2*i], out[2*i+1] = digits[c>>4], digits[c&15]
	}
	return string(out)
}

func verifyKinds(t *testing.T, dir string) map[string]string {
	t.Helper()
	res, err := Verify(dir, VerifyOptions{Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	kinds := map[string]string{}
	for _, p := range res.Problems {
		kinds[p.Kind] = p.File
	}
	return kinds
}

func TestVerifyFindsEachDamage(t *testing.T) {
	dir := makeBag(t, true)
	if k := verifyKinds(t, dir); len(k) != 0 {
		t.Fatalf("a good bag gave %v", k)
	}
	cases := []struct {
		name, kind, file string
		damage           func(dir string)
	}{
		{"byte flipped", KindMismatch, "data/27613-h/images/q172.txt", func(d string) {
			p := filepath.Join(d, "data/27613-h/images/q172.txt")
			b, _ := os.ReadFile(p)
			b[0] ^= 1
			os.WriteFile(p, b, 0o644)
		}},
		{"file removed", KindMissing, "data/odd%name.txt", func(d string) { os.Remove(filepath.Join(d, "data/odd%name.txt")) }},
		{"file added", KindUnlisted, "data/extra.txt", func(d string) { os.WriteFile(filepath.Join(d, "data/extra.txt"), []byte("x"), 0o644) }},
		{"declaration changed", KindDeclaration, DeclarationFile, func(d string) {
			os.WriteFile(filepath.Join(d, DeclarationFile), []byte("BagIt-Version: 2.0\nTag-File-Character-Encoding: UTF-8\n"), 0o644)
		}},
		{"tag file edited", KindMismatch, InfoFile, func(d string) {
			f, _ := os.OpenFile(filepath.Join(d, InfoFile), os.O_APPEND|os.O_WRONLY, 0)
			f.WriteString("Contact-Name: someone\n")
			f.Close()
		}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := makeBag(t, true)
			c.damage(d)
			k := verifyKinds(t, d)
			if f, ok := k[c.kind]; !ok || f != c.file {
				t.Fatalf("want %s on %s, got %v", c.kind, c.file, k)
			}
		})
	}
	// The file added also breaks Payload-Oxum.
	d := makeBag(t, false)
	os.WriteFile(filepath.Join(d, "data/extra.txt"), []byte("x"), 0o644)
	if _, ok := verifyKinds(t, d)[KindOxum]; !ok {
		t.Fatal("Payload-Oxum not checked")
	}
}

// A manifest from this package is read by coreutils sha256sum -c, run in
// the bag's top folder (a general-purpose reference tool).
func TestSha256sumReadsManifest(t *testing.T) {
	if _, err := exec.LookPath("sha256sum"); err != nil {
		if os.Getenv("CI") != "" {
			t.Fatal("sha256sum (coreutils) missing under CI")
		}
		t.Skip("sha256sum not found")
	}
	dir := makeBag(t, true)
	// sha256sum does not know the percent-encoding; drop that file here.
	os.Remove(filepath.Join(dir, "data/odd%name.txt"))
	res, _ := Verify(dir, VerifyOptions{})
	if len(res.Problems) == 0 {
		t.Fatal("removed file not found")
	}
	man, _ := os.ReadFile(filepath.Join(dir, ManifestName("sha256")))
	var keep []string
	for _, l := range strings.SplitAfter(string(man), "\n") {
		if l != "" && !strings.Contains(l, "%") {
			keep = append(keep, l)
		}
	}
	os.WriteFile(filepath.Join(dir, "check.txt"), []byte(strings.Join(keep, "")), 0o644)
	cmd := exec.Command("sha256sum", "--strict", "-c", "check.txt")
	cmd.Dir = dir
	out, err := cmd.CombinedOutput()
	if err != nil || strings.Count(string(out), ": OK") != 2 {
		t.Fatalf("sha256sum -c: %v\n%s", err, out)
	}
	cmd = exec.Command("sha256sum", "--strict", "-c", TagManifestName("sha256"))
	cmd.Dir = dir
	if out, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("sha256sum -c tag manifest: %v\n%s", err, out)
	}
}

func FuzzParseManifest(f *testing.F) {
	f.Add(strings.Repeat("a", 64) + "  data/x\n")
	f.Add(strings.Repeat("0", 64) + " data/%0A%25\r\n")
	f.Add("")
	f.Add("zz  ../x\n")
	f.Fuzz(func(t *testing.T, s string) {
		es, err := ParseManifest(strings.NewReader(s), "m", 64)
		if err != nil {
			return
		}
		// What parses renders back and parses to the same entries.
		again, err := ParseManifest(bytes.NewReader(FormatManifest(es)), "m", 64)
		if err != nil || len(again) != len(es) {
			t.Fatalf("round trip: %v %d/%d", err, len(again), len(es))
		}
	})
}

func FuzzParseInfo(f *testing.F) {
	f.Add("Payload-Oxum: 1.1\nContact-Name: x\n  y\n")
	f.Add(" bad\n")
	f.Add("no colon\n")
	f.Fuzz(func(t *testing.T, s string) {
		fields, err := ParseInfo(strings.NewReader(s), "i")
		if err != nil {
			return
		}
		for _, fl := range fields {
			if fl.Label == "" {
				t.Fatal("empty label")
			}
		}
	})
}

func FuzzDecodePath(f *testing.F) {
	f.Add("data/a%25b%0A")
	f.Add("%")
	f.Fuzz(func(t *testing.T, s string) {
		d, err := DecodePath(s)
		if err != nil {
			return
		}
		if back, err := DecodePath(EncodePath(d)); err != nil || back != d {
			t.Fatalf("%q -> %q -> %q (%v)", s, d, back, err)
		}
	})
}

func FuzzParsePayloadOxum(f *testing.F) {
	f.Add("279164409.1967")
	f.Add("1.")
	f.Fuzz(func(t *testing.T, s string) {
		o, n, err := ParsePayloadOxum(s)
		if err != nil {
			return
		}
		if back, _, _ := ParsePayloadOxum(PayloadOxum(o, n)); back != o {
			t.Fatalf("%q -> %d.%d", s, o, n)
		}
	})
}

// RFC 8493 section 2.1.1 (from memory; no copy of the RFC on this machine):
// bagit.txt is UTF-8 without a byte-order mark and has exactly two lines in
// this order, "BagIt-Version: M.N" and "Tag-File-Character-Encoding:
// ENCODING"; lines end in LF, CR or CRLF (the line-ending rule of the
// RFC's text files, also from memory).
func TestDeclarationExactForm(t *testing.T) {
	good := []struct{ text, version, enc string }{
		{"BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n", "1.0", "UTF-8"},
		{"BagIt-Version: 1.0\r\nTag-File-Character-Encoding: UTF-8\r\n", "1.0", "UTF-8"},
		{"BagIt-Version: 1.0\rTag-File-Character-Encoding: UTF-8\r", "1.0", "UTF-8"},
		{"BagIt-Version: 0.97\nTag-File-Character-Encoding: UTF-8", "0.97", "UTF-8"},
		{"BagIt-Version: 1.0\nTag-File-Character-Encoding: ISO-8859-1\n", "1.0", "ISO-8859-1"},
	}
	for _, g := range good {
		v, e, err := ParseDeclaration([]byte(g.text), "bagit.txt")
		if err != nil || v != g.version || e != g.enc {
			t.Errorf("%q: got %q %q %v, want %q %q", g.text, v, e, err, g.version, g.enc)
		}
	}
	bad := []struct {
		text string
		line int
		says string // in the message
	}{
		{"BagIt-Version : 1.0\nTag-File-Character-Encoding: UTF-8\n", 1, `write "BagIt-Version: 1.0"`},
		{"BagIt-Version:1.0\nTag-File-Character-Encoding: UTF-8\n", 1, "one space must follow the colon"},
		{"BagIt-Version:  1.0\nTag-File-Character-Encoding: UTF-8\n", 1, "one space must follow the colon"},
		{"BagIt-Version: 1.0 \nTag-File-Character-Encoding: UTF-8\n", 1, "one space must follow the colon"},
		{"bagit-version: 1.0\nTag-File-Character-Encoding: UTF-8\n", 1, `must read "BagIt-Version" exactly`},
		{" BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n", 1, `must read "BagIt-Version" exactly`},
		{"BagIt-Version: one\nTag-File-Character-Encoding: UTF-8\n", 1, "value must have the form M.N"},
		{"Tag-File-Character-Encoding: UTF-8\nBagIt-Version: 1.0\n", 1, `line must be "BagIt-Version: M.N"`},
		{"BagIt-Version: 1.0\nTag-File-Character-Encoding : UTF-8\n", 2, `write "Tag-File-Character-Encoding: UTF-8"`},
		{"BagIt-Version: 1.0\n\nTag-File-Character-Encoding: UTF-8\n", 2, "Tag-File-Character-Encoding: ENCODING"},
		{"BagIt-Version: 1.0\n", 2, "missing"},
		{"BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\nContact-Name: x\n", 3, "exactly two lines"},
		{"BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n\n", 3, "exactly two lines"},
		{"\xef\xbb\xbfBagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n", 1, "byte-order mark"},
		{"BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\xff\n", 1, "not UTF-8"},
		{"", 1, "empty"},
	}
	for _, b := range bad {
		_, _, err := ParseDeclaration([]byte(b.text), "bagit.txt")
		le, ok := err.(*LineError)
		if !ok || le.Line != b.line || !strings.Contains(le.Msg, b.says) {
			t.Errorf("%q: got %v, want line %d saying %q", b.text, err, b.line, b.says)
		}
	}
}

// Verify names the line of a bagit.txt that is not in the exact form
// (the space before the colon is the case RFC 8493 section 2.1.1 rules out
// by giving the form "BagIt-Version: M.N").
func TestVerifyRefusesLooseDeclaration(t *testing.T) {
	d := makeBag(t, false)
	os.WriteFile(filepath.Join(d, DeclarationFile), []byte("BagIt-Version : 1.0\nTag-File-Character-Encoding: UTF-8\n"), 0o644)
	res, err := Verify(d, VerifyOptions{})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.Problems) != 1 || res.Problems[0].Kind != KindDeclaration || !strings.HasPrefix(res.Problems[0].Msg, `line 1: "BagIt-Version : 1.0"`) {
		t.Fatalf("want one declaration problem naming line 1, got %v", res.Problems)
	}
}

// A bag whose only payload manifest is MD5 is refused with the reason and
// what to do; beside a SHA-256 manifest an MD5 manifest is checked. The MD5
// manifest is written by coreutils md5sum (an outside tool), so the sums
// are not ours.
func TestVerifyMD5Manifests(t *testing.T) {
	md5sum, err := exec.LookPath("md5sum")
	if err != nil {
		if os.Getenv("CI") == "true" {
			t.Fatal("md5sum (coreutils) is missing")
		}
		t.Skip("md5sum not found")
	}
	withMD5 := func(t *testing.T, keepSHA bool) string {
		d := makeBag(t, false)
		cmd := exec.Command(md5sum, "data/27613-h/images/q172.png", "data/27613-h/images/q172.txt", "data/odd%name.txt")
		cmd.Dir = d
		out, err := cmd.Output()
		if err != nil {
			t.Fatal(err)
		}
		// md5sum writes "sum  path" (RFC 8493 section 2.1.3 allows one or
		// more spaces); the % in the name must be %25 in a manifest.
		out = bytes.ReplaceAll(out, []byte("odd%name"), []byte("odd%25name"))
		os.WriteFile(filepath.Join(d, "manifest-md5.txt"), out, 0o644)
		if !keepSHA {
			os.Remove(filepath.Join(d, ManifestName("sha256")))
		}
		return d
	}
	t.Run("md5 only", func(t *testing.T) {
		res, err := Verify(withMD5(t, false), VerifyOptions{})
		if err != nil {
			t.Fatal(err)
		}
		found := false
		for _, p := range res.Problems {
			if p.Kind == KindManifest && strings.HasPrefix(p.Msg, "md5 manifests are not accepted: ") &&
				strings.Contains(p.Msg, "md5sum -c manifest-md5.txt") && strings.Contains(p.Msg, "manifest-sha256.txt") {
				found = true
			}
		}
		if !found || res.Complete() {
			t.Fatalf("want the md5 refusal, got %v", res.Problems)
		}
	})
	t.Run("md5 beside sha256", func(t *testing.T) {
		d := withMD5(t, true)
		if k := verifyKinds(t, d); len(k) != 0 {
			t.Fatalf("a good bag with md5 and sha256 manifests gave %v", k)
		}
		p := filepath.Join(d, "data/27613-h/images/q172.txt")
		b, _ := os.ReadFile(p)
		b[0] ^= 1
		os.WriteFile(p, b, 0o644)
		res, _ := Verify(d, VerifyOptions{})
		var algs []string
		for _, pr := range res.Problems {
			if pr.Kind == KindMismatch {
				algs = append(algs, strings.Fields(pr.Msg)[0])
			}
		}
		if strings.Join(algs, ",") != "md5,sha256" && strings.Join(algs, ",") != "sha256,md5" {
			t.Fatalf("a flipped byte must fail both manifests, got %v", res.Problems)
		}
	})
}

func FuzzParseDeclaration(f *testing.F) {
	f.Add("BagIt-Version: 1.0\nTag-File-Character-Encoding: UTF-8\n")
	f.Add("BagIt-Version : 1.0\r\nTag-File-Character-Encoding: UTF-8\r\n")
	f.Add("\xef\xbb\xbfBagIt-Version: 1.0\n")
	f.Fuzz(func(t *testing.T, s string) {
		v, e, err := ParseDeclaration([]byte(s), "bagit.txt")
		if err != nil {
			return
		}
		// What is accepted is the exact form, whatever the line ends.
		exact := "BagIt-Version: " + v + "\nTag-File-Character-Encoding: " + e
		norm := strings.TrimSuffix(strings.ReplaceAll(strings.ReplaceAll(s, "\r\n", "\n"), "\r", "\n"), "\n")
		if norm != exact {
			t.Fatalf("accepted %q, which is not %q", s, exact)
		}
	})
}
