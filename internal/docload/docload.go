// Package docload reads the small documents users hand to muarc — import
// profiles, validation rules, de-identification policies and metadata
// sidecars — by one rule: the format follows the file name's extension
// (".json" is JSON, ".yaml" or ".yml" is YAML; anything else is refused
// with the choices), a UTF-8 byte-order mark is skipped, nesting deeper than
// MaxDepth and files larger than MaxBytes are refused before they are
// decoded (so memory stays small whatever the file holds), duplicate keys
// are errors, and every error names the file, line and column.
package docload

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"go.yaml.in/yaml/v3"
)

// MaxDepth is the deepest nesting of objects and lists a document may have.
// muarc's deepest document (a sidecar's trials -> arrays -> decompositions
// -> units -> value) needs 8.
const MaxDepth = 64

// MaxBytes is the largest document read, in bytes.
const MaxBytes = 16 << 20

// maxNodes bounds the values a YAML document may expand to through aliases.
const maxNodes = 1 << 20

// Error is a problem with a document, at a place in it (Line and Column
// 1-based; 0 when not known).
type Error struct {
	File         string
	Line, Column int
	Msg, Hint    string
}

func (e *Error) Error() string {
	var b strings.Builder
	b.WriteString(e.File)
	if e.Line > 0 {
		fmt.Fprintf(&b, ":%d", e.Line)
		if e.Column > 0 {
			fmt.Fprintf(&b, ":%d", e.Column)
		}
	}
	b.WriteString(": " + e.Msg)
	if e.Hint != "" {
		b.WriteString(" (" + e.Hint + ")")
	}
	return b.String()
}

// Format says how a file is read from its name: "json" or "yaml".
func Format(path string) (string, error) {
	switch strings.ToLower(filepath.Ext(path)) {
	case ".json":
		return "json", nil
	case ".yaml", ".yml":
		return "yaml", nil
	}
	return "", &Error{File: path, Msg: fmt.Sprintf("cannot tell the format from the extension %q", filepath.Ext(path)),
		Hint: "name the file *.json for JSON or *.yaml / *.yml for YAML"}
}

// ReadFile reads a document's bytes, refusing files over MaxBytes and
// skipping a UTF-8 byte-order mark.
func ReadFile(path string) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, MaxBytes+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if len(data) > MaxBytes {
		return nil, &Error{File: path, Msg: fmt.Sprintf("larger than %d MiB", MaxBytes>>20), Hint: "a profile, policy, rules file or sidecar is a few kilobytes; is this the right file?"}
	}
	return bytes.TrimPrefix(data, []byte("\xef\xbb\xbf")), nil
}

// Decode reads data (the contents of path) into v. Members v does not have
// are errors, so a misspelt key is never silently ignored. An empty YAML
// document (blank, or only comments) leaves v as it is.
func Decode(path string, data []byte, v any) error {
	format, err := Format(path)
	if err != nil {
		return err
	}
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	if err := checkDepth(path, format, data); err != nil {
		return err
	}
	if format == "json" {
		dec := json.NewDecoder(bytes.NewReader(data))
		dec.DisallowUnknownFields()
		if err := dec.Decode(v); err != nil {
			return jsonError(path, data, err)
		}
		if _, err := dec.Token(); err != io.EOF {
			line, col := LineColumn(data, int(dec.InputOffset()))
			return &Error{File: path, Line: line, Column: col, Msg: "text after the end of the JSON value", Hint: "a document is one JSON object"}
		}
		return nil
	}
	var root yaml.Node
	if err := yaml.Unmarshal(data, &root); err != nil {
		return yamlError(path, err)
	}
	if len(root.Content) == 0 {
		return nil // an empty YAML document (blank or only comments) leaves v as it is
	}
	if err := checkYAMLNodes(path, &root); err != nil {
		return err
	}
	dec := yaml.NewDecoder(bytes.NewReader(data))
	dec.KnownFields(true)
	if err := dec.Decode(v); err != nil {
		return yamlError(path, err)
	}
	return nil
}

// Tree reads data (the contents of path) as plain values: map[string]any,
// []any, string, int64 (whole numbers written without a fraction or
// exponent), float64, bool and nil. Places maps each value's JSON Pointer
// (RFC 6901) to its line and column.
func Tree(path string, data []byte) (v any, places map[string][2]int, err error) {
	format, err := Format(path)
	if err != nil {
		return nil, nil, err
	}
	data = bytes.TrimPrefix(data, []byte("\xef\xbb\xbf"))
	if err := checkDepth(path, format, data); err != nil {
		return nil, nil, err
	}
	places = map[string][2]int{}
	if format == "json" {
		dec := json.NewDecoder(bytes.NewReader(data))
		dec.UseNumber()
		v, err = jsonValue(dec, data, "", places)
		if err == nil {
			if _, e := dec.Token(); e != io.EOF {
				line, col := LineColumn(data, int(dec.InputOffset()))
				return nil, nil, &Error{File: path, Line: line, Column: col, Msg: "text after the end of the JSON value", Hint: "a document is one JSON object"}
			}
			return v, places, nil
		}
		var pe *Error
		if errors.As(err, &pe) {
			pe.File = path
			return nil, nil, pe
		}
		return nil, nil, jsonError(path, data, err)
	}
	var root yaml.Node
	if err := yaml.Unmarshal(data, &root); err != nil {
		return nil, nil, yamlError(path, err)
	}
	if len(root.Content) == 0 {
		return nil, nil, &Error{File: path, Line: 1, Msg: "empty document"}
	}
	budget := maxNodes
	v, err = yamlValue(root.Content[0], "", places, &budget, 0)
	if err != nil {
		var pe *Error
		if errors.As(err, &pe) {
			pe.File = path
			return nil, nil, pe
		}
		return nil, nil, &Error{File: path, Msg: err.Error()}
	}
	return v, places, nil
}

// LineColumn gives the 1-based line and column of a byte offset in data.
func LineColumn(data []byte, off int) (int, int) {
	off = min(max(off, 0), len(data))
	line := 1 + bytes.Count(data[:off], []byte{'\n'})
	col := off - bytes.LastIndexByte(data[:off], '\n')
	return line, col
}

// checkDepth refuses a document nested deeper than MaxDepth, scanning the
// bytes before any decoder sees them. JSON depth counts brackets outside
// strings; YAML depth counts flow brackets outside quotes plus block
// indentation levels.
func checkDepth(path, format string, data []byte) error {
	if format == "json" {
		depth, inStr, esc := 0, false, false
		for i, c := range data {
			switch {
			case inStr:
				switch {
				case esc:
					esc = false
				case c == '\\':
					esc = true
				case c == '"':
					inStr = false
				}
			case c == '"':
				inStr = true
			case c == '{' || c == '[':
				if depth++; depth > MaxDepth {
					line, col := LineColumn(data, i)
					return &Error{File: path, Line: line, Column: col, Msg: fmt.Sprintf("nested deeper than %d levels", MaxDepth), Hint: "muarc's documents need fewer than 10 levels; is this the right file?"}
				}
			case c == '}' || c == ']':
				depth--
			}
		}
		return nil
	}
	// YAML: flow brackets, and indentation as a bound on block depth.
	depth, quote := 0, byte(0)
	lineStart, line := true, 1
	indents := []int{}
	for i := 0; i < len(data); i++ {
		c := data[i]
		if lineStart {
			n := 0
			for i+n < len(data) && (data[i+n] == ' ' || data[i+n] == '-') {
				n++
			}
			if i+n < len(data) && data[i+n] != '\n' && data[i+n] != '#' && quote == 0 && depth == 0 {
				for len(indents) > 0 && indents[len(indents)-1] >= n {
					indents = indents[:len(indents)-1]
				}
				indents = append(indents, n)
				if len(indents) > MaxDepth {
					return &Error{File: path, Line: line, Column: n + 1, Msg: fmt.Sprintf("nested deeper than %d levels", MaxDepth), Hint: "muarc's documents need fewer than 10 levels; is this the right file?"}
				}
			}
			lineStart = false
		}
		switch {
		case c == '\n':
			line++
			lineStart = true
		case quote != 0:
			if c == quote {
				quote = 0
			}
		case c == '"' || c == '\'':
			quote = c
		case c == '#':
			for i < len(data) && data[i] != '\n' {
				i++
			}
			i--
		case c == '[' || c == '{':
			if depth++; depth+len(indents) > MaxDepth {
				return &Error{File: path, Line: line, Msg: fmt.Sprintf("nested deeper than %d levels", MaxDepth), Hint: "muarc's documents need fewer than 10 levels; is this the right file?"}
			}
		case c == ']' || c == '}':
			depth = max(depth-1, 0)
		}
	}
	return nil
}

// checkYAMLNodes refuses alias bombs: a document whose aliases expand to
// more than maxNodes values.
func checkYAMLNodes(path string, root *yaml.Node) error {
	budget := maxNodes
	var walk func(n *yaml.Node, depth int) error
	walk = func(n *yaml.Node, depth int) error {
		if budget--; budget < 0 {
			return &Error{File: path, Line: n.Line, Column: n.Column, Msg: "too many values (aliases repeat nodes too often)"}
		}
		if depth > MaxDepth {
			return &Error{File: path, Line: n.Line, Column: n.Column, Msg: fmt.Sprintf("nested deeper than %d levels", MaxDepth)}
		}
		if n.Kind == yaml.AliasNode && n.Alias != nil {
			return walk(n.Alias, depth+1)
		}
		for _, c := range n.Content {
			if err := walk(c, depth+1); err != nil {
				return err
			}
		}
		return nil
	}
	return walk(root, 0)
}

func jsonError(path string, data []byte, err error) error {
	var se *json.SyntaxError
	var ue *json.UnmarshalTypeError
	switch {
	case errors.As(err, &se):
		line, col := LineColumn(data, int(se.Offset)-1) // Offset is just past the offending byte
		return &Error{File: path, Line: line, Column: col, Msg: "not valid JSON: " + se.Error(), Hint: "check brackets, commas and quotes near this place"}
	case errors.As(err, &ue):
		line, col := LineColumn(data, int(ue.Offset))
		msg := fmt.Sprintf("%s: a %s where %s is expected", ue.Field, ue.Value, ue.Type)
		if ue.Field == "" {
			msg = fmt.Sprintf("a %s where %s is expected", ue.Value, ue.Type)
		}
		return &Error{File: path, Line: line, Column: col, Msg: msg}
	case errors.Is(err, io.EOF), errors.Is(err, io.ErrUnexpectedEOF):
		line, col := LineColumn(data, len(data))
		return &Error{File: path, Line: line, Column: col, Msg: "the JSON ends too early", Hint: "check for a missing closing bracket or quote"}
	}
	msg := strings.TrimPrefix(err.Error(), "json: ")
	if k, ok := strings.CutPrefix(msg, "unknown field "); ok {
		name, _ := strconv.Unquote(k)
		if i := bytes.Index(data, []byte(strconv.Quote(name))); i >= 0 {
			line, col := LineColumn(data, i)
			return &Error{File: path, Line: line, Column: col, Msg: "unknown member " + k, Hint: "check the spelling against the documentation"}
		}
		return &Error{File: path, Msg: "unknown member " + k, Hint: "check the spelling against the documentation"}
	}
	return &Error{File: path, Msg: msg}
}

func yamlError(path string, err error) error {
	s := strings.TrimPrefix(err.Error(), "yaml: ")
	var te *yaml.TypeError
	if errors.As(err, &te) && len(te.Errors) > 0 {
		s = te.Errors[0]
	}
	line := 0
	if i := strings.Index(s, "line "); i >= 0 {
		j := i + 5
		for j < len(s) && s[j] >= '0' && s[j] <= '9' {
			j++
		}
		line, _ = strconv.Atoi(s[i+5 : j])
		s = strings.TrimLeft(s[:i]+s[j:], ": ")
	}
	if strings.Contains(s, "not found in type") {
		if f, _, ok := strings.Cut(strings.TrimPrefix(s, "field "), " not found"); ok {
			return &Error{File: path, Line: line, Msg: "unknown member " + strconv.Quote(f), Hint: "check the spelling against the documentation"}
		}
	}
	return &Error{File: path, Line: line, Msg: "not valid YAML: " + s, Hint: "check the indentation near this line"}
}

// jsonValue decodes one JSON value, keeping whole numbers as int64 and
// recording each value's place.
func jsonValue(dec *json.Decoder, data []byte, ptr string, places map[string][2]int) (any, error) {
	off := skipJSONSpace(data, int(dec.InputOffset()))
	line, col := LineColumn(data, off)
	places[ptr] = [2]int{line, col}
	tok, err := dec.Token()
	if err != nil {
		return nil, err
	}
	switch t := tok.(type) {
	case json.Delim:
		switch t {
		case '{':
			m := map[string]any{}
			for dec.More() {
				kOff := skipJSONSpace(data, int(dec.InputOffset()))
				kt, err := dec.Token()
				if err != nil {
					return nil, err
				}
				k, _ := kt.(string)
				if _, dup := m[k]; dup {
					l, c := LineColumn(data, kOff)
					return nil, &Error{Line: l, Column: c, Msg: fmt.Sprintf("key %q given twice", k), Hint: "give each member once"}
				}
				v, err := jsonValue(dec, data, ptr+"/"+EscapePointer(k), places)
				if err != nil {
					return nil, err
				}
				m[k] = v
			}
			if _, err := dec.Token(); err != nil {
				return nil, err
			}
			return m, nil
		case '[':
			out := []any{}
			for i := 0; dec.More(); i++ {
				v, err := jsonValue(dec, data, ptr+"/"+strconv.Itoa(i), places)
				if err != nil {
					return nil, err
				}
				out = append(out, v)
			}
			if _, err := dec.Token(); err != nil {
				return nil, err
			}
			return out, nil
		}
	case json.Number:
		if i, err := t.Int64(); err == nil && !strings.ContainsAny(t.String(), ".eE") {
			return i, nil
		}
		f, err := t.Float64()
		if err != nil || math.IsInf(f, 0) {
			return nil, &Error{Line: line, Column: col, Msg: fmt.Sprintf("%s does not fit a 64-bit float", t), Hint: "write the number with fewer digits or in range"}
		}
		return f, nil
	}
	return tok, nil
}

// skipJSONSpace moves past blanks, ':' and ',' to the start of a value.
func skipJSONSpace(data []byte, off int) int {
	for off < len(data) {
		switch data[off] {
		case ' ', '\t', '\r', '\n', ':', ',':
			off++
		default:
			return off
		}
	}
	return off
}

// EscapePointer escapes one JSON Pointer reference token (RFC 6901
// section 3: "~" as "~0", "/" as "~1").
func EscapePointer(s string) string {
	return strings.ReplaceAll(strings.ReplaceAll(s, "~", "~0"), "/", "~1")
}

// yamlValue turns a YAML node into plain values, recording each node's
// place; budget bounds what aliases may expand to.
func yamlValue(n *yaml.Node, ptr string, places map[string][2]int, budget *int, depth int) (any, error) {
	if *budget--; *budget < 0 {
		return nil, &Error{Line: n.Line, Column: n.Column, Msg: "too many values (aliases repeat nodes too often)"}
	}
	if depth > MaxDepth {
		return nil, &Error{Line: n.Line, Column: n.Column, Msg: fmt.Sprintf("nested deeper than %d levels", MaxDepth)}
	}
	places[ptr] = [2]int{n.Line, n.Column}
	switch n.Kind {
	case yaml.DocumentNode:
		if len(n.Content) == 0 {
			return nil, nil
		}
		return yamlValue(n.Content[0], ptr, places, budget, depth)
	case yaml.AliasNode:
		return yamlValue(n.Alias, ptr, places, budget, depth+1)
	case yaml.MappingNode:
		m := map[string]any{}
		for i := 0; i+1 < len(n.Content); i += 2 {
			k := n.Content[i].Value
			if _, dup := m[k]; dup {
				return nil, &Error{Line: n.Content[i].Line, Column: n.Content[i].Column, Msg: fmt.Sprintf("key %q given twice", k), Hint: "give each member once"}
			}
			v, err := yamlValue(n.Content[i+1], ptr+"/"+EscapePointer(k), places, budget, depth+1)
			if err != nil {
				return nil, err
			}
			m[k] = v
		}
		return m, nil
	case yaml.SequenceNode:
		out := make([]any, 0, len(n.Content))
		for i, c := range n.Content {
			v, err := yamlValue(c, ptr+"/"+strconv.Itoa(i), places, budget, depth+1)
			if err != nil {
				return nil, err
			}
			out = append(out, v)
		}
		return out, nil
	case yaml.ScalarNode:
		switch n.ShortTag() {
		case "!!int":
			if i, err := strconv.ParseInt(strings.ReplaceAll(n.Value, "_", ""), 0, 64); err == nil {
				return i, nil
			}
			var f float64
			if err := n.Decode(&f); err == nil && !math.IsInf(f, 0) {
				return f, nil
			}
			return nil, &Error{Line: n.Line, Column: n.Column, Msg: fmt.Sprintf("%s does not fit a 64-bit number", n.Value)}
		case "!!float":
			var f float64
			if err := n.Decode(&f); err != nil {
				return nil, &Error{Line: n.Line, Column: n.Column, Msg: err.Error()}
			}
			if math.IsNaN(f) || math.IsInf(f, 0) {
				return nil, &Error{Line: n.Line, Column: n.Column, Msg: fmt.Sprintf("%s is not a finite number", n.Value), Hint: "leave unknown values out"}
			}
			return f, nil
		case "!!bool":
			var b bool
			if err := n.Decode(&b); err == nil {
				return b, nil
			}
		case "!!null":
			return nil, nil
		}
		// Strings, and timestamps kept as the text written.
		return n.Value, nil
	}
	return nil, &Error{Line: n.Line, Column: n.Column, Msg: "unsupported YAML node"}
}
