package convert

import (
	_ "embed"
	"errors"
	"fmt"
	"regexp"
	"sort"
	"strings"

	"muarc/internal/docload"
)

// Profile maps a lab's plain-text exports onto a recording: which file is
// which, how to read them, columns to channels and channel labels to grid
// positions. See PROFILES.md.
type Profile struct {
	// Name identifies the profile in reports and provenance.
	Name string `yaml:"name" json:"name"`
	// Files are path templates relative to a recording folder, with
	// {trial}, {array} and {decomposition} standing for one path part each.
	Files ProfileFiles `yaml:"files" json:"files"`
	// Recordings is a glob (relative to SOURCE_DIR) of the recording
	// folders of a study; "" means every folder holding the metadata file.
	Recordings string            `yaml:"recordings" json:"recordings"`
	Signals    ProfileSignals    `yaml:"signals" json:"signals"`
	Force      ProfileForce      `yaml:"force" json:"force"`
	EMG        ProfileEMG        `yaml:"emg" json:"emg"`
	Discharges ProfileDischarges `yaml:"discharges" json:"discharges"`
	Units      ProfileUnits      `yaml:"units" json:"units"`
	// EDF maps the signals of EDF/BDF files (edf.go).
	EDF ProfileEDF `yaml:"edf" json:"edf"`
	// LabMetadata maps a lab's own metadata files (one per recording,
	// one subjects table per study) onto registry fields (labmeta.go).
	LabMetadata ProfileLabMetadata `yaml:"lab_metadata" json:"lab_metadata"`

	// File is the profile's own path ("" when built in).
	File string `yaml:"-" json:"-"`
}

// ProfileFiles are the path templates of each role.
type ProfileFiles struct {
	Metadata   string `yaml:"metadata" json:"metadata"`
	Force      string `yaml:"force" json:"force"`
	EMG        string `yaml:"emg" json:"emg"`
	Discharges string `yaml:"discharges" json:"discharges"`
	Units      string `yaml:"units" json:"units"`
	// MUAPs and History are the files muarc export writes beside them:
	// MUAP templates per decomposition and the recording's history.
	MUAPs   string `yaml:"muaps" json:"muaps"`
	History string `yaml:"history" json:"history"`
	// DerivedUnits and DerivedMUAPs are the derived figures and derived
	// MUAP templates muarc export writes (read into derived/).
	DerivedUnits string `yaml:"derived_units" json:"derived_units"`
	DerivedMUAPs string `yaml:"derived_muaps" json:"derived_muaps"`
}

// ProfileForce names the force and target columns of a force file.
type ProfileForce struct {
	Column       string `yaml:"column" json:"column"`
	TargetColumn string `yaml:"target_column" json:"target_column"`
	Unit         string `yaml:"unit" json:"unit"`
	// Reading options of force files only, over the signals section.
	ProfileSignals `yaml:",inline"`
}

// ProfileEMG gives the EMG unit and channel positions.
type ProfileEMG struct {
	Unit string `yaml:"unit" json:"unit"`
	// Channels maps a channel label to its grid position and state.
	Channels map[string]ChannelPlace `yaml:"channels" json:"channels"`
	// Columns maps EMG column labels to the channel labels to store.
	Columns map[string]string `yaml:"columns" json:"columns"`
	// Skip lists EMG columns that are not channels (trigger, auxiliary).
	Skip []string `yaml:"skip" json:"skip"`
	// Reading options of EMG files only, over the signals section.
	ProfileSignals `yaml:",inline"`
}

// ChannelPlace is a channel's grid position (0-based), electrode centre in
// mm and usability; absent members are left as they are.
type ChannelPlace struct {
	Row    *int     `yaml:"row" json:"row"`
	Column *int     `yaml:"column" json:"column"`
	XMm    *float64 `yaml:"x_mm" json:"x_mm"`
	YMm    *float64 `yaml:"y_mm" json:"y_mm"`
	Usable *bool    `yaml:"usable" json:"usable"`
}

// ProfileDischarges are the reading options of discharge files.
type ProfileDischarges struct {
	// Delimiter, DecimalComma and Header are the discharge files' own
	// dialect (the signals' settings do not apply to them): "" detects.
	Delimiter    string `yaml:"delimiter" json:"delimiter"`
	DecimalComma string `yaml:"decimal_comma" json:"decimal_comma"`
	Header       string `yaml:"header" json:"header"`
	// Labels says whether each line of a lines file starts with the unit's
	// label: "yes", "no" or "" (detect).
	Labels           string  `yaml:"labels" json:"labels"`
	Shape            string  `yaml:"shape" json:"shape"`
	TimeBase         string  `yaml:"time_base" json:"time_base"`
	FirstIndex       *int    `yaml:"first_index" json:"first_index"`
	ToleranceSamples float64 `yaml:"tolerance_samples" json:"tolerance_samples"`
}

// ProfileUnits maps unit-table headers to layout fields.
type ProfileUnits struct {
	Columns map[string]string `yaml:"columns" json:"columns"`
	// The unit tables' own dialect ("" = detect).
	ProfileTableReading `yaml:",inline"`
}

//go:embed default-profile.yaml
var defaultProfileText []byte

// DefaultProfile is the built-in profile: the file names muarc's own export
// writes (metadata.json, <trial>/force.csv, <trial>/emg_<array>.csv,
// <trial>/discharges_<array>_<decomposition>.csv and
// <trial>/units_<array>_<decomposition>.csv), everything else detected.
func DefaultProfile() *Profile {
	p, err := parseProfile(defaultProfileText, "default-profile.yaml")
	if err != nil {
		panic("convert: built-in profile: " + err.Error())
	}
	p.File = ""
	return p
}

// LoadProfile reads a profile from YAML or JSON (by the file name's
// extension). Members left out take the built-in profile's values.
func LoadProfile(path string) (*Profile, error) {
	data, err := docload.ReadFile(path)
	if err != nil {
		return nil, err
	}
	p, err := parseProfile(data, path)
	if err != nil {
		return nil, err
	}
	p.File = path
	return p, nil
}

func parseProfile(data []byte, path string) (*Profile, error) {
	p := &Profile{}
	if err := docload.Decode(path, data, p); err != nil {
		var de *docload.Error
		if errors.As(err, &de) {
			return nil, &ParseError{File: path, Line: de.Line, Column: de.Column, Msg: "profile: " + de.Msg, Hint: "see convert/PROFILES.md for the members"}
		}
		return nil, err
	}
	def := Profile{Files: ProfileFiles{Metadata: "metadata.json", Force: "{trial}/force.csv", EMG: "{trial}/emg_{array}.csv",
		Discharges: "{trial}/discharges_{array}_{decomposition}.csv", Units: "{trial}/units_{array}_{decomposition}.csv",
		MUAPs: "{trial}/muaps_{array}_{decomposition}.csv", History: "history.csv",
		DerivedUnits: "{trial}/derived_units_{array}_{decomposition}.csv", DerivedMUAPs: "{trial}/derived_muaps_{array}_{decomposition}.csv"}}
	f := &p.Files
	for _, x := range []struct {
		dst *string
		def string
	}{{&f.Metadata, def.Files.Metadata}, {&f.Force, def.Files.Force},
		{&f.EMG, def.Files.EMG}, {&f.Discharges, def.Files.Discharges}, {&f.Units, def.Files.Units},
		{&f.MUAPs, def.Files.MUAPs}, {&f.History, def.Files.History},
		{&f.DerivedUnits, def.Files.DerivedUnits}, {&f.DerivedMUAPs, def.Files.DerivedMUAPs}} {
		if *x.dst == "" {
			*x.dst = x.def
		}
	}
	for role, r := range map[string]*ProfileSignals{"signals": &p.Signals, "force": &p.Force.ProfileSignals, "emg": &p.EMG.ProfileSignals} {
		if err := r.check(role); err != nil {
			return nil, &ParseError{File: path, Msg: "profile: " + err.Error(), Hint: "see convert/PROFILES.md"}
		}
	}
	if _, err := ParseDelimiter(p.Units.Delimiter); err != nil {
		return nil, &ParseError{File: path, Msg: "profile: units: " + err.Error(), Hint: "see convert/PROFILES.md"}
	}
	switch p.Discharges.Shape {
	case "", ShapeColumns, ShapeLong, ShapeLines, ShapeMatrix:
	default:
		return nil, &ParseError{File: path, Msg: fmt.Sprintf("profile: discharges: shape %q", p.Discharges.Shape), Hint: "write columns, long, lines or matrix"}
	}
	switch p.Discharges.TimeBase {
	case "", "s", "ms", "samples":
	default:
		return nil, &ParseError{File: path, Msg: fmt.Sprintf("profile: discharges: time_base %q", p.Discharges.TimeBase), Hint: "write s, ms or samples"}
	}
	if _, err := ParseDelimiter(p.Discharges.Delimiter); err != nil {
		return nil, &ParseError{File: path, Msg: "profile: discharges: " + err.Error(), Hint: "see convert/PROFILES.md"}
	}
	for member, v := range map[string]string{"decimal_comma": p.Discharges.DecimalComma, "header": p.Discharges.Header, "labels": p.Discharges.Labels} {
		switch v {
		case "", "auto", "yes", "no":
		default:
			return nil, &ParseError{File: path, Msg: fmt.Sprintf("profile: discharges: %s %q", member, v), Hint: "write yes or no, or leave it out to detect"}
		}
	}
	if fi := p.Discharges.FirstIndex; fi != nil && *fi != 0 && *fi != 1 {
		return nil, &ParseError{File: path, Msg: fmt.Sprintf("profile: discharges: first_index %d", *fi), Hint: "write 0 or 1, or leave it out"}
	}
	if err := p.LabMetadata.check(); err != nil {
		return nil, &ParseError{File: path, Msg: "profile: " + err.Error(), Hint: "see convert/PROFILES.md, \"A lab's own metadata\""}
	}
	for h, fld := range p.Units.Columns {
		if _, ok := fieldUnits[fld]; !ok {
			return nil, &ParseError{File: path, Msg: fmt.Sprintf("profile: units: column %q maps to unknown field %q", h, fld), Hint: "fields: id, silhouette, pnr_db, accuracy_pct, isi_cov, recruit_pct_mvc, derecruit_pct_mvc, initial_rate_pps, mean_rate_pps"}
		}
	}
	for _, t := range []string{f.Force, f.EMG, f.Discharges, f.Units, f.MUAPs, f.DerivedUnits, f.DerivedMUAPs} {
		if _, err := compileTemplate(t, nil); err != nil {
			return nil, &ParseError{File: path, Msg: "profile: files: " + err.Error(), Hint: "use {trial}, {array} and {decomposition} in file templates"}
		}
	}
	return p, nil
}

func (p *Profile) dischargeOptions() DischargeOptions {
	fi := -1
	if p.Discharges.FirstIndex != nil {
		fi = *p.Discharges.FirstIndex
	}
	d, _ := ParseDelimiter(p.Discharges.Delimiter)
	labels := p.Discharges.Labels
	if labels == "auto" {
		labels = ""
	}
	return DischargeOptions{TextOptions: TextOptions{Delimiter: d, DecimalComma: p.Discharges.DecimalComma, Header: p.Discharges.Header},
		Shape: p.Discharges.Shape, Labels: labels, TimeBase: p.Discharges.TimeBase, FirstIndex: fi, ToleranceSamples: p.Discharges.ToleranceSamples}
}

var placeholder = regexp.MustCompile(`\{(trial|array|decomposition)\}`)

// compileTemplate turns a path template into a regular expression. arrays,
// when given, restricts {array} to those names (longest first) so that
// "discharges_{array}_{decomposition}" splits names holding '_' right.
func compileTemplate(t string, arrays []string) (*regexp.Regexp, error) {
	if t == "" {
		return nil, nil
	}
	if strings.Contains(placeholder.ReplaceAllString(t, ""), "{") {
		return nil, fmt.Errorf("template %q: only {trial}, {array} and {decomposition} may stand in braces", t)
	}
	var b strings.Builder
	b.WriteString("^")
	rest := t
	seen := map[string]bool{}
	for {
		loc := placeholder.FindStringSubmatchIndex(rest)
		if loc == nil {
			b.WriteString(regexp.QuoteMeta(rest))
			break
		}
		b.WriteString(regexp.QuoteMeta(rest[:loc[0]]))
		name := rest[loc[2]:loc[3]]
		if seen[name] {
			return nil, fmt.Errorf("template %q: {%s} given twice", t, name)
		}
		seen[name] = true
		alt := `[^/]+`
		if name == "array" && len(arrays) > 0 {
			as := append([]string(nil), arrays...)
			sort.Slice(as, func(i, j int) bool { return len(as[i]) > len(as[j]) })
			for i := range as {
				as[i] = regexp.QuoteMeta(as[i])
			}
			alt = strings.Join(as, "|")
		}
		b.WriteString("(?P<" + name + ">" + alt + ")")
		rest = rest[loc[1]:]
	}
	b.WriteString("$")
	return regexp.Compile(b.String())
}

// matchTemplate matches a slash-separated relative path; ok false when it
// does not fit.
func matchTemplate(re *regexp.Regexp, rel string) (map[string]string, bool) {
	if re == nil {
		return nil, false
	}
	m := re.FindStringSubmatch(rel)
	if m == nil {
		return nil, false
	}
	out := map[string]string{}
	for i, n := range re.SubexpNames() {
		if n != "" {
			out[n] = m[i]
		}
	}
	return out, true
}
