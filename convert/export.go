package convert

import (
	"bufio"
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"muarc/internal/atomicfile"
	"muarc/recfile"
	"muarc/record"
	"muarc/schema"
)

// ExportOptions control Export.
type ExportOptions struct {
	// Dir is the output folder; files go to Dir/<trial>/ as the built-in
	// profile names them, so that `muarc import` reads them back.
	Dir string
	// Format is "csv" (default), "tsv" or "json" (discharges, units and
	// metadata only).
	Format string
	// Shape is the discharge shape: ShapeLong (default), ShapeColumns,
	// ShapeLines or ShapeMatrix.
	Shape string
	// TimeBase is how discharge times are written: "samples" (default,
	// 0-based indices, exact) or "s" (seconds from the EMG's start time,
	// shortest digits that round back to the same sample).
	TimeBase  string
	Overwrite bool
}

// ExportKinds lists what Export can write.
var ExportKinds = []string{"signals", "discharges", "units", "muaps", "derived", "history", "metadata"}

// Export writes the chosen parts of a muarc file as text and returns the
// files written. Every number is written with the shortest digits that read
// back to the same binary value, so an import of the export gives the same
// recording. Each file is written atomically.
func Export(path string, what []string, opt ExportOptions) ([]string, error) {
	switch opt.Format {
	case "":
		opt.Format = "csv"
	case "csv", "tsv", "json":
	default:
		return nil, fmt.Errorf("--format %q: want csv, tsv or json", opt.Format)
	}
	switch opt.Shape {
	case "":
		opt.Shape = ShapeLong
	case ShapeLong, ShapeColumns, ShapeLines, ShapeMatrix:
	default:
		return nil, fmt.Errorf("--shape %q: want long, columns, lines or matrix", opt.Shape)
	}
	switch opt.TimeBase {
	case "":
		opt.TimeBase = "samples"
	case "samples", "s":
	default:
		return nil, fmt.Errorf("--time-base %q: want samples or s", opt.TimeBase)
	}
	if opt.TimeBase == "s" && opt.Shape == ShapeMatrix {
		return nil, fmt.Errorf("a pulse-train matrix has no times; use --time-base samples")
	}
	f, err := recfile.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	rec := f.Recording()
	var out []string
	ext := "." + opt.Format
	delim := byte(',')
	if opt.Format == "tsv" {
		delim = '\t'
	}
	emit := func(rel string, fill func(w *bufio.Writer) error) error {
		p := filepath.Join(opt.Dir, filepath.FromSlash(rel))
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			return err
		}
		err := atomicfile.Write(p, opt.Overwrite, func(fh *os.File) error {
			w := bufio.NewWriterSize(fh, 1<<20)
			if err := fill(w); err != nil {
				return err
			}
			return w.Flush()
		})
		if err == nil {
			out = append(out, p)
		}
		return err
	}
	for _, k := range what {
		switch k {
		case "metadata":
			view, err := recfile.MetadataView(path)
			if err != nil {
				return out, err
			}
			b, err := json.MarshalIndent(view, "", "  ")
			if err != nil {
				return out, err
			}
			if err := emit("metadata.json", func(w *bufio.Writer) error { _, err := w.Write(append(b, '\n')); return err }); err != nil {
				return out, err
			}
		case "signals":
			if opt.Format == "json" {
				return out, fmt.Errorf("signals are exported as csv or tsv, not json")
			}
			for ti := range rec.Trials {
				t := &rec.Trials[ti]
				if t.Force.Present() {
					if err := emit(t.Name+"/force"+ext, func(w *bufio.Writer) error { return writeForce(w, t, delim) }); err != nil {
						return out, err
					}
				}
				for ai := range t.Arrays {
					a := &t.Arrays[ai]
					if err := emit(t.Name+"/emg_"+a.Name+ext, func(w *bufio.Writer) error { return writeEMG(w, a, delim) }); err != nil {
						return out, err
					}
				}
			}
		case "discharges", "units":
			err := rec.EachDecomposition(func(t *record.Trial, a *record.Array, d *record.Decomposition) error {
				rel := t.Name + "/" + k + "_" + a.Name + "_" + d.Name + ext
				var fill func(w *bufio.Writer) error
				switch {
				case k == "units" && opt.Format == "json":
					fill = func(w *bufio.Writer) error { return unitsJSON(w, d) }
				case k == "units":
					fill = func(w *bufio.Writer) error { return writeUnits(w, d, delim) }
				case opt.Format == "json":
					fill = func(w *bufio.Writer) error { return dischargesJSON(w, d, a) }
				default:
					n, _ := a.Samples.Shape()
					tb := dischargeTime{rate: a.SamplingRateHz, start: a.StartS, seconds: opt.TimeBase == "s"}
					fill = func(w *bufio.Writer) error { return writeDischarges(w, d, opt.Shape, n, delim, tb) }
				}
				return emit(rel, fill)
			})
			if err != nil {
				return out, err
			}
		case "muaps":
			if opt.Format == "json" {
				return out, fmt.Errorf("MUAP templates are exported as csv or tsv, not json")
			}
			err := rec.EachDecomposition(func(t *record.Trial, a *record.Array, d *record.Decomposition) error {
				if d.MUAPs == nil {
					return nil
				}
				return emit(t.Name+"/muaps_"+a.Name+"_"+d.Name+ext, func(w *bufio.Writer) error { return writeMUAPs(w, a, d, delim) })
			})
			if err != nil {
				return out, err
			}
		case "derived": // derived.go
			if err := exportDerived(rec, opt.Format, delim, emit); err != nil {
				return out, err
			}
		case "history":
			if opt.Format == "json" {
				continue // metadata.json holds the history
			}
			if err := emit("history"+ext, func(w *bufio.Writer) error { return writeHistory(w, rec.Provenance.History, delim) }); err != nil {
				return out, err
			}
		default:
			return out, fmt.Errorf("--what %q: want signals, discharges, units, muaps, derived, history or metadata", k)
		}
	}
	return out, nil
}

func fmt64(b []byte, v float64) []byte {
	if math.IsNaN(v) {
		return append(b, "NaN"...)
	}
	return strconv.AppendFloat(b, v, 'g', -1, 64)
}

func header(w *bufio.Writer, kv ...string) {
	for i := 0; i+1 < len(kv); i += 2 {
		w.WriteString(kv[i] + ": " + kv[i+1] + "\n")
	}
	w.WriteString("\n")
}

func bracket(label, unit string) string {
	if unit == "" {
		return label
	}
	return label + " [" + unit + "]"
}

func writeForce(w *bufio.Writer, t *record.Trial, d byte) error {
	f, tg := t.Force, t.ForceTarget
	header(w, "sampling rate", strconv.FormatFloat(f.SamplingRateHz, 'g', -1, 64)+" Hz", "start", strconv.FormatFloat(f.StartS, 'g', -1, 64)+" s")
	w.WriteString("time [s]" + string(d) + bracket("force", f.Unit))
	hasT := tg.Present() && len(tg.Values) == len(f.Values)
	if hasT {
		w.WriteString(string(d) + bracket("target", tg.Unit))
	}
	w.WriteByte('\n')
	var b []byte
	for k, v := range f.Values {
		b = strconv.AppendFloat(b[:0], f.StartS+float64(k)/f.SamplingRateHz, 'f', -1, 64)
		b = append(b, d)
		b = fmt64(b, v)
		if hasT {
			b = append(b, d)
			b = fmt64(b, tg.Values[k])
		}
		b = append(b, '\n')
		w.Write(b)
	}
	return nil
}

func writeEMG(w *bufio.Writer, a *record.Array, d byte) error {
	rows, ch := a.Samples.Shape()
	header(w, "sampling rate", strconv.FormatFloat(a.SamplingRateHz, 'g', -1, 64)+" Hz", "start", strconv.FormatFloat(a.StartS, 'g', -1, 64)+" s",
		"channels", strconv.Itoa(ch), "samples", strconv.Itoa(rows))
	w.WriteString("time [s]")
	for _, c := range a.Channels {
		if strings.ContainsAny(c.Label, ",;\t[]()\"") {
			return fmt.Errorf("channel label %q cannot be written in a header", c.Label)
		}
		w.WriteString(string(d) + bracket(c.Label, a.Unit))
	}
	w.WriteByte('\n')
	const band = 4096
	if cs, ok := a.Samples.(record.CountSource); ok && cs.Scale().Decimals >= 0 {
		return writeCounts(w, cs, a, d, band)
	}
	f64 := a.SampleType == record.Float64
	var b32 []float32
	var b64 []float64
	if f64 {
		b64 = make([]float64, band*ch)
	} else {
		b32 = make([]float32, band*ch)
	}
	var b []byte
	for r0 := 0; r0 < rows; r0 += band {
		n := min(band, rows-r0)
		var err error
		if f64 {
			err = a.Samples.ReadFloat64(r0, b64[:n*ch])
		} else {
			err = a.Samples.ReadFloat32(r0, b32[:n*ch])
		}
		if err != nil {
			return err
		}
		for r := 0; r < n; r++ {
			b = strconv.AppendFloat(b[:0], a.StartS+float64(r0+r)/a.SamplingRateHz, 'f', -1, 64)
			for c := 0; c < ch; c++ {
				b = append(b, d)
				if f64 {
					b = fmt64(b, b64[r*ch+c])
				} else {
					b = appendF32(b, b32[r*ch+c])
				}
			}
			b = append(b, '\n')
			w.Write(b)
		}
	}
	return nil
}

// writeCounts writes the rows of counts that came from decimal text: each
// cell as counts × scale + offset with the decimals the text had, in
// integers (byte for byte the cell that was imported).
func writeCounts(w *bufio.Writer, cs record.CountSource, a *record.Array, d byte, band int) error {
	rows, ch := cs.Shape()
	sc := cs.Scale()
	k := make([]int32, band*ch)
	var b []byte
	for r0 := 0; r0 < rows; r0 += band {
		n := min(band, rows-r0)
		if err := cs.ReadCounts(r0, k[:n*ch]); err != nil {
			return err
		}
		for r := 0; r < n; r++ {
			b = strconv.AppendFloat(b[:0], a.StartS+float64(r0+r)/a.SamplingRateHz, 'f', -1, 64)
			for c := 0; c < ch; c++ {
				b = append(b, d)
				b = sc.AppendText(b, int64(k[r*ch+c]))
			}
			b = append(b, '\n')
			w.Write(b)
		}
	}
	return nil
}

// dischargeTime writes a discharge as a sample index or in seconds.
type dischargeTime struct {
	rate, start float64
	seconds     bool
}

func (t dischargeTime) append(b []byte, k int64) []byte {
	if t.seconds {
		return strconv.AppendFloat(b, t.start+float64(k)/t.rate, 'g', -1, 64)
	}
	return strconv.AppendInt(b, k, 10)
}

func (t dischargeTime) head() string {
	if t.seconds {
		return "time [s]"
	}
	return "sample (0-based)"
}

// unitCell is a unit's label (its id when it has none) as one delimited
// cell, quoted as RFC 4180 section 2 says when it holds the delimiter, a
// quote or a blank at either end. A line break cannot be written in a
// line-per-record discharge file.
func unitCell(u *record.Unit, d byte) (string, error) {
	s := u.Name()
	if strings.ContainsAny(s, "\r\n") {
		return "", fmt.Errorf("unit %d: label %q holds a line break; export the discharges with --format json", u.ID, s)
	}
	if strings.ContainsAny(s, string(d)+"\"\t") || strings.TrimSpace(s) != s || (d == ' ' && strings.ContainsAny(s, " ")) {
		s = `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
	}
	return s, nil
}

func writeDischarges(w *bufio.Writer, dc *record.Decomposition, shape string, samples int, d byte, tb dischargeTime) error {
	ds := string(d)
	var b []byte
	names := make([]string, len(dc.Units))
	for i := range dc.Units {
		var err error
		if names[i], err = unitCell(&dc.Units[i], d); err != nil {
			return err
		}
	}
	switch shape {
	case ShapeLong:
		w.WriteString("unit" + ds + tb.head() + "\n")
		for i, u := range dc.Units {
			for _, k := range u.Discharges {
				b = append(b[:0], names[i]...)
				b = append(b, d)
				b = tb.append(b, k)
				b = append(b, '\n')
				w.Write(b)
			}
		}
	case ShapeLines:
		// The header says that the first column holds labels and how the
		// times are written.
		w.WriteString("unit" + ds + tb.head() + "\n")
		for i, u := range dc.Units {
			b = append(b[:0], names[i]...)
			for _, k := range u.Discharges {
				b = append(b, d)
				b = tb.append(b, k)
			}
			b = append(b, '\n')
			w.Write(b)
		}
	case ShapeColumns:
		longest := 0
		for i, u := range dc.Units {
			if i > 0 {
				w.WriteString(ds)
			}
			if tb.seconds {
				w.WriteString(headCell(dc.Units[i].Name(), " [s]", d))
			} else {
				w.WriteString(headCell(dc.Units[i].Name(), " (0-based)", d))
			}
			longest = max(longest, len(u.Discharges))
		}
		w.WriteByte('\n')
		for r := 0; r < longest; r++ {
			b = b[:0]
			for i, u := range dc.Units {
				if i > 0 {
					b = append(b, d)
				}
				if r < len(u.Discharges) {
					b = tb.append(b, u.Discharges[r])
				}
			}
			b = append(b, '\n')
			w.Write(b)
		}
	case ShapeMatrix:
		for i := range dc.Units {
			if i > 0 {
				w.WriteString(ds)
			}
			w.WriteString(names[i])
		}
		w.WriteByte('\n')
		pos := make([]int, len(dc.Units))
		for r := 0; r < samples; r++ {
			b = b[:0]
			for i, u := range dc.Units {
				if i > 0 {
					b = append(b, d)
				}
				c := byte('0')
				for pos[i] < len(u.Discharges) && u.Discharges[pos[i]] == int64(r) {
					c = '1'
					pos[i]++
				}
				b = append(b, c)
			}
			b = append(b, '\n')
			w.Write(b)
		}
	}
	return nil
}

// fieldHead is a figure's column head: its name and, for a quantity with a
// unit (the registry's), the unit in brackets.
func fieldHead(name string) string {
	f, _ := schema.FieldByPath(schema.GroupByName("unit").Prefix + "." + name)
	if f.Unit == "" || f.Unit == "1" {
		return name
	}
	return bracket(name, f.Unit)
}

func writeUnits(w *bufio.Writer, dc *record.Decomposition, d byte) error {
	ds := string(d)
	w.WriteString("unit" + ds + StoredIDColumn)
	for _, f := range unitFields {
		w.WriteString(ds + fieldHead(f))
	}
	for _, c := range dc.ExtraColumns {
		w.WriteString(ds + bracket(c.Name, c.Unit))
	}
	w.WriteByte('\n')
	var b []byte
	for i := range dc.Units {
		u := &dc.Units[i]
		name, err := unitCell(u, d)
		if err != nil {
			return err
		}
		b = append(b[:0], name...)
		b = append(b, d)
		b = strconv.AppendInt(b, u.ID, 10)
		for _, f := range unitFields {
			b = append(b, d)
			if v := getField(u, f); !math.IsNaN(v) {
				b = strconv.AppendFloat(b, v, 'g', -1, 64)
			}
		}
		for _, c := range dc.ExtraColumns {
			b = append(b, d)
			switch {
			case c.Values != nil:
				if v := c.Values[i]; !math.IsNaN(v) {
					b = strconv.AppendFloat(b, v, 'g', -1, 64)
				}
			case c.Text != nil:
				// Always quoted (RFC 4180 section 2.7): the reader keeps a
				// column whose every cell is quoted as text, so "12" stays
				// text and delimiters, quotes and line breaks read back.
				b = appendQuoted(b, c.Text[i])
			}
		}
		b = append(b, '\n')
		w.Write(b)
	}
	return nil
}

func unitsJSON(w *bufio.Writer, dc *record.Decomposition) error {
	rows := make([]map[string]any, len(dc.Units))
	for i := range dc.Units {
		u := &dc.Units[i]
		m := map[string]any{"id": u.ID, "label": u.Label, "discharge_count": len(u.Discharges)}
		for _, f := range unitFields {
			if v := getField(u, f); !math.IsNaN(v) {
				m[f] = v
			}
		}
		for _, c := range dc.ExtraColumns {
			if c.Values != nil && !math.IsNaN(c.Values[i]) {
				m[c.Name] = c.Values[i]
			} else if c.Text != nil {
				m[c.Name] = c.Text[i]
			}
		}
		rows[i] = m
	}
	return writeJSON(w, rows)
}

func dischargesJSON(w *bufio.Writer, dc *record.Decomposition, a *record.Array) error {
	type unit struct {
		ID      int64   `json:"id"`
		Label   string  `json:"label"`
		Samples []int64 `json:"samples"`
	}
	out := struct {
		RateHz float64 `json:"sampling_rate_hz"`
		StartS float64 `json:"start_s"`
		Units  []unit  `json:"units"`
	}{a.SamplingRateHz, a.StartS, nil}
	for _, u := range dc.Units {
		s := u.Discharges
		if s == nil {
			s = []int64{}
		}
		out.Units = append(out.Units, unit{u.ID, u.Label, s})
	}
	return writeJSON(w, out)
}

func writeJSON(w *bufio.Writer, v any) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(v)
}

// appendQuoted writes s as an RFC 4180 quoted cell: in double quotes, each
// quote inside written twice.
func appendQuoted(b []byte, s string) []byte {
	b = append(b, '"')
	for i := 0; i < len(s); i++ {
		if s[i] == '"' {
			b = append(b, '"')
		}
		b = append(b, s[i])
	}
	return append(b, '"')
}

// headCell is a column header: the unit's label and a time mark, quoted
// when needed.
func headCell(label, mark string, d byte) string {
	s := label + mark
	if strings.ContainsAny(label, string(d)+"\"\t[](") || strings.TrimSpace(label) != label || d == ' ' {
		s = `"` + strings.ReplaceAll(s, `"`, `""`) + `"`
	}
	return s
}

// appendF32 writes a float32 cell at the digits float32 keeps (the
// shortest text that reads back to the same value), NaN as "NaN".
func appendF32(b []byte, v float32) []byte {
	if v != v {
		return append(b, "NaN"...)
	}
	return strconv.AppendFloat(b, float64(v), 'g', -1, 32)
}
