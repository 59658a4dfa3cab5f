package deid

import (
	"crypto/sha256"
	_ "embed"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"path/filepath"
	"sort"
	"strings"

	"muarc/internal/docload"
)

// Action is what a policy does to one metadata field.
type Action string

// Policy actions.
const (
	// Keep copies the value unchanged.
	Keep Action = "keep"
	// Drop leaves the field out of the output.
	Drop Action = "drop"
	// Pseudonymize replaces an identifier by its keyed pseudonym (HMAC-SHA-256
	// under the study key, in short readable form).
	Pseudonymize Action = "pseudonymize"
	// Generalize replaces an exact value by a band: ages to AgeBandYears-wide
	// bands with every age over 89 in "90 or older" (45 CFR
	// 164.514(b)(2)(i)(C)); height and mass to bands of HeightBandCm and
	// MassBandKg.
	Generalize Action = "generalize"
	// Shift moves a date by the subject's offset in whole days, derived from
	// the key and the original subject id: the same in all of that subject's
	// files, so intervals between sessions survive.
	Shift Action = "shift"
	// Year reduces a date to its year.
	Year Action = "year"
	// Scrub keeps free text after removing the subject's own names and ids,
	// e-mail addresses, phone numbers, dates, URLs, IP addresses and long
	// numbers (see ScrubText).
	Scrub Action = "scrub"
)

// DefaultPolicyName is the name of the built-in policy.
const DefaultPolicyName = "muarc-safe-harbor-1"

// defaultPolicyJSON is the built-in policy; POLICY.md explains each line.
//
//go:embed default_policy.json
var defaultPolicyJSON []byte

// DefaultPolicyJSON returns the built-in policy's text (a starting point for
// a study's own policy).
func DefaultPolicyJSON() []byte { return append([]byte(nil), defaultPolicyJSON...) }

// Policy says, per metadata-view path, what de-identification does. Paths are
// those of the metadata view with "[]" for every list element, e.g.
// "subject.name", "trials[].notes", "trials[].arrays[].extra.serial"; an
// extra-field pattern "subject.extra.*" covers all extra fields of a group
// not named on their own. A field the policy does not name is dropped.
type Policy struct {
	// Name identifies the policy in the output's history.
	Name string `json:"name" yaml:"name"`
	// Base, when "muarc-safe-harbor-1", starts from the built-in policy; the
	// fields given here then override it one by one.
	Base        string `json:"base,omitempty" yaml:"base,omitempty"`
	Description string `json:"description,omitempty" yaml:"description,omitempty"`
	// AgeBandYears is the width of age bands in years (default 10).
	AgeBandYears int `json:"age_band_years,omitempty" yaml:"age_band_years,omitempty"`
	// HeightBandCm and MassBandKg are band widths in cm and kg (default 10).
	HeightBandCm float64 `json:"height_band_cm,omitempty" yaml:"height_band_cm,omitempty"`
	MassBandKg   float64 `json:"mass_band_kg,omitempty" yaml:"mass_band_kg,omitempty"`
	// ShiftMaxDays bounds the date shift: offsets are 1..ShiftMaxDays days,
	// earlier or later (default 365).
	ShiftMaxDays int `json:"shift_max_days,omitempty" yaml:"shift_max_days,omitempty"`
	// K is the group size the k-anonymity report asks for (default 5).
	K int `json:"k,omitempty" yaml:"k,omitempty"`
	// Fields maps a metadata-view path to its action.
	Fields map[string]Action `json:"fields" yaml:"fields"`

	sum    string
	format string // "yaml" or "json": the file's format (Format)
}

// Format is the format of the file the policy was read from: "yaml" for
// .yaml and .yml, else "json" (the built-in policy is JSON). Hints that
// propose a policy line are written in it.
func (p *Policy) Format() string {
	if p == nil || p.format == "" {
		return "json"
	}
	return p.format
}

// Default returns the built-in policy.
func Default() *Policy {
	p, err := ParsePolicy(defaultPolicyJSON, "default_policy.json")
	if err != nil {
		panic("deid: built-in policy: " + err.Error()) // a build defect, caught by tests
	}
	return p
}

// LoadPolicy reads a policy file (YAML or JSON).
func LoadPolicy(path string) (*Policy, error) {
	b, err := docload.ReadFile(path)
	if err != nil {
		return nil, err
	}
	return ParsePolicy(b, path)
}

// ParsePolicy parses a policy read from the file name (JSON when it ends
// in .json, YAML when in .yaml or .yml, as every muarc document) and checks
// every path and action. Errors give the file, line and column.
func ParsePolicy(data []byte, name string) (*Policy, error) {
	p := Policy{format: "json"}
	if ext := strings.ToLower(filepath.Ext(name)); ext == ".yaml" || ext == ".yml" {
		p.format = "yaml"
	}
	if err := docload.Decode(name, data, &p); err != nil {
		var de *docload.Error
		if errors.As(err, &de) && de.Hint == "" {
			de.Hint = "a policy has \"name\" and \"fields\"; see deid/POLICY.md"
		}
		return nil, err
	}
	if p.Base != "" {
		if p.Base != DefaultPolicyName {
			return nil, fmt.Errorf("%s: base %q unknown (the only built-in policy is %q)", name, p.Base, DefaultPolicyName)
		}
		base := Default()
		merged := base.Fields
		for k, v := range p.Fields {
			merged[k] = v
		}
		p.Fields = merged
		if p.AgeBandYears == 0 {
			p.AgeBandYears = base.AgeBandYears
		}
		if p.HeightBandCm == 0 {
			p.HeightBandCm = base.HeightBandCm
		}
		if p.MassBandKg == 0 {
			p.MassBandKg = base.MassBandKg
		}
		if p.ShiftMaxDays == 0 {
			p.ShiftMaxDays = base.ShiftMaxDays
		}
		if p.K == 0 {
			p.K = base.K
		}
	}
	if strings.TrimSpace(p.Name) == "" {
		return nil, fmt.Errorf("%s: the policy has no name (give \"name\": it is recorded in the output's history)", name)
	}
	if p.AgeBandYears == 0 {
		p.AgeBandYears = 10
	}
	if p.HeightBandCm == 0 {
		p.HeightBandCm = 10
	}
	if p.MassBandKg == 0 {
		p.MassBandKg = 10
	}
	if p.ShiftMaxDays == 0 {
		p.ShiftMaxDays = 365
	}
	if p.K == 0 {
		p.K = 5
	}
	switch {
	case p.AgeBandYears < 1 || p.AgeBandYears > 90:
		return nil, fmt.Errorf("%s: age_band_years %d outside 1..90", name, p.AgeBandYears)
	case !(p.HeightBandCm > 0 && p.HeightBandCm <= 100):
		return nil, fmt.Errorf("%s: height_band_cm %v outside (0, 100]", name, p.HeightBandCm)
	case !(p.MassBandKg > 0 && p.MassBandKg <= 100):
		return nil, fmt.Errorf("%s: mass_band_kg %v outside (0, 100]", name, p.MassBandKg)
	case p.ShiftMaxDays < 1 || p.ShiftMaxDays > 3650:
		return nil, fmt.Errorf("%s: shift_max_days %d outside 1..3650", name, p.ShiftMaxDays)
	case p.K < 1 || p.K > 1000:
		return nil, fmt.Errorf("%s: k %d outside 1..1000", name, p.K)
	}
	if len(p.Fields) == 0 {
		return nil, fmt.Errorf("%s: no fields: every field would be dropped (start from \"base\": %q)", name, DefaultPolicyName)
	}
	var problems []string
	for path, act := range p.Fields {
		if err := checkField(path, act); err != nil {
			problems = append(problems, err.Error())
		}
	}
	if len(problems) > 0 {
		sort.Strings(problems)
		return nil, fmt.Errorf("%s: %s", name, strings.Join(problems, "; "))
	}
	p.sum = p.computeSum()
	return &p, nil
}

// SHA256 is the lower-case hex SHA-256 of the policy's canonical JSON (the
// effective policy after any base was merged, keys sorted), recorded in the
// output's history. Two files with the same fields and settings have the
// same sum whatever their spacing or key order.
func (p *Policy) SHA256() string {
	if p.sum == "" {
		p.sum = p.computeSum()
	}
	return p.sum
}

func (p *Policy) computeSum() string {
	b, _ := p.CanonicalJSON()
	s := sha256.Sum256(b)
	return hex.EncodeToString(s[:])
}

// CanonicalJSON is the effective policy as JSON with sorted keys and no base.
func (p *Policy) CanonicalJSON() ([]byte, error) {
	c := *p
	c.Base = ""
	c.sum = ""
	// encoding/json writes map keys sorted.
	return json.MarshalIndent(&c, "", "  ")
}

// ActionFor returns the action for a metadata-view path in policy form
// ("trials[].notes") and whether the policy names it (directly or through an
// "extra.*" pattern). An unnamed field is dropped.
func (p *Policy) ActionFor(path string) (Action, bool) {
	if a, ok := p.Fields[path]; ok {
		return a, true
	}
	if i := strings.LastIndex(path, ".extra."); i >= 0 {
		if a, ok := p.Fields[path[:i]+".extra.*"]; ok {
			return a, true
		}
	}
	return Drop, false
}
