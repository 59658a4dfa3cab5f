package convert

import "bytes"

// Text tables other than the numeric signal fast path (unit tables,
// discharge lists, headers) are split by RFC 4180 ("Common Format and MIME
// Type for Comma-Separated Values Files", sections 2.5-2.7): a cell in
// double quotes may hold the delimiter, line breaks and quotes written
// twice (""). Beyond the RFC, as labs write them: the delimiter may be ';',
// tab or runs of blanks (' '), a CR before a line break ends the row too,
// and blank lines and comment lines ('#', '%', "//") between rows are
// skipped. Text cells keep their blanks as written (as Python's csv module
// reads them); numbers and labels are read without them.

// splitRecords splits a table body into rows. line is the line number of
// data[0]; each row carries the line it starts on and, per cell, whether it
// was quoted. fn may keep the cells (they are not reused).
func splitRecords(file string, data []byte, d byte, line int, fn func(textRow) error) error {
	i := 0
	for i < len(data) {
		end := bytes.IndexByte(data[i:], '\n')
		if end < 0 {
			end = len(data)
		} else {
			end += i
		}
		if t := trimBlank(data[i:end]); blankLine(data[i:end], d) || isComment(t) {
			i, line = end+1, line+1
			continue
		}
		row, next, nextLine, err := splitRecord(file, data, i, d, line)
		if err != nil {
			return err
		}
		if err := fn(row); err != nil {
			return err
		}
		i, line = next, nextLine
	}
	return nil
}

// splitRecord reads one row starting at data[i] (line). It returns the
// offset and line after the row's line break. A cell is quoted only when
// its first character is the quote (RFC 4180 section 2.5); text between a
// closing quote and the next delimiter, and a quote inside an unquoted
// cell, are refused rather than read one of several ways.
func splitRecord(file string, data []byte, i int, d byte, line int) (textRow, int, int, error) {
	row := textRow{line: line}
	col := 0
	atEOL := func(k int) bool {
		return k >= len(data) || data[k] == '\n' || data[k] == '\r' && (k+1 >= len(data) || data[k+1] == '\n')
	}
	next := func(k int) int { // offset after the line break at k
		for k < len(data) && data[k] != '\n' {
			k++
		}
		return k + 1
	}
	for {
		col++
		if d == ' ' {
			for i < len(data) && (data[i] == ' ' || data[i] == '\t') {
				i++
			}
			if atEOL(i) {
				return row, next(i), line + 1, nil
			}
		}
		if i < len(data) && data[i] == '"' {
			qline := line
			j := i + 1
			cell := []byte{}
			for {
				if j >= len(data) {
					return row, 0, 0, perr(file, qline, col, "close the quoted cell with \" (write a quote inside a cell twice: \"\")", "a quote opened here is never closed")
				}
				c := data[j]
				if c == '"' {
					if j+1 < len(data) && data[j+1] == '"' {
						cell = append(cell, '"')
						j += 2
						continue
					}
					j++
					break
				}
				if c == '\n' {
					line++
				}
				cell = append(cell, c)
				j++
			}
			row.cells, row.raw, row.quoted = append(row.cells, cell), append(row.raw, cell), append(row.quoted, true)
			switch {
			case atEOL(j):
				return row, next(j), line + 1, nil
			case d == ' ' && (data[j] == ' ' || data[j] == '\t'):
				i = j
			case d != ' ' && data[j] == d:
				i = j + 1
			default:
				return row, 0, 0, perr(file, line, col, "quote the whole cell with nothing between the closing quote and the delimiter, and write a quote inside it twice (\"\")", "text %q after a closing quote", clip(data[j:min(j+10, len(data))]))
			}
			continue
		}
		// An unquoted cell runs to the delimiter or the line's end.
		k := i
		for k < len(data) && data[k] != '\n' && data[k] != d && !(d == ' ' && data[k] == '\t') {
			if data[k] == '"' {
				return row, 0, 0, perr(file, line, col, "quote the whole cell (the quote its first character), and write a quote inside it twice (\"\")", "a quote inside an unquoted cell")
			}
			k++
		}
		raw := data[i:k]
		if atEOL(k) {
			raw = bytes.TrimSuffix(raw, []byte{'\r'})
		}
		row.cells, row.raw, row.quoted = append(row.cells, trimBlank(raw)), append(row.raw, raw), append(row.quoted, false)
		if atEOL(k) {
			return row, next(k), line + 1, nil
		}
		i = k + 1
		if d == ' ' {
			i = k
		}
	}
}

// splitLine splits one line (a header or a sample line) into cells by the
// same rules; a quote left open at the line's end is an error.
func splitLine(l []byte, d byte) ([][]byte, error) {
	var out [][]byte
	err := splitRecords("", l, d, 1, func(r textRow) error {
		if out != nil {
			return perr("", r.line, 0, "", "line break inside a quoted cell")
		}
		out = r.cells
		return nil
	})
	if out == nil {
		out = [][]byte{}
	}
	return out, err
}
