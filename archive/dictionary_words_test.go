package archive

import (
	"strings"
	"testing"
)

// Every pattern of the JSON Schema reads in words in the data dictionary
// (a date as "YYYY-MM-DD", not as a regular expression).
func TestDictionaryPatternsInWords(t *testing.T) {
	d, err := DataDictionary()
	if err != nil {
		t.Fatal(err)
	}
	dates := 0
	for _, e := range d {
		if strings.Contains(e.Allowed, "matches ") || strings.Contains(e.Allowed, "[0-9]") {
			t.Errorf("%s: allowed %q is a raw pattern", e.Field, e.Allowed)
		}
		if strings.Contains(e.Allowed, "YYYY-MM-DD") {
			dates++
		}
	}
	if dates < 2 {
		t.Errorf("%d fields read YYYY-MM-DD, want the birth date and the times at least", dates)
	}
}
