package schema

import (
	"fmt"
	"strings"
)

// FieldTable renders a group's fields as the Markdown table LAYOUT.md shows
// for it: attributes (kind, required, unit, meaning) or table columns
// (storage, unit, meaning). Group names and dataset entries are left out
// (LAYOUT.md describes them in the text); identifying fields are marked
// and fields added after layout 1.0 say since when.
func FieldTable(group string) string {
	g := GroupByName(group)
	var b strings.Builder
	if g.Table {
		b.WriteString("| column | storage | unit | meaning |\n| --- | --- | --- | --- |\n")
	} else {
		b.WriteString("| attribute | kind | req. | unit | meaning |\n| --- | --- | --- | --- | --- |\n")
	}
	for _, f := range FieldsOf(group) {
		if f.ViewOnly || f.Kind == KindName || f.Kind == KindData {
			continue
		}
		meaning := f.Meaning
		if f.Identifying {
			meaning = "*identifying*: " + meaning
		}
		if len(f.Enum) > 0 && !strings.Contains(meaning, "`"+f.Enum[0]+"`") {
			meaning += "; one of " + quoteList(f.Enum)
		}
		if f.Since != "" && f.Since != "1.0" {
			meaning += " (since " + f.Since + ")"
		}
		if g.Table {
			fmt.Fprintf(&b, "| `%s` | %s | %s | %s |\n", f.Name, f.Storage, f.Unit, meaning)
			continue
		}
		req := "no"
		if f.Required {
			req = "yes"
		}
		fmt.Fprintf(&b, "| `%s` | %s | %s | %s | %s |\n", f.Name, f.Kind, req, f.Unit, meaning)
	}
	return b.String()
}

func quoteList(vs []string) string {
	q := make([]string, len(vs))
	for i, v := range vs {
		q[i] = "`" + v + "`"
	}
	return strings.Join(q, ", ")
}

// Generated field tables in LAYOUT.md sit between these markers; the
// schema tests compare them with FieldTable and rewrite them with -update.
const (
	tableStart = "<!-- fields: "
	tableEnd   = "<!-- end of fields -->"
)

// LayoutWithTables returns layout (LAYOUT.md's text) with every generated
// field table replaced by FieldTable's current rendering; unknown group
// names in markers are an error.
func LayoutWithTables(layout string) (string, error) {
	var out strings.Builder
	rest := layout
	for {
		i := strings.Index(rest, tableStart)
		if i < 0 {
			out.WriteString(rest)
			return out.String(), nil
		}
		lineEnd := strings.Index(rest[i:], "\n")
		if lineEnd < 0 {
			return "", fmt.Errorf("LAYOUT.md: unterminated field-table marker")
		}
		marker := rest[i : i+lineEnd]
		name := strings.TrimSpace(strings.TrimSuffix(strings.TrimPrefix(marker, tableStart), "-->"))
		name, _, _ = strings.Cut(name, " ")
		known := false
		for _, g := range Groups {
			known = known || g.Name == name
		}
		if !known {
			return "", fmt.Errorf("LAYOUT.md: field-table marker names no group: %q", marker)
		}
		j := strings.Index(rest[i:], tableEnd)
		if j < 0 {
			return "", fmt.Errorf("LAYOUT.md: field table %q has no %q", name, tableEnd)
		}
		out.WriteString(rest[:i])
		out.WriteString(marker + "\n")
		out.WriteString(FieldTable(name))
		out.WriteString(tableEnd)
		rest = rest[i+j+len(tableEnd):]
	}
}
