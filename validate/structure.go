package validate

import (
	"fmt"
	"path"
	"sort"
	"strings"

	"muarc/h5"
	"muarc/record"
	"muarc/schema"
)

// tree indexes the objects h5.Describe found by path.
type tree struct {
	byPath map[string]*h5.Object
	kids   map[string][]string // parent path -> child names in file order
}

func newTree(objs []h5.Object) *tree {
	t := &tree{byPath: map[string]*h5.Object{}, kids: map[string][]string{}}
	for i := range objs {
		o := &objs[i]
		t.byPath[o.Path] = o
		if o.Path != "/" {
			dir := path.Dir(o.Path)
			t.kids[dir] = append(t.kids[dir], path.Base(o.Path))
		}
	}
	return t
}

func (t *tree) group(p string) (*h5.Object, bool) {
	o, ok := t.byPath[p]
	return o, ok && !o.IsDataset && o.Type != "link"
}

func (t *tree) dataset(p string) (*h5.Object, bool) {
	o, ok := t.byPath[p]
	return o, ok && o.IsDataset
}

func attr(o *h5.Object, name string) (h5.Attr, bool) {
	for _, a := range o.Attrs {
		if a.Name == name {
			return a, true
		}
	}
	return h5.Attr{}, false
}

// intReader reads a whole integer dataset (discharge_offsets, units/id, ...).
type intReader func(hdf5Path string) ([]int64, error)

// structure checks the objects of a file against the layout. It returns the
// findings and whether the layout version forbids reading further (a newer
// major version, or no muarc layout at all).
type structure struct {
	t       *tree
	readInt intReader
	add     addFunc
	// version is the file's layout version as read ("" when missing).
	version string
}

func isInt(typ string) bool {
	return strings.HasPrefix(typ, "int") || strings.HasPrefix(typ, "uint")
}
func isString(typ string) bool { return strings.HasPrefix(typ, "string") }

// root checks the root attributes; refuse is the message when the file must
// not be read further.
func (s *structure) root() (refuse string) {
	ro, ok := s.t.group("/")
	if !ok {
		return "no root group"
	}
	la, ok := attr(ro, "layout")
	if !ok {
		s.add("layout.name", "/@layout", "/layout", "this does not look like a muarc file; write it with muarc (`muarc import`)",
			"root attribute layout is missing")
		return "not a muarc recording: the root attribute layout is missing"
	}
	if v, _ := la.Value.(string); v != schema.LayoutName {
		s.add("layout.name", "/@layout", "/layout", "this is not a muarc recording", "root attribute layout is %q, not %q", la.Value, schema.LayoutName)
		return fmt.Sprintf("not a muarc recording: layout is %q", la.Value)
	}
	va, ok := attr(ro, "layout_version")
	v, _ := va.Value.(string)
	if !ok || v == "" {
		s.add("layout.version", "/@layout_version", "/layout_version", "files written by muarc carry layout_version; rewrite the file with muarc",
			"root attribute layout_version is missing")
		return ""
	}
	s.version = v
	if err := schema.CheckReadable(v); err != nil {
		s.add("layout.version", "/@layout_version", "/layout_version", "upgrade muarc, or ask the file's author for a file in layout "+schema.LayoutVersion, "%v", err)
		if maj, _, perr := schema.ParseVersion(v); perr == nil {
			mine, _, _ := schema.ParseVersion(schema.LayoutVersion)
			if maj > mine {
				return err.Error()
			}
		}
	}
	return ""
}

// requireGroup reports a missing group.
func (s *structure) requireGroup(p, jp, hint string) bool {
	if _, ok := s.t.group(p); ok {
		return true
	}
	if o, ok := s.t.byPath[p]; ok {
		s.add("structure.type", p, jp, hint, "%s is a %s, the layout wants a group", p, kindOf(o))
		return false
	}
	s.add("structure.missing", p, jp, hint, "group %s is missing", p)
	return false
}

func kindOf(o *h5.Object) string {
	if o.IsDataset {
		return "dataset"
	}
	if o.Type == "link" {
		return "link"
	}
	return "group"
}

// column checks a 1-D dataset of a column group; n < 0 means any length.
// It returns the dataset's length, or -1 when missing or malformed.
func (s *structure) column(p, jp string, typeOK func(string) bool, want string, n int, required bool, lengthCheck string) int {
	o, ok := s.t.dataset(p)
	if !ok {
		if _, there := s.t.byPath[p]; there {
			s.add("structure.type", p, jp, "write the column as a 1-D dataset", "%s is a group, the layout wants a dataset", p)
		} else if required {
			s.add("structure.missing", p, jp, "rewrite the file with muarc, or add the column", "dataset %s is missing", p)
		}
		return -1
	}
	if !typeOK(o.Type) {
		s.add("structure.type", p, jp, "store the column as "+want, "%s is stored as %s, the layout wants %s", p, o.Type, want)
	}
	if len(o.Shape) != 1 {
		s.add("structure.shape", p, jp, "columns are 1-D, one value per row", "%s has shape %v, the layout wants 1-D", p, o.Shape)
		return -1
	}
	if n >= 0 && o.Shape[0] != n && lengthCheck != "" {
		s.add(lengthCheck, p, jp, "give one value per row", "%s has %d values, want %d", p, o.Shape[0], n)
	}
	return o.Shape[0]
}

func isFloat64(t string) bool { return t == "float64" }
func isUsable(t string) bool  { return t == "uint8" || t == "int8" || t == "bool" }

// check walks the layout: trials, arrays, channels, decompositions.
func (s *structure) check() {
	for _, g := range []string{"study", "subject", "session"} {
		s.requireGroup("/"+g, "/"+g, "every muarc file has /"+g+" (it may carry no attributes)")
	}
	if !s.requireGroup("/trials", "/trials", "every muarc file has /trials") {
		return
	}
	s.listPositions()
	for ti, tn := range s.t.kids["/trials"] {
		tp, tj := "/trials/"+tn, fmt.Sprintf("/trials/%d", ti)
		if !s.requireGroup(tp, tj, "each member of /trials is a trial group") {
			continue
		}
		for _, sig := range []string{"force", "force_target"} {
			o, ok := s.t.dataset(tp + "/" + sig)
			if !ok {
				continue
			}
			sp, sj := o.Path, tj+"/"+sig
			if o.Type != "float64" {
				s.add("structure.type", sp, sj, "store force traces as float64", "%s is stored as %s, the layout wants float64", sp, o.Type)
			}
			if len(o.Shape) != 1 {
				s.add("structure.shape", sp, sj, "force traces are 1-D", "%s has shape %v, the layout wants 1-D", sp, o.Shape)
			}
			if _, ok := attr(o, "sampling_rate_hz"); !ok {
				s.add("structure.missing", sp+"@sampling_rate_hz", sj+"/sampling_rate_hz", "store the trace's sampling rate in Hz", "%s has no sampling_rate_hz attribute", sp)
			}
		}
		ap := tp + "/arrays"
		if _, ok := s.t.byPath[ap]; !ok {
			continue
		}
		if !s.requireGroup(ap, tj+"/arrays", "arrays holds one group per electrode array") {
			continue
		}
		for ai, an := range s.t.kids[ap] {
			s.array(ap+"/"+an, fmt.Sprintf("%s/arrays/%d", tj, ai))
		}
	}
}

func (s *structure) array(p, jp string) {
	ao, ok := s.t.group(p)
	if !s.requireGroup(p, jp, "each member of arrays is an array group") || !ok {
		return
	}
	if _, ok := attr(ao, "sampling_rate_hz"); !ok {
		s.add("structure.missing", p+"@sampling_rate_hz", jp+"/sampling_rate_hz", "store the EMG sampling rate in Hz", "array %s has no sampling_rate_hz attribute", p)
	}
	sp := p + "/samples"
	nch := -1
	so, ok := s.t.dataset(sp)
	switch {
	case !ok:
		s.add("structure.missing", sp, jp, "every array holds its EMG in samples [sample, channel]", "dataset %s is missing", sp)
	default:
		if so.Type != "float32" && so.Type != "float64" && !record.SampleType(so.Type).IsInteger() {
			s.add("structure.type", sp, jp+"/sample_type", "store samples as float32, float64 or integer counts (int8, int16, int32) with scale_factor", "%s is stored as %s, the layout wants float32, float64, int8, int16 or int32", sp, so.Type)
		}
		if record.SampleType(so.Type).IsInteger() {
			s.sampleScale(ao, so, sp, jp)
		}
		if len(so.Shape) != 2 {
			s.add("structure.shape", sp, jp, "samples are 2-D [sample, channel]", "%s has shape %v, the layout wants 2-D", sp, so.Shape)
		} else {
			nch = so.Shape[1]
		}
		if so.Chunk == nil {
			s.add("structure.chunked", sp, jp, "rewrite the file with muarc: samples are chunked so that a channel or a time range reads alone",
				"%s is not chunked", sp)
		}
		if !contains(so.Filters, "fletcher32") {
			s.add("structure.fletcher32", sp, jp, "rewrite the file with muarc: the Fletcher-32 filter lets readers find damaged chunks",
				"%s has no Fletcher-32 checksum filter (filters %v)", sp, so.Filters)
		}
		if so.Chunk != nil && (!contains(so.Filters, "shuffle") || !contains(so.Filters, "deflate")) {
			s.add("structure.compression", sp, jp, "shuffle + deflate usually halve the file; muarc writes them", "%s is stored without shuffle + deflate (filters %v)", sp, so.Filters)
		}
	}
	cp := p + "/channels"
	if s.requireGroup(cp, jp+"/channels", "every array has a channels table (label, row, column, x_mm, y_mm, usable)") {
		cols := []struct {
			name string
			ok   func(string) bool
			want string
		}{
			{"label", isString, "string"}, {"row", isInt, "int32"}, {"column", isInt, "int32"},
			{"x_mm", isFloat64, "float64"}, {"y_mm", isFloat64, "float64"}, {"usable", isUsable, "uint8"},
		}
		for _, c := range cols {
			s.column(cp+"/"+c.name, jp+"/channels", c.ok, c.want, nch, true, "channels.count")
		}
	}
	dp := p + "/decompositions"
	if _, ok := s.t.byPath[dp]; !ok {
		return
	}
	if !s.requireGroup(dp, jp+"/decompositions", "decompositions holds one group per decomposition") {
		return
	}
	for di, dn := range s.t.kids[dp] {
		s.decomposition(dp+"/"+dn, fmt.Sprintf("%s/decompositions/%d", jp, di), nch)
	}
}

var figureColumns = []string{"silhouette", "pnr_db", "accuracy_pct", "isi_cov", "recruit_pct_mvc", "derecruit_pct_mvc", "initial_rate_pps", "mean_rate_pps"}

func (s *structure) decomposition(p, jp string, nch int) {
	if !s.requireGroup(p, jp, "each member of decompositions is a decomposition group") {
		return
	}
	up := p + "/units"
	nunits := -1
	if s.requireGroup(up, jp+"/units", "every decomposition has a units table (id, discharge_count, figures)") {
		nunits = s.column(up+"/id", jp+"/units", isInt, "int64", -1, true, "")
		s.column(up+"/discharge_count", jp+"/units", isInt, "int64", nunits, true, "units.column_length")
		fixed := map[string]bool{"id": true, "discharge_count": true}
		if _, ok := s.t.dataset(up + "/label"); ok {
			// The unit labels as the lab wrote them (since layout 1.1).
			fixed["label"] = true
			s.column(up+"/label", jp+"/units", isString, "string", nunits, false, "units.column_length")
		}
		for _, f := range figureColumns {
			fixed[f] = true
			s.column(up+"/"+f, jp+"/units", isFloat64, "float64", nunits, true, "units.column_length")
		}
		for _, k := range s.t.kids[up] {
			if !fixed[k] {
				s.column(up+"/"+k, jp+"/units", func(t string) bool { return t == "float64" || isString(t) }, "float64 or string", nunits, false, "units.column_length")
			}
		}
	}
	nd := s.column(p+"/discharges", jp+"/units", isInt, "int64", -1, true, "")
	no := s.column(p+"/discharge_offsets", jp+"/units", isInt, "int64", -1, true, "")
	if nunits >= 0 && no >= 0 && no != nunits+1 {
		s.add("offsets.length", p+"/discharge_offsets", jp+"/units", "discharge_offsets has one entry per unit and one more at the end",
			"discharge_offsets has %d entries for %d units, want %d", no, nunits, nunits+1)
	}
	if mo, ok := s.t.dataset(p + "/muaps"); ok {
		if mo.Type != "float32" && mo.Type != "float64" || len(mo.Shape) != 3 ||
			nunits >= 0 && mo.Shape[0] != nunits || nch >= 0 && mo.Shape[1] != nch {
			s.add("muaps.shape", mo.Path, jp+"/muaps", "MUAP templates are float32 [unit, channel, lag]",
				"%s is %s %v for %d units and %d channels", mo.Path, mo.Type, mo.Shape, nunits, nch)
		}
	}
	if s.readInt == nil {
		return
	}
	// Values: offsets, ids and counts are small; read them whole.
	var offs []int64
	if no >= 0 && nd >= 0 {
		var err error
		offs, err = s.readInt(p + "/discharge_offsets")
		if err != nil {
			s.add("content.read", p+"/discharge_offsets", jp+"/units", "the dataset is damaged; restore the file from a copy", "cannot read: %v", err)
			offs = nil
		}
	}
	offsetsOK := len(offs) > 0 && (nunits < 0 || len(offs) == nunits+1)
	if offsetsOK && offs[0] != 0 {
		s.add("offsets.start", p+"/discharge_offsets", jp+"/units", "unit 0 owns discharges[off[0]:off[1]]; off[0] is 0", "discharge_offsets starts at %d, not 0", offs[0])
		offsetsOK = false
	}
	if offsetsOK {
		for k := 1; k < len(offs); k++ {
			if offs[k] < offs[k-1] {
				s.add("offsets.order", p+"/discharge_offsets", fmt.Sprintf("%s/units/%d", jp, k-1), "offsets never decrease: unit k owns discharges[off[k]:off[k+1]]",
					"discharge_offsets decreases at entry %d (%d after %d)", k, offs[k], offs[k-1])
				offsetsOK = false
				break
			}
		}
	}
	if offsetsOK {
		if last := offs[len(offs)-1]; last != int64(nd) {
			s.add("offsets.end", p+"/discharge_offsets", jp+"/units", "the last offset is the length of discharges",
				"discharge_offsets ends at %d, discharges has %d values", last, nd)
			offsetsOK = false
		}
	}
	if nunits > 0 {
		ids, err := s.readInt(up + "/id")
		if err == nil {
			seen := map[int64]int{}
			for k, id := range ids {
				if prev, ok := seen[id]; ok {
					s.add("units.id_unique", fmt.Sprintf("%s/id[%d]", up, k), fmt.Sprintf("%s/units/%d/id", jp, k), "give each unit of a decomposition its own id",
						"units %d and %d share id %d", prev, k, id)
				}
				seen[id] = k
			}
		}
		counts, err := s.readInt(up + "/discharge_count")
		// Counts are checked against offsets only when the offsets hold.
		if err == nil && offsetsOK && len(offs) == len(counts)+1 {
			for k, c := range counts {
				if offs[k+1]-offs[k] != c {
					s.add("units.discharge_count", fmt.Sprintf("%s/discharge_count[%d]", up, k), fmt.Sprintf("%s/units/%d/discharge_count", jp, k),
						"discharge_count is the unit's number of discharges (off[k+1]-off[k])",
						"unit row %d has discharge_count %d but owns %d discharges", k, c, offs[k+1]-offs[k])
				}
			}
		}
	}
}

func contains(xs []string, x string) bool {
	for _, v := range xs {
		if v == x {
			return true
		}
	}
	return false
}

// unreadHint says what muarc's commands do with a part it does not read.
const unreadHint = "muarc does not read it: pack copies it with the file, stats --write refuses to rewrite the file while it is there, deidentify and export leave it out"

// unexpected notes objects at the layout's fixed levels that the layout does
// not name.
func (s *structure) unexpected() {
	known := map[string][]string{
		"/": {"study", "subject", "session", "trials", "provenance"},
	}
	var ps []string
	for p := range known {
		ps = append(ps, p)
	}
	sort.Strings(ps)
	for _, p := range ps {
		for _, k := range s.t.kids[p] {
			if !contains(known[p], k) {
				s.add("structure.unexpected", path.Join(p, k), "", unreadHint, "%s is not part of the layout", path.Join(p, k))
			}
		}
	}
	for _, tn := range s.t.kids["/trials"] {
		tp := "/trials/" + tn
		for _, k := range s.t.kids[tp] {
			if !contains([]string{"force", "force_target", "arrays"}, k) {
				s.add("structure.unexpected", tp+"/"+k, "", unreadHint, "%s is not part of the layout", tp+"/"+k)
			}
		}
		for _, an := range s.t.kids[tp+"/arrays"] {
			ap := tp + "/arrays/" + an
			for _, k := range s.t.kids[ap] {
				if !contains([]string{"samples", "channels", "decompositions"}, k) {
					s.add("structure.unexpected", ap+"/"+k, "", unreadHint, "%s is not part of the layout", ap+"/"+k)
				}
			}
		}
	}
}

// sampleScale checks the scale of integer samples (layout 1.2): a reader
// needs scale_factor (and add_offset) to get physical values from counts.
func (s *structure) sampleScale(ao, so *h5.Object, sp, jp string) {
	num := func(name string) (float64, bool, bool) {
		a, ok := attr(so, name)
		if !ok {
			return 0, false, true
		}
		v, isNum := a.Value.(float64)
		return v, true, isNum
	}
	sf, hasSF, okSF := num("scale_factor")
	ao2, hasAO, okAO := num("add_offset")
	hint := "integer samples are counts: store scale_factor and add_offset (float64) beside them, as LAYOUT.md says"
	switch {
	case !hasSF:
		s.add("samples.scale", sp+"@scale_factor", jp+"/sample_type", hint, "%s holds %s counts without a scale_factor: a reader cannot get physical values", sp, so.Type)
		return
	case !okSF || hasAO && !okAO:
		s.add("samples.scale", sp+"@scale_factor", jp+"/sample_type", hint, "%s: scale_factor or add_offset is not a float64", sp)
		return
	}
	dec := -1
	if a, ok := attr(so, "text_decimals"); ok {
		v, isInt := a.Value.(int64)
		if !isInt {
			s.add("samples.scale", sp+"@text_decimals", jp+"/sample_type", hint, "%s: text_decimals is not an integer", sp)
			return
		}
		dec = int(v)
	}
	if _, err := record.ScaleFromAttrs(sf, ao2, dec); err != nil {
		s.add("samples.scale", sp+"@scale_factor", jp+"/sample_type", hint, "%s: %v", sp, err)
	}
	if a, ok := attr(so, "units"); ok {
		u, _ := a.Value.(string)
		au, _ := attr(ao, "unit")
		if want, _ := au.Value.(string); u != want {
			s.add("samples.scale", sp+"@units", jp+"/unit", "units on samples is the CF spelling of the array's unit; make them agree", "%s has units %q, the array's unit is %q", sp, u, want)
		}
	}
}
