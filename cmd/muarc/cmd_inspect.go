package main

import (
	"fmt"
	"io"
	"os"
	"strings"

	"github.com/spf13/cobra"

	"muarc/h5"
	"muarc/recfile"
	"muarc/record"
)

func init() {
	var asJSON bool
	cmd := &cobra.Command{
		Use:   "inspect FILE",
		Short: "Show the tree of a recording with shapes, types, units and a per-trial summary",
		Args:  cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			ins, err := inspectFile(args[0])
			if err != nil {
				return withExit(2, err)
			}
			if asJSON {
				return printJSON(cmd.OutOrStdout(), ins)
			}
			printInspection(cmd.OutOrStdout(), ins)
			return nil
		},
	}
	cmd.Flags().BoolVar(&asJSON, "json", false, "machine output")
	rootCmd.AddCommand(cmd)
}

// inspection is what `muarc inspect` reports.
type inspection struct {
	File       string          `json:"file"`
	Bytes      int64           `json:"bytes"`
	Layout     string          `json:"layout_version,omitempty"`
	Objects    []inspectObject `json:"objects"`
	Trials     []trialSummary  `json:"trials,omitempty"`
	ReadError  string          `json:"read_error,omitempty"`
	SampleData int64           `json:"sample_bytes"`
}

type inspectObject struct {
	Path    string         `json:"path"`
	Kind    string         `json:"kind"`
	Type    string         `json:"type,omitempty"`
	Shape   []int          `json:"shape,omitempty"`
	Chunk   []int          `json:"chunk,omitempty"`
	Filters []string       `json:"filters,omitempty"`
	Attrs   map[string]any `json:"attributes,omitempty"`
}

// trialSummary is one row of the per-trial table.
type trialSummary struct {
	Trial        string  `json:"trial"`
	Array        string  `json:"array"`
	Muscle       string  `json:"muscle,omitempty"`
	TargetPctMVC float64 `json:"target_pct_mvc"`
	DurationS    float64 `json:"duration_s"`
	Channels     int     `json:"channels"`
	RateHz       float64 `json:"sampling_rate_hz"`
	// Decomposition is the one summarised (record.ReportedDecomposition).
	Decomposition string `json:"decomposition,omitempty"`
	Units         int    `json:"units"`
	Discharges    int    `json:"discharges"`
	// UnitNames are its units as every table and figure names them: the
	// lab's label, the id when there is none (record.Unit.Name).
	UnitNames []string `json:"unit_labels"`
}

func inspectFile(path string) (*inspection, error) {
	if err := checkRecordingInput(path, false); err != nil {
		return nil, err
	}
	fi, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	objs, err := h5.Describe(path)
	if err != nil {
		return nil, err
	}
	ins := &inspection{File: path, Bytes: fi.Size()}
	for _, o := range objs {
		io := inspectObject{Path: o.Path, Kind: "group", Type: o.Type, Shape: o.Shape, Chunk: o.Chunk, Filters: o.Filters}
		if o.IsDataset {
			io.Kind = "dataset"
			if len(o.Shape) == 2 && (o.Type == "float32" || o.Type == "float64") {
				ins.SampleData += int64(o.Shape[0]) * int64(o.Shape[1]) * int64(map[string]int{"float32": 4, "float64": 8}[o.Type])
			}
		}
		if len(o.Attrs) > 0 {
			io.Attrs = map[string]any{}
			for _, a := range o.Attrs {
				io.Attrs[a.Name] = a.Value
			}
		}
		if o.Path == "/" {
			if v, ok := io.Attrs["layout_version"].(string); ok {
				ins.Layout = v
			}
		}
		ins.Objects = append(ins.Objects, io)
	}
	f, err := recfile.Open(path)
	if err != nil {
		// The tree is still worth showing; say why there is no summary.
		ins.ReadError = err.Error()
		return ins, nil
	}
	defer f.Close()
	ins.Trials = summarize(f.Recording())
	return ins, nil
}

func summarize(rec *record.Recording) []trialSummary {
	var out []trialSummary
	for _, t := range rec.Trials {
		for _, a := range t.Arrays {
			_, ch := a.Samples.Shape()
			s := trialSummary{Trial: t.Name, Array: a.Name, Muscle: a.Muscle, TargetPctMVC: t.TargetPctMVC,
				DurationS: a.DurationS(), Channels: ch, RateHz: a.SamplingRateHz}
			if k := record.ReportedDecomposition(a.Decompositions); k >= 0 {
				// The decomposition summarised is the one index and report
				// count (record.ReportedDecomposition); the tree lists every one.
				d := a.Decompositions[k]
				s.Decomposition = d.Name
				s.Units = len(d.Units)
				s.UnitNames = []string{}
				for _, u := range d.Units {
					s.Discharges += len(u.Discharges)
					s.UnitNames = append(s.UnitNames, u.Name())
				}
			}
			out = append(out, s)
		}
	}
	return out
}

func printInspection(w io.Writer, ins *inspection) {
	fmt.Fprintf(w, "%s  (%s, layout %s)\n", ins.File, humanBytes(ins.Bytes), ins.Layout)
	for _, o := range ins.Objects {
		depth := strings.Count(o.Path, "/")
		if o.Path == "/" {
			depth = 0
		}
		indent := strings.Repeat("  ", depth)
		name := o.Path[strings.LastIndex(o.Path, "/")+1:]
		if o.Path == "/" {
			name = "/"
		}
		line := indent + name
		if o.Kind == "dataset" {
			line += fmt.Sprintf("  %s %v", o.Type, o.Shape)
			if o.Chunk != nil {
				line += fmt.Sprintf(" chunks %v %s", o.Chunk, strings.Join(o.Filters, "+"))
			}
		} else if o.Path != "/" {
			line += "/"
		}
		fmt.Fprintln(w, line)
		for _, k := range keyAttrs(o.Attrs) {
			fmt.Fprintf(w, "%s    @%s = %v\n", indent, k, o.Attrs[k])
		}
	}
	if ins.ReadError != "" {
		fmt.Fprintf(w, "\nnot a readable muarc recording: %s\n", ins.ReadError)
		return
	}
	fmt.Fprintln(w)
	tw := newTable(w, "trial", "array", "muscle", "%MVC", "s", "channels", "Hz", "decomposition", "units", "discharges")
	for _, s := range ins.Trials {
		tw.row(s.Trial, s.Array, s.Muscle, fmtNum(s.TargetPctMVC), fmt.Sprintf("%.2f", s.DurationS), s.Channels, fmtNum(s.RateHz), s.Decomposition, s.Units, s.Discharges)
	}
	tw.flush()
	fmt.Fprintln(w, "\nunits (the lab's labels; muarc's id where a unit has none):")
	for _, s := range ins.Trials {
		if len(s.UnitNames) > 0 {
			fmt.Fprintf(w, "  %s/%s/%s: %s\n", s.Trial, s.Array, s.Decomposition, strings.Join(s.UnitNames, " "))
		}
	}
}

// keyAttrs picks the attributes worth a line in the tree, in a fixed order:
// units, rates and levels, not every free-text field. The names are the
// layout's (schema.Fields); the list is a choice of what to show, so it is
// spelled here.
func keyAttrs(m map[string]any) []string {
	var out []string
	for _, k := range []string{"layout", "layout_version", "created", "software", "id", "muscle", "side", "rows", "columns", "ied_mm",
		"task", "target_pct_mvc", "mvc", "mvc_unit", "sampling_rate_hz", "start_s", "unit", "method", "edited_by_hand", "first_lag",
		"scale_factor", "add_offset", "units", "text_decimals"} {
		if _, ok := m[k]; ok {
			out = append(out, k)
		}
	}
	return out
}
