package deid

import (
	"fmt"
	"sort"
	"strings"

	"muarc/schema"
)

// Markers of the generated field table in POLICY.md.
const (
	policyTableStart = "<!-- policy fields (generated from schema/fields.go and default_policy.json: go test ./deid -run TestPolicyDoc -update) -->"
	policyTableEnd   = "<!-- end of policy fields -->"
)

// PolicyTable renders the table of POLICY.md that lists every policy field
// of the layout, from the field registry: whether it identifies a person,
// the actions a policy may choose, and what the built-in policy does; then
// the extra-field patterns and the extras the built-in policy names.
func PolicyTable() string {
	def := Default()
	var b strings.Builder
	b.WriteString("| field | identifying | a policy may choose | built-in policy |\n| --- | --- | --- | --- |\n")
	row := func(path, ident string, acts []Action) {
		act, named := def.ActionFor(path)
		s := string(act)
		if !named {
			s = "drop (not named)"
		}
		fmt.Fprintf(&b, "| `%s` | %s | %s | %s |\n", path, ident, joinActions(acts), s)
	}
	for _, f := range schema.Fields {
		if !isPolicyClass(f.Class) {
			continue
		}
		ident := ""
		if f.Identifying {
			ident = "yes"
		}
		row(f.Path(), ident, actionsOf(f.Path()))
	}
	var extras []string
	for p := range def.Fields {
		if _, _, ok := schema.ExtraGroupOf(p); ok && !strings.HasSuffix(p, ".*") {
			extras = append(extras, p)
		}
	}
	sort.Strings(extras)
	for _, g := range schema.Groups {
		if g.Extras {
			row(g.Prefix+".extra.*", "may", actionsOf(g.Prefix+".extra.*"))
		}
	}
	for _, p := range extras {
		row(p, "", actionsOf(p))
	}
	return b.String()
}

// PolicyDocWithTable returns doc (POLICY.md's text) with its generated
// table replaced by PolicyTable's current rendering.
func PolicyDocWithTable(doc string) (string, error) {
	i := strings.Index(doc, policyTableStart)
	j := strings.Index(doc, policyTableEnd)
	if i < 0 || j < i {
		return "", fmt.Errorf("POLICY.md: no generated field table (markers %q ... %q)", policyTableStart, policyTableEnd)
	}
	return doc[:i] + policyTableStart + "\n" + PolicyTable() + doc[j:], nil
}
