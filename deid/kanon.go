package deid

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"

	"muarc/schema"
)

// DefaultK is the group size the k-anonymity report asks for unless told
// otherwise. 5 is a common choice (a minimum cell size of 5 is frequent in
// statistical disclosure practice — common practice, quoted from memory);
// it is small enough for a lab study of a few dozen people to reach with
// banded ages, heights and masses, and large enough that a group is not one
// family or one team.
const DefaultK = 5

// SubjectQuasi is one subject's quasi-identifiers as written.
type SubjectQuasi struct {
	// Subject is the pseudonym.
	Subject string `json:"subject"`
	QuasiIDs
}

// QuasiNames are the quasi-identifiers the report groups on, in the order
// generalisations are tried. They are the report's names (QuasiIDs' JSON
// keys): "height" and "mass" stand for the exact value or its band. The
// registry fields behind each are in quasiFields.
var QuasiNames = []string{"age_band", "height", "mass", "dominant_side", "sex"}

// quasiFields names, per quasi-identifier, the subject's registry fields
// (schema.Fields) that hold it; dropping the quasi-identifier drops them.
var quasiFields = map[string][]string{
	"age_band":      {"age_years", "age_band"},
	"height":        {"height_cm"},
	"mass":          {"mass_kg"},
	"dominant_side": {"dominant_side"},
	"sex":           {"sex"},
}

// KGroup is one combination of quasi-identifier values and its subjects.
type KGroup struct {
	Values   QuasiIDs `json:"values"`
	Size     int      `json:"size"`
	Subjects []string `json:"subjects"`
}

// KStep is one generalisation and its effect.
type KStep struct {
	// Change says what to do, e.g. "age bands of 20 years" or "drop
	// dominant_side".
	Change string `json:"change"`
	// PolicyHint is the policy setting that makes the change.
	PolicyHint string `json:"policy_hint"`
	// BelowK is how many subjects would still be in groups smaller than k
	// after this step and the ones before it.
	BelowK int `json:"below_k_after"`
}

// KReport is the k-anonymity report over the quasi-identifiers kept.
type KReport struct {
	K        int `json:"k"`
	Subjects int `json:"subjects"`
	Groups   int `json:"groups"`
	// Smallest is the size of the smallest group (the k the data reach).
	Smallest int `json:"smallest_group"`
	// BelowK lists the subjects in groups smaller than K.
	BelowK []string `json:"subjects_below_k"`
	// GroupsBelowK are those groups.
	GroupsBelowK []KGroup `json:"groups_below_k"`
	// Steps are generalisations, applied in order, that would lift the
	// subjects below k: the least costly combination of widened bands and
	// dropped quasi-identifiers that leaves fewest subjects below k, found by
	// trying every combination. Empty when none is needed.
	Steps []KStep `json:"generalisations"`
	// Lifted is true when the steps bring every subject to a group of at
	// least K; otherwise the remaining subjects would have to be withheld.
	Lifted bool `json:"lifted"`
	// Notes say what the report assumed.
	Notes []string `json:"notes,omitempty"`
}

// KAnonymity groups subjects by the quasi-identifiers kept (sex, age band,
// height, mass, dominant side; "" counts as a value of its own) and reports
// the smallest group, the subjects in groups below k and generalisations
// that would lift them. One entry per subject: the caller passes each
// subject once. The policy hints are written in format: "yaml" for a YAML
// policy, else JSON (Policy.Format).
func KAnonymity(subjects []SubjectQuasi, k int, format string) *KReport {
	if k < 1 {
		k = DefaultK
	}
	r := &KReport{K: k, Subjects: len(subjects), BelowK: []string{}, GroupsBelowK: []KGroup{}, Steps: []KStep{}}
	groups := groupBy(subjects)
	r.Groups = len(groups)
	r.Smallest = math.MaxInt
	for _, g := range groups {
		if g.Size < r.Smallest {
			r.Smallest = g.Size
		}
		if g.Size < k {
			r.GroupsBelowK = append(r.GroupsBelowK, g)
			r.BelowK = append(r.BelowK, g.Subjects...)
		}
	}
	if len(groups) == 0 {
		r.Smallest = 0
	}
	sort.Strings(r.BelowK)
	if len(subjects) < k {
		r.Notes = append(r.Notes, fmt.Sprintf("only %d subject(s): no grouping reaches k = %d", len(subjects), k))
	}
	if len(r.BelowK) == 0 {
		r.Lifted = true
		return r
	}
	levels, below := bestLevels(subjects, k)
	// The steps of the chosen combination, in ladder order, each with the
	// count below k once it and the ones before it are applied.
	cur := subjects
	for _, q := range QuasiNames {
		for l := 1; l <= levels[q]; l++ {
			cur = generalise(cur, q, ladders[q][l])
			st := ladders[q][l]
			r.Steps = append(r.Steps, KStep{Change: st.change, PolicyHint: st.hint(format), BelowK: countBelow(cur, k)})
		}
	}
	r.Lifted = below == 0
	if !r.Lifted {
		r.Notes = append(r.Notes, fmt.Sprintf("%d subject(s) stay below k even with these generalisations; withholding them is the remaining choice", below))
	}
	return r
}

// qiWeight is the information a level of generalisation of each
// quasi-identifier costs; sex weighs most, being the coarsest and most used
// in analyses (a choice of ours).
var qiWeight = map[string]int{"age_band": 1, "height": 1, "mass": 1, "dominant_side": 1, "sex": 3}

// bestLevels tries every combination of ladder levels (4*3*3*2*2 = 144) and
// returns the one that leaves fewest subjects below k and, among those, costs
// least; later rungs of a ladder include the earlier ones.
func bestLevels(subjects []SubjectQuasi, k int) (map[string]int, int) {
	var best map[string]int
	bestBelow, bestCost := math.MaxInt, math.MaxInt
	level := map[string]int{}
	var try func(i int)
	try = func(i int) {
		if i == len(QuasiNames) {
			cur := subjects
			cost := 0
			for _, q := range QuasiNames {
				if l := level[q]; l > 0 {
					cur = generalise(cur, q, ladders[q][l])
					cost += l * qiWeight[q]
				}
			}
			b := countBelow(cur, k)
			if b < bestBelow || b == bestBelow && cost < bestCost {
				best = map[string]int{}
				for q, l := range level {
					best[q] = l
				}
				bestBelow, bestCost = b, cost
			}
			return
		}
		q := QuasiNames[i]
		for l := 0; l < len(ladders[q]); l++ {
			level[q] = l
			try(i + 1)
		}
		level[q] = 0
	}
	try(0)
	return best, bestBelow
}

func groupBy(subjects []SubjectQuasi) []KGroup {
	by := map[QuasiIDs]*KGroup{}
	var keys []QuasiIDs
	for _, s := range subjects {
		g := by[s.QuasiIDs]
		if g == nil {
			g = &KGroup{Values: s.QuasiIDs}
			by[s.QuasiIDs] = g
			keys = append(keys, s.QuasiIDs)
		}
		g.Size++
		g.Subjects = append(g.Subjects, s.Subject)
	}
	out := make([]KGroup, 0, len(keys))
	for _, k := range keys {
		g := by[k]
		sort.Strings(g.Subjects)
		out = append(out, *g)
	}
	sort.Slice(out, func(i, j int) bool {
		if out[i].Size != out[j].Size {
			return out[i].Size < out[j].Size
		}
		return fmt.Sprint(out[i].Values) < fmt.Sprint(out[j].Values)
	})
	return out
}

func countBelow(subjects []SubjectQuasi, k int) int {
	n := 0
	for _, g := range groupBy(subjects) {
		if g.Size < k {
			n += g.Size
		}
	}
	return n
}

// rung is one level of a generalisation ladder: width 0 means drop.
type rung struct {
	width  float64
	change string
	// setting is the policy setting that widens ("age_band_years"), or
	// drop the fields that leave the value out.
	setting string
	drop    []string
}

// hint is the policy line of the rung in the policy file's format ("yaml"
// for .yaml and .yml files; anything else is JSON, as the built-in policy).
func (r rung) hint(format string) string {
	yaml := format == "yaml"
	if r.setting != "" {
		if yaml {
			return fmt.Sprintf("%s: %g", r.setting, r.width)
		}
		return fmt.Sprintf("%q: %g", r.setting, r.width)
	}
	var parts []string
	for _, f := range r.drop {
		if yaml {
			parts = append(parts, f+": drop")
		} else {
			parts = append(parts, fmt.Sprintf("%q: \"drop\"", f))
		}
	}
	if yaml {
		return "fields: {" + strings.Join(parts, ", ") + "}"
	}
	return `"fields": {` + strings.Join(parts, ", ") + "}"
}

// ladders: level 0 is "as written". The band hints name the policy's band
// options (Policy's age_band_years, height_band_cm, mass_band_kg); the drop
// hints name the registry fields of quasiFields with their policy paths.
var ladders = map[string][]rung{
	"age_band": {{}, {20, "age bands of 20 years", "age_band_years", nil},
		{40, "age bands of 40 years", "age_band_years", nil},
		{0, "drop the age band", "", dropFields("age_band")}},
	"height": {{}, {20, "height bands of 20 cm", "height_band_cm", nil},
		{0, "drop height", "", dropFields("height")}},
	"mass": {{}, {20, "mass bands of 20 kg", "mass_band_kg", nil},
		{0, "drop mass", "", dropFields("mass")}},
	"dominant_side": {{}, {0, "drop " + quasiFields["dominant_side"][0], "", dropFields("dominant_side")}},
	"sex":           {{}, {0, "drop " + quasiFields["sex"][0], "", dropFields("sex")}},
}

// dropFields are the policy paths of a quasi-identifier's registry fields,
// e.g. "subject.mass_kg", for a hint that drops them. A field the registry
// does not have, or may not drop, is a programming error: it panics when
// the package loads, so every deid test fails.
func dropFields(quasi string) []string {
	var out []string
	for _, name := range quasiFields[quasi] {
		f, ok := schema.FieldByPath(schema.GroupByName("subject").Prefix + "." + name)
		if !ok || !f.Allows(schema.ActDrop) {
			panic(fmt.Sprintf("deid: quasi-identifier %s names subject field %q, which the registry does not have or may not drop", quasi, name))
		}
		out = append(out, f.Path())
	}
	return out
}

// generalise returns a copy with one quasi-identifier widened to width (0:
// dropped).
func generalise(in []SubjectQuasi, q string, r rung) []SubjectQuasi {
	out := make([]SubjectQuasi, len(in))
	for i, s := range in {
		switch q {
		case "age_band":
			s.AgeBand = widenAge(s.AgeBand, r.width)
		case "height":
			s.Height = widenMeasure(s.Height, r.width)
		case "mass":
			s.Mass = widenMeasure(s.Mass, r.width)
		case "dominant_side":
			s.DominantSide = ""
		case "sex":
			s.Sex = ""
		}
		out[i] = s
	}
	return out
}

// widenAge re-bands an age band (or exact age) to width years; 90 or older
// stays. A band that straddles the new boundaries takes the wider band of
// its lower end when it fits, else "<lo> or older" is not guessed: the band
// of its lower bound is used and the upper bound widened to cover it.
func widenAge(band string, width float64) string {
	if band == "" {
		return ""
	}
	if width == 0 {
		return ""
	}
	lo, hi, ok := parseBand(band)
	if !ok {
		return band
	}
	if lo >= 90 {
		return OldestBand
	}
	w := int(width)
	a := int(lo) / w * w
	b := a + w - 1
	for float64(b) < hi && !math.IsInf(hi, 1) {
		b += w
	}
	if b > 89 || math.IsInf(hi, 1) {
		return strconv.Itoa(a) + " or older"
	}
	return fmt.Sprintf("%d-%d", a, b)
}

// widenMeasure re-bands an exact value or a "lo-hi" band to width.
func widenMeasure(v string, width float64) string {
	if v == "" || width == 0 {
		return ""
	}
	lo, hi, ok := parseBand(v)
	if !ok {
		return v
	}
	a := math.Floor(lo/width) * width
	b := a + width
	for b < hi {
		b += width
	}
	return strings.TrimSpace(strconv.FormatFloat(a, 'f', -1, 64) + "-" + strconv.FormatFloat(b, 'f', -1, 64))
}
