package schema

import (
	"strings"
	"testing"
)

func TestVersionRule(t *testing.T) {
	for v, ok := range map[string]bool{"1.0": true, "1.7": true, "2.0": false, "0.9": false, "1": false, "x.y": false, "": false, "1.-1": false} {
		if err := CheckReadable(v); (err == nil) != ok {
			t.Errorf("CheckReadable(%q) = %v", v, err)
		}
	}
	if err := CheckReadable("3.1"); err == nil || !strings.Contains(err.Error(), "upgrade muarc") || !strings.Contains(err.Error(), "3.1") {
		t.Fatalf("a newer major version must name itself and say to upgrade: %v", err)
	}
}

// FuzzParseVersion: never panics; what it accepts prints back as given
// when the input is canonical.
func FuzzParseVersion(f *testing.F) {
	for _, s := range []string{"1.0", "10.20", "1.", ".1", "a.b", "1.0.0", "-1.0", "+1.2", "01.02"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		major, minor, err := ParseVersion(s)
		if err == nil && (major < 0 || minor < 0) {
			t.Fatalf("%q parsed to %d.%d", s, major, minor)
		}
		_ = CheckReadable(s)
	})
}
