package convert

import (
	"bytes"
	"fmt"
	"os"
	"strings"
)

// dischText is a discharge file cut into its table lines, before any
// reading (delimiter, header, shape, labels, time base) is chosen.
type dischText struct {
	path  string
	bom   bool
	crlf  bool
	lines []dline
	// preamble holds "key: value" lines above the table, read and not
	// stored; comments counts comment lines skipped.
	preamble []MetaLine
	comments int
	// colon is true when every table line is "label: t1 t2 ...".
	colon bool
	// opt are the options the file is read with.
	opt DischargeOptions
}

// dline is one table line: its text (blanks trimmed) and line number.
type dline struct {
	text []byte
	line int
	// key is the label before ':' in the colon form.
	key string
}

// settingKeys are keys that name a setting rather than a unit in a
// "key: value" line with a number after it.
var settingKeys = map[string]bool{"fs": true, "rate": true, "sampling rate": true, "sample rate": true, "sampling frequency": true,
	"start": true, "start time": true, "units": true, "unit count": true, "duration": true, "samples": true,
	"time unit": true, "time base": true, "n": true, "count": true}

// readDischText reads a discharge file into table lines: BOM, CRLF,
// comment lines (#, %, //) and a "key: value" preamble are taken off.
func readDischText(path string) (*dischText, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	if st.IsDir() {
		return nil, perr(path, 0, 0, "give a file, not a folder", "is a folder")
	}
	data, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	t := &dischText{path: path}
	if bytes.HasPrefix(data, []byte("\xef\xbb\xbf")) {
		t.bom = true
		data = data[3:]
	}
	line := 0
	var colonLines int
	for len(data) > 0 {
		nl := bytes.IndexByte(data, '\n')
		var raw []byte
		if nl < 0 {
			raw, data = data, nil
		} else {
			raw, data = data[:nl], data[nl+1:]
		}
		line++
		if len(raw) > 0 && raw[len(raw)-1] == '\r' {
			t.crlf = true
		}
		l := trimBlank(raw)
		if len(l) == 0 {
			continue
		}
		if isComment(l) {
			t.comments++
			continue
		}
		// Tabs at either end are kept: in a tab-delimited file they are
		// empty cells.
		dl := dline{text: bytes.Trim(raw, " \r"), line: line}
		if k, v, ok := colonSplit(l); ok {
			if len(t.lines) == 0 && !numberList(v) {
				t.preamble = append(t.preamble, MetaLine{k, string(v), line})
				continue
			}
			dl.key = k
			colonLines++
		}
		t.lines = append(t.lines, dl)
	}
	if len(t.lines) == 0 {
		return nil, perr(path, line, 0, "a discharge file holds one unit per line, one per column, a unit,time table or a 0/1 matrix", "no table found (empty file, or only comments and key: value lines)")
	}
	if colonLines == len(t.lines) {
		t.colon = true
		for i := range t.lines {
			l := &t.lines[i]
			if settingKeys[strings.ToLower(l.key)] {
				return nil, &ParseError{File: path, Line: l.line, Column: 1, Msg: fmt.Sprintf("%q could be a setting or a unit named %q", clip(l.text), l.key),
					Hint: "muarc takes no settings from a discharge file: make the line a comment (# " + l.key + ": ...) or rename the unit", Example: string(l.text)}
			}
		}
	} else {
		// Leading "key: number" lines above a table are a preamble too.
		for len(t.lines) > 0 && t.lines[0].key != "" {
			l := t.lines[0]
			k, v, _ := colonSplit(l.text)
			t.preamble = append(t.preamble, MetaLine{k, string(v), l.line})
			t.lines = t.lines[1:]
		}
		for i := range t.lines {
			t.lines[i].key = ""
		}
		if len(t.lines) == 0 {
			return nil, perr(path, line, 0, "a discharge file holds one unit per line, one per column, a unit,time table or a 0/1 matrix", "no table found (only key: value lines)")
		}
	}
	return t, nil
}

// colonSplit reads "label: rest" (a label without quotes or delimiters
// before the first ':').
func colonSplit(l []byte) (string, []byte, bool) {
	k := bytes.IndexByte(l, ':')
	if k <= 0 || bytes.ContainsAny(l[:k], ",;\t\"") {
		return "", nil, false
	}
	return string(trimBlank(l[:k])), trimBlank(l[k+1:]), true
}

// numberList reports whether v is empty or a list of numbers under some
// delimiter (blanks, comma, semicolon, tab), decimal point or comma.
func numberList(v []byte) bool {
	if len(v) == 0 {
		return true
	}
	for _, d := range []byte{' ', ',', ';', '\t'} {
		for _, comma := range []bool{false, true} {
			if comma && d == ',' {
				continue
			}
			cells, err := splitCells(v, d)
			if err != nil {
				continue
			}
			ok := true
			for _, c := range cells {
				if _, k := parseNumber(c, comma); k != cellNumber {
					ok = false
					break
				}
			}
			if ok {
				return true
			}
		}
	}
	return false
}

// splitCells splits one line into cells under delimiter d (' ' means runs
// of blanks). Cells are trimmed of blanks; a cell in double quotes is
// unquoted with "" read as one quote (RFC 4180 section 2, on one line).
func splitCells(l []byte, d byte) ([][]byte, error) {
	var out [][]byte
	i := 0
	for {
		if d == ' ' {
			for i < len(l) && (l[i] == ' ' || l[i] == '\t') {
				i++
			}
			if i == len(l) {
				return out, nil
			}
		} else {
			for i < len(l) && (l[i] == ' ' || (l[i] == '\t' && d != '\t')) {
				i++
			}
		}
		if i < len(l) && l[i] == '"' {
			var cell []byte
			j := i + 1
			closed := false
			for j < len(l) {
				if l[j] == '"' {
					if j+1 < len(l) && l[j+1] == '"' {
						cell = append(cell, '"')
						j += 2
						continue
					}
					closed = true
					j++
					break
				}
				cell = append(cell, l[j])
				j++
			}
			if !closed {
				return nil, fmt.Errorf("a quote opened at byte %d is not closed on the line", i+1)
			}
			for j < len(l) && (l[j] == ' ' || (l[j] == '\t' && d != '\t')) {
				j++
			}
			if cell == nil {
				cell = []byte{}
			}
			out = append(out, cell)
			if j == len(l) {
				return out, nil
			}
			if d == ' ' {
				if l[j] != ' ' && l[j] != '\t' && l[j-1] != ' ' && l[j-1] != '\t' {
					return nil, fmt.Errorf("text after a closing quote at byte %d", j+1)
				}
				i = j
				continue
			}
			if l[j] != d {
				return nil, fmt.Errorf("text after a closing quote at byte %d", j+1)
			}
			i = j + 1
			continue
		}
		var j int
		if d == ' ' {
			j = i
			for j < len(l) && l[j] != ' ' && l[j] != '\t' {
				j++
			}
		} else {
			k := bytes.IndexByte(l[i:], d)
			if k < 0 {
				j = len(l)
			} else {
				j = i + k
			}
		}
		out = append(out, trimBlank(l[i:j]))
		if j >= len(l) {
			if d != ' ' && j < len(l) {
				continue
			}
			return out, nil
		}
		if d == ' ' {
			i = j
			continue
		}
		i = j + 1
		if i == len(l) {
			return append(out, []byte{}), nil
		}
	}
}
