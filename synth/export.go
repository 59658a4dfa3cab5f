package synth

import (
	"bufio"
	"bytes"
	"encoding/json"
	"fmt"
	"maps"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"

	"muarc/internal/atomicfile"
	"muarc/internal/fieldbind"
	"muarc/record"
	"muarc/schema"
)

// ExportOptions tune WriteExportsOpt.
type ExportOptions struct {
	// Overwrite replaces existing files; without it an existing file is an
	// error wrapping atomicfile.ErrExists and nothing of it is touched.
	Overwrite bool
	// Progress, when set, is called after each EMG block with the sample
	// rows written so far and the total over all arrays and trials.
	Progress func(done, total int64)
}

// ExportDir is the folder WriteExports(dir) fills for this recording:
// dir/<subject code>.
func (g *Generated) ExportDir(dir string) string {
	return filepath.Join(dir, g.Recording.Subject.ID)
}

// WriteExports writes the recording's plain-text exports and truth.json
// into dir/<subject code>/ (see EXPORTS.md), each file atomically. It
// refuses to replace existing files.
func (g *Generated) WriteExports(dir string) error {
	return g.WriteExportsOpt(dir, ExportOptions{})
}

// WriteExportsOpt is WriteExports with options.
func (g *Generated) WriteExportsOpt(dir string, opt ExportOptions) error {
	rec := g.Recording
	root := g.ExportDir(dir)
	if err := os.MkdirAll(root, 0o755); err != nil {
		return err
	}
	var total, done int64
	for _, t := range rec.Trials {
		for _, a := range t.Arrays {
			n, _ := a.Samples.Shape()
			total += int64(n)
		}
	}
	meta, err := json.MarshalIndent(sidecar(rec), "", "  ")
	if err != nil {
		return err
	}
	if err := atomicfile.WriteFile(filepath.Join(root, "metadata.json"), append(meta, '\n'), opt.Overwrite); err != nil {
		return err
	}
	for _, t := range rec.Trials {
		td := filepath.Join(root, t.Name)
		if err := os.MkdirAll(td, 0o755); err != nil {
			return err
		}
		if err := writeFile(filepath.Join(td, "force.csv"), opt.Overwrite, func(w *bufio.Writer) error { return writeForce(w, t) }); err != nil {
			return err
		}
		for _, a := range t.Arrays {
			err := writeFile(filepath.Join(td, "emg_"+a.Name+".csv"), opt.Overwrite, func(w *bufio.Writer) error {
				return writeEMG(w, a, func(rows int) {
					done += int64(rows)
					if opt.Progress != nil {
						opt.Progress(done, total)
					}
				})
			})
			if err != nil {
				return err
			}
			for _, d := range a.Decompositions {
				stem := a.Name + "_" + d.Name + ".csv"
				if err := writeFile(filepath.Join(td, "discharges_"+stem), opt.Overwrite, func(w *bufio.Writer) error { return writeDischarges(w, d, a.SamplingRateHz) }); err != nil {
					return err
				}
				if err := writeFile(filepath.Join(td, "units_"+stem), opt.Overwrite, func(w *bufio.Writer) error { return writeUnits(w, d) }); err != nil {
					return err
				}
			}
		}
	}
	truth, err := json.Marshal(g.Truth)
	if err != nil {
		return err
	}
	return atomicfile.WriteFile(filepath.Join(root, "truth.json"), append(truth, '\n'), opt.Overwrite)
}

func writeFile(path string, overwrite bool, fill func(*bufio.Writer) error) error {
	return atomicfile.Write(path, overwrite, func(f *os.File) error {
		w := bufio.NewWriterSize(f, 1<<16)
		if err := fill(w); err != nil {
			return err
		}
		return w.Flush()
	})
}

func fmtNum(v float64) string { return strconv.FormatFloat(v, 'f', -1, 64) }

// header writes the "key: value" block and the blank line after it.
func header(w *bufio.Writer, kv ...string) {
	for i := 0; i+1 < len(kv); i += 2 {
		w.WriteString(kv[i] + ": " + kv[i+1] + "\n")
	}
	w.WriteString("\n")
}

func writeForce(w *bufio.Writer, t record.Trial) error {
	f, tg := t.Force, t.ForceTarget
	if len(tg.Values) != len(f.Values) || tg.SamplingRateHz != f.SamplingRateHz {
		return fmt.Errorf("synth: trial %s: force and target differ in length or rate", t.Name)
	}
	header(w, "device", "force transducer (simulated)",
		"quantity", "ankle dorsiflexion force",
		"sampling rate", fmtNum(f.SamplingRateHz)+" Hz",
		"start", fmtNum(f.StartS)+" s",
		"unit", f.Unit,
		"samples", strconv.Itoa(len(f.Values)))
	w.WriteString("time [s],force [" + f.Unit + "],target [" + tg.Unit + "]\n")
	var b []byte
	for k, v := range f.Values {
		b = strconv.AppendFloat(b[:0], f.StartS+float64(k)/f.SamplingRateHz, 'f', -1, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, v, 'f', 4, 64)
		b = append(b, ',')
		b = strconv.AppendFloat(b, tg.Values[k], 'f', 4, 64)
		b = append(b, '\n')
		w.Write(b)
	}
	return nil
}

// emgBlockRows is the row count of one EMG read while exporting.
const emgBlockRows = 2048

func writeEMG(w *bufio.Writer, a record.Array, progress func(rows int)) error {
	rows, ch := a.Samples.Shape()
	header(w, "array", a.Name,
		"muscle", a.Muscle,
		"sampling rate", fmtNum(a.SamplingRateHz)+" Hz",
		"start", fmtNum(a.StartS)+" s",
		"unit", a.Unit,
		"channels", strconv.Itoa(ch),
		"samples", strconv.Itoa(rows))
	w.WriteString("time [s]")
	for _, c := range a.Channels {
		w.WriteString("," + c.Label + " [" + a.Unit + "]")
	}
	w.WriteString("\n")
	buf := make([]float64, emgBlockRows*ch)
	var b []byte
	for r0 := 0; r0 < rows; r0 += emgBlockRows {
		n := min(emgBlockRows, rows-r0)
		blk := buf[:n*ch]
		if err := a.Samples.ReadFloat64(r0, blk); err != nil {
			return err
		}
		for r := range n {
			b = strconv.AppendFloat(b[:0], a.StartS+float64(r0+r)/a.SamplingRateHz, 'f', -1, 64)
			for _, v := range blk[r*ch : (r+1)*ch] {
				b = append(b, ',')
				b = strconv.AppendFloat(b, v, 'f', 2, 64)
			}
			b = append(b, '\n')
			w.Write(b)
		}
		progress(n)
	}
	return nil
}

func writeDischarges(w *bufio.Writer, d record.Decomposition, fs float64) error {
	w.WriteString("unit,time [s]\n")
	var b []byte
	for _, u := range d.Units {
		for _, k := range u.Discharges {
			b = strconv.AppendInt(b[:0], u.ID, 10)
			b = append(b, ',')
			b = strconv.AppendFloat(b, float64(k)/fs, 'f', 6, 64)
			b = append(b, '\n')
			w.Write(b)
		}
	}
	return nil
}

// Unit-table columns: header and decimals.
var unitColumns = []struct {
	head string
	dec  int
	get  func(record.Unit) float64
}{
	{"SIL", 4, func(u record.Unit) float64 { return u.Silhouette }},
	{"PNR [dB]", 2, func(u record.Unit) float64 { return u.PNRdB }},
	{"accuracy [%]", 2, func(u record.Unit) float64 { return u.AccuracyPct }},
	{"CoV ISI", 4, func(u record.Unit) float64 { return u.ISICoV }},
	{"recruitment [%MVC]", 3, func(u record.Unit) float64 { return u.RecruitPctMVC }},
	{"derecruitment [%MVC]", 3, func(u record.Unit) float64 { return u.DerecruitPctMVC }},
	{"initial rate [pps]", 3, func(u record.Unit) float64 { return u.InitialRatePPS }},
	{"mean rate [pps]", 3, func(u record.Unit) float64 { return u.MeanRatePPS }},
}

// extraHeader is an extra column's header: its name with spaces for
// underscores and its unit in brackets.
func extraHeader(c record.Column) string {
	h := strings.ReplaceAll(c.Name, "_", " ")
	if c.Unit != "" {
		h += " [" + c.Unit + "]"
	}
	return h
}

func writeUnits(w *bufio.Writer, d record.Decomposition) error {
	w.WriteString("unit")
	for _, c := range unitColumns {
		w.WriteString("," + c.head)
	}
	for _, c := range d.ExtraColumns {
		w.WriteString("," + extraHeader(c))
	}
	w.WriteString("\n")
	var b []byte
	for i, u := range d.Units {
		b = strconv.AppendInt(b[:0], u.ID, 10)
		for _, c := range unitColumns {
			b = append(b, ',')
			if v := c.get(u); !math.IsNaN(v) {
				b = strconv.AppendFloat(b, v, 'f', c.dec, 64)
			}
		}
		for _, c := range d.ExtraColumns {
			b = append(b, ',')
			switch {
			case c.Values != nil && !math.IsNaN(c.Values[i]):
				b = strconv.AppendFloat(b, c.Values[i], 'f', -1, 64)
			case c.Text != nil:
				b = append(b, c.Text[i]...)
			}
		}
		b = append(b, '\n')
		w.Write(b)
	}
	return nil
}

// obj is a JSON object that keeps its keys in insertion order.
type obj []kv

type kv struct {
	k string
	v any
}

// add appends k unless v is an empty string or a NaN number.
func (o *obj) add(k string, v any) {
	switch x := v.(type) {
	case string:
		if x == "" {
			return
		}
	case float64:
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return
		}
	}
	*o = append(*o, kv{k, v})
}

func (o *obj) extra(e record.Extra) {
	for _, k := range slices.Sorted(maps.Keys(e)) {
		o.add(k, e[k])
	}
}

// MarshalJSON implements json.Marshaler.
func (o obj) MarshalJSON() ([]byte, error) {
	var b bytes.Buffer
	b.WriteByte('{')
	for i, p := range o {
		if i > 0 {
			b.WriteByte(',')
		}
		k, _ := json.Marshal(p.k)
		b.Write(k)
		b.WriteByte(':')
		v, err := json.Marshal(p.v)
		if err != nil {
			return nil, err
		}
		b.Write(v)
	}
	b.WriteByte('}')
	return b.Bytes(), nil
}

// fields appends the registry fields of group that *ptr holds, in
// registry order, leaving out values not known (fieldbind.Value.Known).
func (o *obj) fields(ptr any, group string) {
	for _, b := range fieldbind.Bind(ptr, group) {
		if !b.Known() {
			continue
		}
		v := b.Get()
		if b.Field.Kind == schema.KindJSON {
			v = json.RawMessage(v.(string))
		}
		o.add(b.Name(), v)
	}
}

// sidecar builds the metadata sidecar: the metadata view's study, subject,
// session and trials, without samples and units. Which fields it holds
// follows the field registry (schema.Fields through internal/fieldbind).
func sidecar(r *record.Recording) obj {
	var o obj
	o.add("study", fieldsObj(&r.Study, "study", r.Study.Extra))
	o.add("subject", fieldsObj(&r.Subject, "subject", r.Subject.Extra))
	o.add("session", fieldsObj(&r.Session, "session", r.Session.Extra))
	o.add("trials", objList(r.Trials, func(t *record.Trial) obj {
		to := fieldsObj(t, "trial", t.Extra)
		to.add("arrays", objList(t.Arrays, func(a *record.Array) obj {
			ao := fieldsObj(a, "array", a.Extra)
			ao.add("channels", objList(a.Channels, func(c *record.Channel) obj { return fieldsObj(c, "channel", nil) }))
			ao.add("decompositions", objList(a.Decompositions, func(d *record.Decomposition) obj { return fieldsObj(d, "decomposition", nil) }))
			return ao
		}))
		return to
	}))
	return o
}

// fieldsObj is an object of the registry fields of group that *ptr holds
// and then the extra fields.
func fieldsObj(ptr any, group string, extra record.Extra) obj {
	var o obj
	o.fields(ptr, group)
	o.extra(extra)
	return o
}

// objList is one object per element of xs ([] when none).
func objList[T any](xs []T, f func(*T) obj) []obj {
	out := []obj{}
	for i := range xs {
		out = append(out, f(&xs[i]))
	}
	return out
}
