package deid

import (
	"encoding/json"
	"reflect"
	"strings"
	"testing"
)

// Every policy hint of the k-anonymity ladders is a setting a policy
// accepts: a registry field with an action it allows, or a band option of
// Policy (its JSON name).
func TestKAnonymityHintsArePolicySettings(t *testing.T) {
	options := map[string]bool{}
	pt := reflect.TypeOf(Policy{})
	for i := 0; i < pt.NumField(); i++ {
		name, _, _ := strings.Cut(pt.Field(i).Tag.Get("json"), ",")
		options[name] = true
	}
	n := 0
	for q, ladder := range ladders {
		for _, r := range ladder[1:] {
			var m map[string]any
			hint := r.hint("json")
			if err := json.Unmarshal([]byte("{"+hint+"}"), &m); err != nil {
				t.Fatalf("%s: hint %s is not JSON members: %v", q, hint, err)
			}
			if f, ok := m["fields"].(map[string]any); ok {
				m = f // field lines sit under "fields"
			}
			for k, v := range m {
				n++
				if act, ok := v.(string); ok {
					if err := checkField(k, Action(act)); err != nil {
						t.Errorf("%s: hint %s: %v", q, hint, err)
					}
					continue
				}
				if !options[k] {
					t.Errorf("%s: hint %s names %q, which is neither a field nor a Policy option", q, hint, k)
				}
			}
		}
	}
	if n < 10 {
		t.Fatalf("only %d hint settings", n)
	}
}
