package deid

import (
	"os"
	"path/filepath"
	"strings"
	"testing"
	"unicode"
	"unicode/utf8"
)

// TestScrubSafeHarborKinds: one text per Safe Harbor identifier kind of
// 45 CFR 164.514(b)(2)(i) that free text can carry; each identifying part
// must be gone and replaced by its placeholder. The subject's own name and
// code are given as own identifiers.
func TestScrubSafeHarborKinds(t *testing.T) {
	own := []string{"Ottilie Quarnstrom", "QX-0417"}
	cases := []struct {
		kind, text  string
		gone        []string
		placeholder string
	}{
		{"(A) names: the subject's own", "ottilie said her knee hurt; Quarnstrom, O. agreed", []string{"ottilie", "Quarnstrom"}, "[name]"},
		{"(A) names: titled", "referred by Dr. Vellacourt", []string{"Vellacourt"}, "[name]"},
		{"(A) names: accented first letter", "Ölund and Ottilie came", []string{"Ottilie"}, "[name]"},
		{"(B) street address", "lives at 12 Brindlemoor Lane near the lab", []string{"Brindlemoor"}, "[address]"},
		{"(B) ZIP code", "postcode 94110", []string{"94110"}, "[number]"},
		{"(C) date ISO", "seen 2026-03-14 and again", []string{"2026-03-14"}, "[date]"},
		{"(C) date d.m.y", "seen 14.03.2026", []string{"14.03.2026"}, "[date]"},
		{"(C) date m/d/y", "seen 03/14/26", []string{"03/14/26"}, "[date]"},
		{"(C) date words", "born 14 March 1961, visit March 14, 2026", []string{"14 March 1961", "March 14, 2026", "1961"}, "[date]"},
		{"(C) month and year", "since Sept. 2025", []string{"Sept. 2025"}, "[date]"},
		{"(D) telephone", "call +44 20 7946 0958 or (555) 013-4477", []string{"7946", "0958", "013-4477"}, "[phone]"},
		{"(F) e-mail", "write to o.quarn+lab@mail.example.org today", []string{"quarn", "example.org"}, "[email]"},
		{"(G)-(L) numbers", "SSN 078-05-1120, record MRN00417233", []string{"078-05-1120", "MRN00417233"}, ""},
		{"(M) device serial", "amplifier SN-AX44719 on the left", []string{"AX44719"}, "[id]"},
		{"(N) URL", "see https://files.example.net/s/QX-0417?x=1 for the video", []string{"files.example.net", "QX-0417"}, "[url]"},
		{"(O) IPv4", "uploaded from 192.168.4.21.", []string{"192.168.4.21"}, "[ip]"},
		{"(O) IPv6", "host fe80::1ff:fe23:4567:890a was used", []string{"fe80::1ff:fe23:4567:890a"}, "[ip]"},
		{"(R) the subject's own code", "file of qx-0417 checked", []string{"qx-0417"}, "[id]"},
	}
	for _, c := range cases {
		got, rm := ScrubText(c.text, own)
		for _, g := range c.gone {
			if strings.Contains(strings.ToLower(got), strings.ToLower(g)) {
				t.Errorf("%s: %q left %q in %q", c.kind, c.text, g, got)
			}
		}
		if c.placeholder != "" && !strings.Contains(got, c.placeholder) {
			t.Errorf("%s: %q gave %q, want %s", c.kind, c.text, got, c.placeholder)
		}
		if len(rm) == 0 {
			t.Errorf("%s: no removal counted", c.kind)
		}
	}
}

// TestScrubKeepsOrdinaryText: common words, %MVC figures and short numbers
// survive, and "may" as a verb is not a month.
func TestScrubKeepsOrdinaryText(t *testing.T) {
	in := "Ramp to 30 % MVC held for 20 s; the subject may rest 120 s between trials. Analysis ok."
	got, rm := ScrubText(in, []string{"Ana Lind"})
	if got != in || len(rm) != 0 {
		t.Fatalf("changed ordinary text: %q -> %q (%v)", in, got, rm)
	}
}

// FuzzScrubText: never panics, always valid UTF-8, the own name and any
// e-mail address never survive (properties of our scrubber).
func FuzzScrubText(f *testing.F) {
	for _, s := range []string{"Ottilie Quarnstrom, 2026-03-14, ottilie@example.org", "call 555 013 4477",
		"http://x.example/a", "::1 and 10.0.0.1", "\xff\xfe broken", "Ottilie\u00a0Ottilie", "14 Mar"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		got, _ := ScrubText(s, []string{"Ottilie Quarnstrom"})
		if !utf8.ValidString(got) {
			t.Fatalf("invalid UTF-8 from %q", s)
		}
		low := strings.ToLower(got)
		for _, w := range []string{"ottilie", "quarnstrom"} {
			for at := 0; ; {
				i := strings.Index(low[at:], w)
				if i < 0 {
					break
				}
				pos := at + i
				if bounded([]byte(low), pos, pos+len(w), "utf-8") && !adjacentLetter(low, pos, pos+len(w)) {
					t.Fatalf("own name survived: %q -> %q", s, got)
				}
				at = pos + 1
			}
		}
		if m := scrubRules[0].re.FindString(got); m != "" {
			t.Fatalf("e-mail survived: %q -> %q", s, got)
		}
	})
}

// adjacentLetter: a non-ASCII letter next to the match makes it part of a
// longer word, which the whole-word rule leaves alone.
func adjacentLetter(s string, pos, end int) bool {
	if pos > 0 {
		r, _ := utf8.DecodeLastRuneInString(s[:pos])
		if isWordRune(r) {
			return true
		}
	}
	if end < len(s) {
		r, _ := utf8.DecodeRuneInString(s[end:])
		if isWordRune(r) {
			return true
		}
	}
	return false
}

func TestScanBytesEncodingsAndBoundaries(t *testing.T) {
	dir := t.TempDir()
	le, be := utf16Bytes("Quarnstrom")
	var data []byte
	data = append(data, make([]byte, scanBlock-3)...) // the UTF-8 match straddles the first block boundary
	data = append(data, []byte(" QUARNSTROM ")...)
	data = append(data, '-', '-')
	data = append(data, le...)
	data = append(data, '-', '-', '-')
	data = append(data, be...)
	data = append(data, []byte(" analysis 2026-03-14x 20260314")...)
	path := filepath.Join(dir, "f.bin")
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	leaks, err := ScanBytes(path, []string{"Quarnstrom", "Ana", "Anal", "2026-03-14", "20260314", "absent-value"})
	if err != nil {
		t.Fatal(err)
	}
	got := map[string]int64{}
	for _, l := range leaks {
		got[l.Needle+"/"+l.Encoding] = l.Offset
	}
	want := map[string]int64{
		"Quarnstrom/utf-8":    scanBlock - 3 + 1,
		"Quarnstrom/utf-16le": scanBlock - 3 + 12 + 2,
		"Quarnstrom/utf-16be": scanBlock - 3 + 12 + 2 + 20 + 3,
		"20260314/utf-8":      int64(len(data) - 8),
		"2026-03-14/utf-8":    int64(len(data) - 8 - 12),
	}
	for k, off := range want {
		if o, ok := got[k]; !ok || o != off {
			t.Errorf("%s at %d, want %d (found %v)", k, o, off, got)
		}
	}
	if len(got) != len(want) {
		t.Errorf("unexpected leaks %v (\"Ana\" and \"Anal\" inside \"analysis\" do not count; a date glued to a letter does)", got)
	}
	if u := Unscannable([]string{"Q"}); len(u) != 1 {
		t.Errorf("Unscannable %v", u)
	}
	if s := (Leak{Needle: "Quarnstrom", Encoding: "utf-8", Offset: 3, Count: 1}).String(); strings.Contains(s, "Quarnstrom") {
		t.Errorf("a leak report repeats the value: %s", s)
	}
}

func isWordRune(r rune) bool { return unicode.IsLetter(r) || unicode.IsDigit(r) }

// TestViewText: values in the decoded metadata are searched unescaped (JSON
// would write "&" as \u0026).
func TestViewText(t *testing.T) {
	view := map[string]any{"session": map[string]any{"site": "Quarn & Daughters <lab>"}, "trials": []any{map[string]any{"n": 3.5}}}
	if hits := scanText(viewText(view), []string{"Quarn & Daughters <lab>", "absent"}); len(hits) != 1 {
		t.Fatalf("hits %v", hits)
	}
}

// TestScanShortNeedleNeedsText: a 4-byte value between bytes that are not
// text (as in compressed samples) is taken as chance; the same value stored
// as text (NUL padding, as HDF5 pads strings) is a leak.
func TestScanShortNeedleNeedsText(t *testing.T) {
	noise := []byte{0x9c, 0xf1, 0x83, 0x07, 0xd2, 0xb8, 0x91, 0xe4}
	var data []byte
	data = append(data, noise...)
	data = append(data, []byte("~Ilse\x8f")...) // boundary bytes fine, context not text
	data = append(data, noise...)
	data = append(data, make([]byte, 16)...)
	data = append(data, []byte("Ilse")...)
	data = append(data, make([]byte, 16)...)
	path := filepath.Join(t.TempDir(), "f.bin")
	os.WriteFile(path, data, 0o644)
	leaks, err := ScanBytes(path, []string{"Ilse"})
	if err != nil || len(leaks) != 1 || leaks[0].Count != 1 || leaks[0].Offset != int64(len(noise)*2+6+16) {
		t.Fatalf("%v %v", leaks, err)
	}
}
