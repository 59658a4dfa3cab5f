package convert

import (
	"math"
	"strings"
	"testing"
)

// FuzzSplitRecords: the RFC 4180 splitter never panics, fails only with a
// ParseError, and what it reads, written back quoted, reads the same.
func FuzzSplitRecords(f *testing.F) {
	for _, s := range []string{
		"a,b\n1,\"x\"\"y\"\n", "\"two\nlines\",2\r\n", "a;\"b;c\";d\n", "  a   \"b c\"  d\n", "\"open\n", "a\"b,c\n", "\"a\"b\n", "\t\t\n1\t2\n",
	} {
		f.Add(s, byte(0))
	}
	f.Fuzz(func(t *testing.T, text string, k byte) {
		d := diffDelims[int(k)%4][0]
		var rows []textRow
		err := splitRecords("f", []byte(text), d, 1, func(r textRow) error { rows = append(rows, r); return nil })
		if err != nil {
			if AsParseError(err) == nil {
				t.Fatalf("not a ParseError: %v", err)
			}
			return
		}
		var b strings.Builder
		for _, r := range rows {
			if len(r.raw) != len(r.cells) || len(r.quoted) != len(r.cells) {
				t.Fatalf("row %+v", r)
			}
			for i, c := range r.raw {
				if i > 0 {
					b.WriteByte(d)
				}
				b.WriteString(string(appendQuoted(nil, string(c))))
			}
			b.WriteString("\n")
		}
		var again []textRow
		if err := splitRecords("f", []byte(b.String()), d, 1, func(r textRow) error { again = append(again, r); return nil }); err != nil {
			t.Fatalf("written back %q: %v", b.String(), err)
		}
		if len(again) != len(rows) {
			t.Fatalf("%d rows, %d written back (%q)", len(rows), len(again), b.String())
		}
		for i := range rows {
			for j := range rows[i].raw {
				if string(again[i].raw[j]) != string(rows[i].raw[j]) {
					t.Fatalf("row %d cell %d: %q, written back %q", i, j, rows[i].raw[j], again[i].raw[j])
				}
			}
		}
	})
}

// FuzzPreamble: rate and start lines give a finite value in seconds and
// hertz or an error naming their line; never a value silently dropped.
func FuzzPreamble(f *testing.F) {
	for _, s := range []string{"sampling rate: 2048 Hz", "start: 500 ms", "start [ms]: 5", "start: NaN s", "fs: Inf", "start_s: 1e400", "start: 0"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, line string) {
		k, v, ok := metaLine([]byte(line))
		if !ok {
			return
		}
		meta := []MetaLine{{Key: k, Value: v, Line: 3}}
		if r, at, err := metaRate("f", meta); err != nil {
			if pe := AsParseError(err); pe == nil || pe.Line != 3 {
				t.Fatalf("%q: %v", line, err)
			}
		} else if at > 0 && !(r > 0 && !math.IsInf(r, 0)) {
			t.Fatalf("%q: rate %v", line, r)
		}
		if s, at, err := metaStart("f", meta); err != nil {
			if pe := AsParseError(err); pe == nil || pe.Line != 3 {
				t.Fatalf("%q: %v", line, err)
			}
		} else if at > 0 && (math.IsNaN(s) || math.IsInf(s, 0)) {
			t.Fatalf("%q: start %v", line, s)
		}
	})
}

// FuzzReadHistory: a history table gives operations or a ParseError.
func FuzzReadHistory(f *testing.F) {
	f.Add("action,software,time,details\n\"import\",\"muarc\",\"2026-03-14T09:30:00Z\",\"{\"\"a\"\":1}\"\n")
	f.Add("action,software,time,details\nx,y,not a time,{}\n")
	f.Add("a,b\n")
	dir := f.TempDir()
	f.Fuzz(func(t *testing.T, text string) {
		h, err := ReadHistory(fuzzFile(dir, text))
		if err != nil {
			if AsParseError(err) == nil {
				t.Fatalf("not a ParseError: %v", err)
			}
			return
		}
		for _, op := range h {
			if op.Time.IsZero() && !strings.Contains(text, "0001-01-01") {
				t.Fatalf("zero time from %q", text)
			}
		}
	})
}
