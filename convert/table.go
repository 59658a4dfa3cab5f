package convert

import (
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"strings"
)

// Dialect is how a delimited text file is written.
type Dialect struct {
	// Delimiter is ',', ';' or '\t', or ' ' for runs of blanks (spaces and
	// tabs) between fields.
	Delimiter byte
	// DecimalComma is true when ',' is the decimal separator (only with a
	// delimiter other than ',').
	DecimalComma bool
	// Header is true when the first table line names the columns.
	Header bool
	// Detected is true when the delimiter was detected rather than given;
	// Why says how it was decided.
	Detected bool
	Why      string
}

// DelimiterName names a delimiter in words.
func DelimiterName(d byte) string {
	switch d {
	case ',':
		return "comma"
	case ';':
		return "semicolon"
	case '\t':
		return "tab"
	case ' ':
		return "whitespace"
	}
	return fmt.Sprintf("%q", d)
}

// ParseDelimiter reads a delimiter option: "" or "auto" (detect), ",",
// "comma", ";", "semicolon", "tab", "\t", "space", "whitespace".
func ParseDelimiter(s string) (byte, error) {
	switch strings.ToLower(s) {
	case "", "auto":
		return 0, nil
	case ",", "comma":
		return ',', nil
	case ";", "semicolon":
		return ';', nil
	case "tab", "\t", `\t`, "tsv":
		return '\t', nil
	case " ", "space", "whitespace", "blank", "blanks":
		return ' ', nil
	}
	return 0, fmt.Errorf("delimiter %q: want auto, comma, semicolon, tab or whitespace", s)
}

// TextOptions are the reading options shared by every delimited reader.
type TextOptions struct {
	// Delimiter is 0 to detect, else ',', ';', '\t' or ' ' (runs of blanks).
	Delimiter byte
	// Header is "auto" (or ""), "yes" or "no".
	Header string
	// DecimalComma is "auto" (or ""), "yes" or "no".
	DecimalComma string
}

// MetaLine is one "key: value" line read above a table.
type MetaLine struct {
	Key, Value string
	Line       int
}

// layout is what was learned about a text file before its table body.
type layout struct {
	file    string
	size    int64
	bom     bool
	crlf    bool
	dialect Dialect
	meta    []MetaLine
	// header holds the header cells (trimmed, unquoted) when there is one.
	header     []string
	headerLine int
	// bodyOffset is the byte offset where table rows start (after the
	// header) and bodyLine the line number of that byte.
	bodyOffset int64
	bodyLine   int
	// firstRowLine is the line number of the first table row (0 if none).
	firstRowLine int
	// fields is the field count of the first table line (header or row).
	fields int
	notes  []string
}

const sampleBytes = 256 << 10

// isComment reports whether a line (already trimmed of leading blanks) is a
// comment: it starts with '#', '%' or "//".
func isComment(l []byte) bool {
	return len(l) > 0 && (l[0] == '#' || l[0] == '%' || (l[0] == '/' && len(l) > 1 && l[1] == '/'))
}

// blankLine reports whether a line holds no cells: nothing but spaces and
// CR, and tabs unless tab is the delimiter (a line of tabs is a row of
// empty cells there).
func blankLine(l []byte, d byte) bool {
	for _, c := range l {
		if c != ' ' && c != '\r' && (c != '\t' || d == '\t') {
			return false
		}
	}
	return true
}

func trimBlank(b []byte) []byte {
	i, j := 0, len(b)
	for i < j && (b[i] == ' ' || b[i] == '\t' || b[i] == '\r') {
		i++
	}
	for j > i && (b[j-1] == ' ' || b[j-1] == '\t' || b[j-1] == '\r') {
		j--
	}
	return b[i:j]
}

// trimLine trims a table line: blanks and '\r' at both ends, but not tabs
// when tab is the delimiter (an empty first or last cell is still a cell).
func trimLine(b []byte, d byte) []byte {
	if d != '\t' {
		return trimBlank(b)
	}
	i, j := 0, len(b)
	for i < j && b[i] == ' ' {
		i++
	}
	for j > i && (b[j-1] == ' ' || b[j-1] == '\r') {
		j--
	}
	return b[i:j]
}

// metaLine recognises "key: value" (key starts with a letter and holds none
// of the delimiters ',', ';' or tab).
func metaLine(l []byte) (key, value string, ok bool) {
	k := bytes.IndexByte(l, ':')
	if k <= 0 {
		return "", "", false
	}
	c := l[0]
	if !(c >= 'a' && c <= 'z' || c >= 'A' && c <= 'Z') {
		return "", "", false
	}
	if bytes.ContainsAny(l[:k], ",;\t") {
		return "", "", false
	}
	return string(trimBlank(l[:k])), string(trimBlank(l[k+1:])), true
}

// splitFields splits one line into cells (RFC 4180 quoting, see
// splitRecords) for detection; a line that does not split cleanly gives
// what it split into before the problem.
func splitFields(l []byte, d byte) [][]byte {
	cells, _ := splitLine(l, d)
	return cells
}

// readLayout reads the start of a file: BOM, comments, the "key: value"
// block, the dialect and the header.
func readLayout(path string, opt TextOptions) (*layout, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	st, err := f.Stat()
	if err != nil {
		return nil, err
	}
	if st.IsDir() {
		return nil, perr(path, 0, 0, "give a file, not a folder", "is a folder")
	}
	buf := make([]byte, sampleBytes)
	n, err := io.ReadFull(f, buf)
	if err != nil && err != io.ErrUnexpectedEOF && err != io.EOF {
		return nil, err
	}
	buf = buf[:n]
	lay := &layout{file: path, size: st.Size()}
	return lay, lay.scan(buf, int64(n) == st.Size(), opt)
}

func (lay *layout) scan(buf []byte, whole bool, opt TextOptions) error {
	off := 0
	if bytes.HasPrefix(buf, []byte("\xef\xbb\xbf")) {
		lay.bom = true
		off = 3
	}
	type tline struct {
		text []byte
		line int
		off  int // offset of the line start
		end  int // offset after its newline
	}
	var table []tline
	inMeta := true
	line := 0
	for off < len(buf) && len(table) < 21 {
		nl := bytes.IndexByte(buf[off:], '\n')
		var raw []byte
		end := 0
		if nl < 0 {
			if !whole {
				break // a partial last line of the sample
			}
			raw, end = buf[off:], len(buf)
		} else {
			raw, end = buf[off:off+nl], off+nl+1
		}
		line++
		if len(raw) > 0 && raw[len(raw)-1] == '\r' {
			lay.crlf = true
		}
		t := trimBlank(raw)
		switch {
		case len(t) == 0:
			if len(lay.meta) > 0 {
				inMeta = false
			}
		case isComment(t):
		default:
			if inMeta && len(table) == 0 {
				if k, v, ok := metaLine(t); ok {
					lay.meta = append(lay.meta, MetaLine{k, v, line})
					break
				}
			}
			inMeta = false
			table = append(table, tline{t, line, off, end})
		}
		off = end
	}
	if len(table) == 0 {
		return perr(lay.file, line, 0, "the file needs a table of numbers: a header line and one row per sample", "no table found (empty file, or only comments and key: value lines)")
	}
	lines := make([][]byte, len(table))
	for i, t := range table {
		lines[i] = t.text
	}
	d := &lay.dialect
	if opt.Delimiter != 0 {
		d.Delimiter = opt.Delimiter
		d.Why = DelimiterName(opt.Delimiter) + " as given"
	} else {
		d.Delimiter, d.Why = detectDelimiter(lines)
		d.Detected = true
	}
	// Decimal comma.
	switch opt.DecimalComma {
	case "yes":
		d.DecimalComma = true
	case "no":
	default:
		if d.Delimiter != ',' && hasDecimalComma(lines, d.Delimiter) {
			d.DecimalComma = true
			d.Why += "; numbers are written with a decimal comma (digits on both sides of ',' and no '.')"
		}
	}
	if d.DecimalComma && d.Delimiter == ',' {
		return perr(lay.file, table[0].line, 0, "give --delimiter semicolon or tab for files with a decimal comma", "a decimal comma cannot be read with a comma delimiter")
	}
	first, err := splitLine(lines[0], d.Delimiter)
	if pe := AsParseError(err); pe != nil {
		pe.File, pe.Line = lay.file, table[0].line
		if pe.Hint == "" {
			pe.Hint = "keep the header on one line"
		}
		return pe
	}
	lay.fields = len(first)
	switch opt.Header {
	case "yes":
		d.Header = true
	case "no":
	default:
		for _, c := range first {
			if _, k := parseNumber(c, d.DecimalComma); k == cellText {
				d.Header = true
				break
			}
		}
	}
	if d.Header {
		lay.header = make([]string, len(first))
		for i, c := range first {
			lay.header[i] = string(c)
		}
		lay.headerLine = table[0].line
		lay.bodyOffset = int64(table[0].end)
		lay.bodyLine = table[0].line + 1
		if len(table) > 1 {
			lay.firstRowLine = table[1].line
		}
	} else {
		lay.bodyOffset = int64(table[0].off)
		lay.bodyLine = table[0].line
		lay.firstRowLine = table[0].line
	}
	return nil
}

// detectDelimiter picks the delimiter under which the sample lines split
// into the same number (at least two) of fields: tab, then semicolon, then
// comma, then blanks. When none is consistent (ragged lists) the one giving
// the most multi-field lines wins.
func detectDelimiter(lines [][]byte) (byte, string) {
	cands := []byte{'\t', ';', ',', ' '}
	best, bestMulti := byte(0), -1
	for _, c := range cands {
		counts := map[int]int{}
		multi := 0
		for _, l := range lines {
			n := len(splitFields(l, c))
			counts[n]++
			if n >= 2 {
				multi++
			}
		}
		if len(counts) == 1 && multi == len(lines) {
			var n int
			for k := range counts {
				n = k
			}
			return c, fmt.Sprintf("%s detected: each of the first %d table lines splits into %d fields on it", DelimiterName(c), len(lines), n)
		}
		if multi > bestMulti {
			best, bestMulti = c, multi
		}
	}
	if bestMulti <= 0 {
		return ',', "a single column (no delimiter found); comma assumed"
	}
	return best, fmt.Sprintf("%s detected: it splits %d of the first %d table lines into several fields (lines differ in length)", DelimiterName(best), bestMulti, len(lines))
}

// hasDecimalComma reports whether numeric-looking cells use ',' between
// digits and no cell uses '.'.
func hasDecimalComma(lines [][]byte, d byte) bool {
	comma := false
	for _, l := range lines {
		for _, c := range splitFields(l, d) {
			if bytes.IndexByte(c, '.') >= 0 {
				if _, k := parseNumber(c, false); k == cellNumber {
					return false
				}
			}
			if i := bytes.IndexByte(c, ','); i > 0 && i < len(c)-1 && isDigit(c[i-1]) && isDigit(c[i+1]) {
				if _, k := parseNumber(c, true); k == cellNumber {
					comma = true
				}
			}
		}
	}
	return comma
}

func isDigit(c byte) bool { return c >= '0' && c <= '9' }

// textRow is one table row read into memory with its line number.
type textRow struct {
	line  int
	cells [][]byte
	// quoted says, per cell, whether it was written in double quotes; raw
	// is each cell as written (unquoted cells keep their blanks).
	quoted []bool
	raw    [][]byte
}

// readRows reads the whole body of a (small) table into memory: discharge
// lists and unit tables.
func readRows(lay *layout) ([]textRow, error) {
	data, err := os.ReadFile(lay.file)
	if err != nil {
		return nil, err
	}
	if int64(len(data)) < lay.bodyOffset {
		return nil, perr(lay.file, 0, 0, "the file must not change while it is read", "file shrank while reading")
	}
	var rows []textRow
	err = splitRecords(lay.file, data[lay.bodyOffset:], lay.dialect.Delimiter, lay.bodyLine, func(r textRow) error {
		rows = append(rows, r)
		return nil
	})
	return rows, err
}

// eachRow streams the table rows of a file to fn without keeping them: the
// cells alias a buffer that the next row reuses.
func eachRow(lay *layout, fn func(line int, cells [][]byte) error) error {
	f, err := os.Open(lay.file)
	if err != nil {
		return err
	}
	defer f.Close()
	if _, err := f.Seek(lay.bodyOffset, io.SeekStart); err != nil {
		return err
	}
	r := bufio.NewReaderSize(f, 1<<20)
	line := lay.bodyLine
	var long []byte
	for {
		l, err := r.ReadSlice('\n')
		if err == bufio.ErrBufferFull {
			long = append(long, l...)
			continue
		}
		if long != nil {
			l = append(long, l...)
			long = nil
		}
		if len(l) > 0 {
			t := trimLine(bytes.TrimSuffix(l, []byte{'\n'}), lay.dialect.Delimiter)
			if bt := trimBlank(t); !blankLine(t, lay.dialect.Delimiter) && !isComment(bt) {
				cells, serr := splitLine(t, lay.dialect.Delimiter)
				if pe := AsParseError(serr); pe != nil {
					pe.File, pe.Line = lay.file, line
					return pe
				}
				if ferr := fn(line, cells); ferr != nil {
					return ferr
				}
			}
			line++
		}
		if err == io.EOF {
			return nil
		}
		if err != nil {
			return err
		}
	}
}

// headRows reads up to n rows (copied); complete is false when there are
// more.
func headRows(lay *layout, n int) (rows []textRow, complete bool, err error) {
	errStop := errors.New("stop")
	err = eachRow(lay, func(line int, cells [][]byte) error {
		if len(rows) == n {
			return errStop
		}
		cp := make([][]byte, len(cells))
		for i, c := range cells {
			cp[i] = append([]byte(nil), c...)
		}
		rows = append(rows, textRow{line: line, cells: cp})
		return nil
	})
	if err == errStop {
		return rows, false, nil
	}
	return rows, err == nil, err
}
