package main

import (
	"fmt"
	"io"
	"math"
	"strconv"
	"text/tabwriter"
)

// table prints aligned columns for people (tab-separated underneath, so it
// also pastes into a spreadsheet).
type table struct{ tw *tabwriter.Writer }

func newTable(w io.Writer, header ...any) *table {
	t := &table{tabwriter.NewWriter(w, 2, 4, 2, ' ', 0)}
	t.row(header...)
	return t
}

func (t *table) row(cells ...any) {
	for i, c := range cells {
		if i > 0 {
			fmt.Fprint(t.tw, "\t")
		}
		fmt.Fprint(t.tw, c)
	}
	fmt.Fprintln(t.tw)
}

func (t *table) flush() { t.tw.Flush() }

// fmtNum prints a number compactly, "-" for NaN (unknown).
func fmtNum(v float64) string {
	if math.IsNaN(v) {
		return "-"
	}
	return strconv.FormatFloat(v, 'g', 6, 64)
}

// humanBytes prints a size with binary prefixes.
func humanBytes(n int64) string {
	const k = 1024
	switch {
	case n >= k*k*k:
		return fmt.Sprintf("%.2f GiB", float64(n)/(k*k*k))
	case n >= k*k:
		return fmt.Sprintf("%.1f MiB", float64(n)/(k*k))
	case n >= k:
		return fmt.Sprintf("%.1f KiB", float64(n)/k)
	}
	return fmt.Sprintf("%d B", n)
}
