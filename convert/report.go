package convert

import (
	"fmt"
	"io"
	"strings"
)

// WriteText prints the report for a person: the output, then per file
// what was read and the notes (what was found, assumed or not stored).
func (rep *Report) WriteText(w io.Writer) {
	fmt.Fprintf(w, "wrote %s\n", rep.Output)
	for _, f := range rep.Files {
		where := strings.Trim(strings.Join([]string{f.Trial, f.Array, f.Decomposition}, "/"), "/")
		fmt.Fprintf(w, "  %-10s %s", f.Role, f.Name)
		if where != "" {
			fmt.Fprintf(w, " -> %s", where)
		}
		switch f.Role {
		case "emg":
			fmt.Fprintf(w, ": %d rows x %d channels, %g Hz, %s", f.Rows, f.Channels, f.RateHz, f.DTypeWhy)
			if f.JitterS > 0 {
				fmt.Fprintf(w, "; time jitter %.3g s", f.JitterS)
			}
		case "force":
			fmt.Fprintf(w, ": %d rows, %g Hz", f.Rows, f.RateHz)
		case "discharges":
			fmt.Fprintf(w, ": %d units, %d discharges", f.Units, f.Discharges)
		case "units":
			fmt.Fprintf(w, ": %d units", f.Units)
		}
		fmt.Fprintln(w)
		for _, n := range f.Notes {
			fmt.Fprintf(w, "      %s\n", n)
		}
	}
	for _, n := range rep.Notes {
		fmt.Fprintf(w, "  note: %s\n", n)
	}
}
