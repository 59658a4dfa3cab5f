package deid

import (
	"strings"
	"testing"
)

// FuzzParseKey: never panics; an accepted key has at least KeyBytes bytes
// and a stable fingerprint.
func FuzzParseKey(f *testing.F) {
	f.Add([]byte(strings.Repeat("ab", 32) + "\n"))
	f.Add([]byte(strings.Repeat("x", 32)))
	f.Add([]byte("  " + strings.Repeat("0F", 40) + " \r\n"))
	f.Add([]byte("abc"))
	f.Fuzz(func(t *testing.T, b []byte) {
		k, err := ParseKey(b, "fuzz")
		if err != nil {
			return
		}
		if len(k.b) < KeyBytes {
			t.Fatalf("short key accepted: %d bytes", len(k.b))
		}
		if fp := k.Fingerprint(); len(fp) != 19 || fp != k.Fingerprint() {
			t.Fatalf("fingerprint %q", fp)
		}
	})
}

// FuzzShiftDate: never panics; a date that shifts comes back by the
// opposite shift, and its spellings include its ISO 8601 form.
func FuzzShiftDate(f *testing.F) {
	for _, s := range []string{"2026-03-14", "2026-03-14T09:30:00Z", "2028-02-29T23:59:59.5+05:30", "1961", "14.03.2026", "2026-13-01", ""} {
		f.Add(s, 17)
	}
	f.Fuzz(func(t *testing.T, s string, days int) {
		days %= 3651
		got, err := ShiftDate(s, days)
		if err != nil {
			return
		}
		back, err := ShiftDate(got, -days)
		if err != nil {
			t.Fatalf("shifted %q to %q, which does not parse: %v", s, got, err)
		}
		d0, _ := parseDate(s)
		d1, _ := parseDate(back)
		if !d0.t.Equal(d1.t) {
			t.Fatalf("%q +%d -%d = %q", s, days, days, back)
		}
		if sp := DateSpellings(got); len(sp) == 0 || !strings.HasPrefix(got, sp[0]) {
			t.Fatalf("spellings of %q: %v", got, sp)
		}
	})
}
