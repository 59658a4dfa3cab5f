package validate

import (
	"encoding/json"
	"fmt"
	"sort"
	"strings"
	"sync"

	"github.com/xeipuuv/gojsonschema"

	"muarc/internal/docload"
	"muarc/schema"
)

var (
	schemaOnce sync.Once
	schemaComp *gojsonschema.Schema
	schemaErr  error
)

// recordingSchema compiles schema.RecordingSchema once.
func recordingSchema() (*gojsonschema.Schema, error) {
	schemaOnce.Do(func() {
		schemaComp, schemaErr = gojsonschema.NewSchema(gojsonschema.NewStringLoader(schema.RecordingSchema))
		if schemaErr != nil {
			schemaErr = fmt.Errorf("schema/recording.schema.json does not compile: %w", schemaErr)
		}
	})
	return schemaComp, schemaErr
}

// CheckMetadata validates a metadata view (the JSON of recfile.MetadataView,
// or a metadata sidecar decoded into map[string]any) against
// schema/recording.schema.json. Each finding has Check "metadata.<keyword>"
// (the JSON Schema keyword that failed, e.g. "metadata.required",
// "metadata.enum"), severity Error and JSONPath set to the JSON Pointer
// (RFC 6901) of the offending value; HDF5Path is left empty (File fills it).
// Findings are sorted by JSONPath.
func CheckMetadata(view map[string]any) []Finding {
	s, err := recordingSchema()
	if err != nil {
		return []Finding{{Severity: Error, Check: "metadata.schema", Message: err.Error(), Hint: "this build is broken; report it"}}
	}
	res, err := s.Validate(gojsonschema.NewGoLoader(view))
	if err != nil {
		return []Finding{{Severity: Error, Check: "metadata.schema", Message: "metadata view cannot be read as JSON: " + err.Error(),
			Hint: "numbers must be finite; leave unknown values out"}}
	}
	var out []Finding
	seen := map[string]bool{}
	for _, e := range res.Errors() {
		kind := e.Type()
		// "number_any_of" and similar wrappers repeat what their inner
		// errors say; keep every error, they are distinct keywords.
		ptr := fieldPointer(e.Field())
		if kind == "required" {
			if p, ok := e.Details()["property"].(string); ok {
				ptr += "/" + escapePointer(p)
			}
		}
		if kind == "additional_property_not_allowed" {
			if p, ok := e.Details()["property"].(string); ok {
				ptr += "/" + escapePointer(p)
			}
		}
		key := kind + " " + ptr
		if seen[key] {
			continue
		}
		seen[key] = true
		out = append(out, Finding{
			Severity: Error,
			Check:    "metadata." + kind,
			Message:  metadataMessage(ptr, e),
			JSONPath: ptr,
			Hint:     metadataHint(kind, e),
		})
	}
	sort.SliceStable(out, func(i, j int) bool { return out[i].JSONPath < out[j].JSONPath })
	return out
}

// CheckMetadataJSON is CheckMetadata on JSON text (a sidecar file's bytes).
func CheckMetadataJSON(b []byte) ([]Finding, error) {
	v, _, err := docload.Tree("metadata.json", b)
	if err != nil {
		return nil, err
	}
	m, ok := v.(map[string]any)
	if !ok {
		return nil, fmt.Errorf("the metadata is not a JSON object")
	}
	return CheckMetadata(m), nil
}

// fieldPointer turns gojsonschema's "trials.0.name" into "/trials/0/name".
func fieldPointer(f string) string {
	if f == "" || f == "(root)" {
		return ""
	}
	f = strings.TrimPrefix(f, "(root).")
	parts := strings.Split(f, ".")
	for i, p := range parts {
		parts[i] = escapePointer(p)
	}
	return "/" + strings.Join(parts, "/")
}

func escapePointer(s string) string {
	return strings.ReplaceAll(strings.ReplaceAll(s, "~", "~0"), "/", "~1")
}

func metadataMessage(ptr string, e gojsonschema.ResultError) string {
	where := ptr
	if where == "" {
		where = "the top level"
	}
	d := e.Description()
	if form := dateForm(e); form != "" {
		d = "not a date in the form " + form
	}
	if v := e.Value(); v != nil && e.Type() != "required" {
		if b, err := json.Marshal(v); err == nil && len(b) <= 60 {
			return fmt.Sprintf("%s: %s (value %s)", where, d, b)
		}
	}
	return fmt.Sprintf("%s: %s", where, d)
}

// dateForm names the form a date pattern asks for in words ("" when the
// pattern is not a date's), instead of the regular expression.
func dateForm(e gojsonschema.ResultError) string {
	if e.Type() != "pattern" && e.Type() != "does_not_match_pattern" {
		return ""
	}
	p := fmt.Sprint(e.Details()["pattern"])
	switch {
	case !strings.HasPrefix(p, "^[0-9]{4}"):
		return ""
	case strings.Contains(p, "[Tt]"):
		return "YYYY-MM-DD (e.g. 2026-03-14) or an RFC 3339 date-time (e.g. 2026-03-14T09:30:00Z)"
	case strings.Contains(p, "(-[0-9]{2}-[0-9]{2})?"):
		return "YYYY-MM-DD (e.g. 1990-05-17), or the year alone"
	}
	return "YYYY-MM-DD (e.g. 2026-03-14)"
}

func metadataHint(kind string, e gojsonschema.ResultError) string {
	if kind == "enum" {
		// "F" for sex: suggest the word it abbreviates.
		if s, ok := e.Value().(string); ok && s != "" {
			var match []string
			for _, a := range strings.Split(fmt.Sprint(e.Details()["allowed"]), ",") {
				a = strings.Trim(strings.TrimSpace(a), `"`)
				if a != s && strings.HasPrefix(strings.ToLower(a), strings.ToLower(s)) {
					match = append(match, a)
				}
			}
			if len(match) == 1 {
				return fmt.Sprintf("did you mean %q? (`muarc schema` lists the words)", match[0])
			}
		}
	}
	if dateForm(e) != "" {
		return "write the date as the message shows; `muarc schema --example` has one of each"
	}
	switch kind {
	case "required":
		return "add the field; see schema/LAYOUT.md for what it holds"
	case "enum", "const":
		return "use one of the words the schema lists (`muarc schema`)"
	case "invalid_type":
		return "store the value with the type the schema gives (numbers as numbers, not text)"
	case "additional_property_not_allowed":
		return "this part takes no extra fields; check the spelling against `muarc schema`"
	case "pattern", "does_not_match_pattern":
		return "write the value in the form the schema describes (dates RFC 3339, names of letters, digits, '_', '-', '.')"
	case "number_gt", "number_gte", "number_lt", "number_lte":
		return "the value is outside its range; leave it out when not known"
	}
	return "see `muarc schema` for the rule"
}
