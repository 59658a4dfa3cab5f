package deid

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"
)

func mustHex(t *testing.T, s string) []byte {
	t.Helper()
	b, err := hex.DecodeString(s)
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// TestHMACRFC4231 checks HMAC-SHA-256 against the test cases of RFC 4231
// section 4 (Identifiers and Test Vectors for HMAC-SHA-224, -256, -384 and
// -512). Cases 6 and 7 use keys longer than KeyBytes, so they also run
// through Key, the path every pseudonym takes.
func TestHMACRFC4231(t *testing.T) {
	rep := func(b byte, n int) []byte { return bytes.Repeat([]byte{b}, n) }
	k4 := make([]byte, 25)
	for i := range k4 {
		k4[i] = byte(i + 1)
	}
	cases := []struct {
		name      string
		key, data []byte
		want      string // HMAC-SHA-256 from RFC 4231
		truncate  int
	}{
		{"RFC 4231 4.2 test case 1", rep(0x0b, 20), []byte("Hi There"),
			"b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7", 0},
		{"RFC 4231 4.3 test case 2", []byte("Jefe"), []byte("what do ya want for nothing?"),
			"5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843", 0},
		{"RFC 4231 4.4 test case 3", rep(0xaa, 20), rep(0xdd, 50),
			"773ea91e36800e46854db8ebd09181a72959098b3ef8c122d9635514ced565fe", 0},
		{"RFC 4231 4.5 test case 4", k4, rep(0xcd, 50),
			"82558a389a443c0ea4cc819899f2083a85f0faa3e578f8077a2e3ff46729665b", 0},
		{"RFC 4231 4.6 test case 5 (truncated to 128 bits)", rep(0x0c, 20), []byte("Test With Truncation"),
			"a3b6167473100ee06e0c796c2955552b", 16},
		{"RFC 4231 4.7 test case 6", rep(0xaa, 131), []byte("Test Using Larger Than Block-Size Key - Hash Key First"),
			"60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54", 0},
		{"RFC 4231 4.8 test case 7", rep(0xaa, 131), []byte("This is a test using a larger than block-size key and a larger than block-size data. The key needs to be hashed before being used by the HMAC algorithm."),
			"9b09ffa71b942fcb27635fbcd5b0e944bfdc63644f0713938a7f51535c3a35e2", 0},
	}
	for _, c := range cases {
		got := hmacSHA256(c.key, c.data)
		if c.truncate > 0 {
			got = got[:c.truncate]
		}
		if hex.EncodeToString(got) != c.want {
			t.Errorf("%s: got %x, want %s", c.name, got, c.want)
		}
		if len(c.key) >= KeyBytes {
			k, err := KeyFromBytes(c.key)
			if err != nil {
				t.Fatal(err)
			}
			if h := hex.EncodeToString(k.mac(c.data)); h != c.want {
				t.Errorf("%s through Key: got %s", c.name, h)
			}
		}
	}
}

// TestSHA256FIPS180 checks the policy hash's function against the examples
// of FIPS 180-4 (the SHA-256 examples published with the standard, "abc" and
// the 448-bit message).
func TestSHA256FIPS180(t *testing.T) {
	for msg, want := range map[string]string{
		"abc": "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad",
		"abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq": "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1",
	} {
		s := sha256.Sum256([]byte(msg))
		if hex.EncodeToString(s[:]) != want {
			t.Errorf("SHA-256(%q) = %x, want %s", msg, s, want)
		}
	}
}

// TestPseudonymsAgainstPython recomputes pseudonyms with Python's hmac and
// base64 modules (reference implementations of RFC 2104 and RFC 4648); the
// expected strings were printed by /usr/bin/python3:
//
//	base64.b32encode(hmac.new(bytes(range(32)), b"subject\x00S01", hashlib.sha256).digest()[:5])
func TestPseudonymsAgainstPython(t *testing.T) {
	k, _ := KeyFromBytes(func() []byte {
		b := make([]byte, 32)
		for i := range b {
			b[i] = byte(i)
		}
		return b
	}())
	p := NewPseudonymizer(k)
	if got := p.Subject("S01"); got != "P-42YH4WL4" {
		t.Errorf("Subject(S01) = %s, want P-42YH4WL4", got)
	}
	if got := p.Subject(" S01 "); got != "P-42YH4WL4" {
		t.Errorf("surrounding space changed the pseudonym: %s", got)
	}
	if got := p.Subject("S02"); got != "P-MQR3LEER" {
		t.Errorf("Subject(S02) = %s, want P-MQR3LEER", got)
	}
	if got := p.Session("S01", "ses1"); got != "V-GJ6YZJHF" {
		t.Errorf("Session = %s, want V-GJ6YZJHF", got)
	}
	// hmac.new(key, b"muarc key fingerprint v1", sha256).hexdigest()[:16]
	if got := k.Fingerprint(); got != "kf-f472b9ba6d0eb159" {
		t.Errorf("Fingerprint = %s", got)
	}
	if !IsPseudonym(SubjectPrefix, "P-42YH4WL4") || IsPseudonym(SubjectPrefix, "P-42YH4WL") || IsPseudonym(SubjectPrefix, "S01") {
		t.Error("IsPseudonym")
	}
	if got := p.Source("S01", "exports/Jane Doe/force.CSV"); !strings.HasSuffix(got, ".csv") || !IsPseudonym(SourcePrefix, strings.TrimSuffix(got, ".csv")) {
		t.Errorf("Source = %s", got)
	}
}

func TestRegistryCollision(t *testing.T) {
	r := NewRegistry()
	if err := r.Add("P-AAAAAAAA", "S01"); err != nil {
		t.Fatal(err)
	}
	if err := r.Add("P-AAAAAAAA", "S01"); err != nil {
		t.Fatal("same original twice is not a collision:", err)
	}
	if err := r.Add("P-AAAAAAAA", "S02"); err == nil {
		t.Fatal("collision not detected")
	}
	if c := r.Collisions(); len(c) != 1 || c[0] != "P-AAAAAAAA" {
		t.Fatalf("Collisions = %v", c)
	}
}

// TestShiftDays: the offset is per subject, never 0, within the bound, and
// keeps intervals between one subject's dates (a property of our model).
func TestShiftDays(t *testing.T) {
	k, _ := KeyFromBytes(bytes.Repeat([]byte{7}, 32))
	p := NewPseudonymizer(k)
	distinct := map[int]bool{}
	for _, id := range []string{"A1", "A2", "A3", "A4", "A5", "A6", "A7", "A8"} {
		d := p.ShiftDays(id, 365)
		if d == 0 || d < -365 || d > 365 {
			t.Fatalf("ShiftDays(%s) = %d", id, d)
		}
		if p.ShiftDays(id, 365) != d {
			t.Fatal("not stable")
		}
		distinct[d] = true
		a, _ := ShiftDate("2026-03-14", d)
		b, _ := ShiftDate("2026-04-01T09:30:00Z", d)
		if n, _ := AgeAt("2026-03-14", "2026-04-01"); n != 0 {
			t.Fatal(n)
		}
		pa, _ := parseDate(a)
		pb, _ := parseDate(b)
		if days := pb.t.Sub(pa.t).Hours() / 24; days < 18.39 || days > 18.41 {
			t.Fatalf("interval changed: %v days", days)
		}
		if !strings.HasSuffix(b, "T09:30:00Z") {
			t.Fatalf("clock time lost: %s", b)
		}
	}
	if len(distinct) < 6 {
		t.Fatalf("8 subjects gave only %d offsets", len(distinct))
	}
}

// TestShiftDateCalendar checks the day arithmetic across a leap day (the
// Gregorian calendar: 2028 is a leap year, ISO 8601 dates).
func TestShiftDateCalendar(t *testing.T) {
	got, err := ShiftDate("2028-02-27", 3)
	if err != nil || got != "2028-03-01" {
		t.Fatalf("got %s %v, want 2028-03-01", got, err)
	}
	got, _ = ShiftDate("2026-03-01T00:30:00+01:00", -1)
	if got != "2026-02-28T00:30:00+01:00" {
		t.Fatalf("got %s", got)
	}
	if _, err := ShiftDate("14.03.2026", 1); err == nil {
		t.Fatal("non-ISO date accepted")
	}
	if y, _ := YearOf("2026-03-14T09:30:00Z"); y != "2026" {
		t.Fatal(y)
	}
	// AgeAt counts the birthday from its day (common practice).
	if n, _ := AgeAt("1990-03-15", "2026-03-14"); n != 35 {
		t.Fatal(n)
	}
	if n, _ := AgeAt("1990-03-14", "2026-03-14"); n != 36 {
		t.Fatal(n)
	}
}

// TestAgeBandSafeHarbor: 45 CFR 164.514(b)(2)(i)(C) — all ages over 89 are
// aggregated into a single category of age 90 or older.
func TestAgeBandSafeHarbor(t *testing.T) {
	cases := []struct {
		age   float64
		width int
		want  string
	}{
		{89, 10, "80-89"}, {89.9, 10, "80-89"}, {90, 10, "90 or older"}, {104, 10, "90 or older"},
		{34.7, 10, "30-39"}, {0, 10, "0-9"}, {88, 7, "84-89"}, {89, 5, "85-89"}, {91, 1, "90 or older"},
	}
	for _, c := range cases {
		if got := AgeBand(c.age, c.width); got != c.want {
			t.Errorf("AgeBand(%v, %d) = %q, want %q", c.age, c.width, got, c.want)
		}
	}
	for in, want := range map[string]string{"90-99": "90 or older", "85-94": "85 or older", "30-39": "30-39", "95 or older": "90 or older"} {
		if got, ok := NormalizeAgeBand(in); !ok || got != want {
			t.Errorf("NormalizeAgeBand(%q) = %q", in, got)
		}
	}
	if MeasureBand(172.5, 10) != "170-180" || MeasureBand(180, 10) != "180-190" {
		t.Error("MeasureBand")
	}
}

// TestDateSpellings: the spellings the leak scan looks for (ISO 8601 basic
// and extended forms; the day.month.year, month/day/year and day/month/year
// orders in common use; English month names).
func TestDateSpellings(t *testing.T) {
	got := DateSpellings("2026-03-14T09:30:00Z")
	for _, want := range []string{"2026-03-14", "14.03.2026", "03/14/2026", "14/03/2026", "20260314",
		"14 March 2026", "March 14, 2026", "14 Mar 2026", "Mar 14, 2026", "3/14/2026", "14.3.2026"} {
		found := false
		for _, g := range got {
			if g == want {
				found = true
			}
		}
		if !found {
			t.Errorf("spelling %q missing from %v", want, got)
		}
	}
	if DateSpellings("2026") != nil {
		t.Error("a year alone is not an identifier under Safe Harbor")
	}
}

func TestKeyFile(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "study.key")
	k, err := NewKeyFile(path)
	if err != nil {
		t.Fatal(err)
	}
	fi, _ := os.Stat(path)
	if fi.Mode().Perm() != 0o600 {
		t.Fatalf("mode %o", fi.Mode().Perm())
	}
	b, _ := os.ReadFile(path)
	if len(b) != 65 {
		t.Fatalf("key file of %d bytes", len(b))
	}
	if _, err := NewKeyFile(path); err == nil {
		t.Fatal("overwrote a key")
	}
	b2, _ := os.ReadFile(path)
	if !bytes.Equal(b, b2) {
		t.Fatal("key changed")
	}
	k2, err := LoadKey(path)
	if err != nil {
		t.Fatal(err)
	}
	if k.Fingerprint() != k2.Fingerprint() {
		t.Fatal("reloaded key differs")
	}
	os.Chmod(path, 0o644)
	if _, err := LoadKey(path); err == nil || !strings.Contains(err.Error(), "chmod 600") {
		t.Fatalf("readable key accepted: %v", err)
	}
	if _, err := ParseKey([]byte("abcd\n"), "short"); err == nil {
		t.Fatal("short key accepted")
	}
	entries, _ := os.ReadDir(dir)
	if len(entries) != 1 {
		t.Fatalf("temporary files left: %v", entries)
	}
}

// TestPolicyHashMatchesSha256sum: the policy's SHA-256 is that of its
// canonical JSON, as coreutils sha256sum computes it.
func TestPolicyHashMatchesSha256sum(t *testing.T) {
	p := Default()
	b, _ := p.CanonicalJSON()
	f := filepath.Join(t.TempDir(), "p.json")
	os.WriteFile(f, b, 0o644)
	out, err := exec.Command("sha256sum", f).Output()
	if err != nil {
		t.Skip("sha256sum not available:", err)
	}
	if got := strings.Fields(string(out))[0]; got != p.SHA256() {
		t.Fatalf("sha256sum %s, policy %s", got, p.SHA256())
	}
}
