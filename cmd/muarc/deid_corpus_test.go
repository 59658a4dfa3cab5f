package main

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"os"
	"os/exec"
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"muarc/deid"
	"muarc/internal/reftest"
	"muarc/recfile"
	"muarc/record"
	"muarc/synth"
)

// corpusPerson is an invented participant of the test corpus. The scenario
// is our own: a fictional rehabilitation clinic; names, streets, towns and
// numbers are made up.
type corpusPerson struct {
	first, last string
	// plain is true when the surname is an ordinary word of the layout or
	// of English: it must never block the subject, and it is not a needle
	// on its own (the layout's own files hold such words by design).
	plain bool
	// kept places identifiers where the built-in policy keeps the value
	// (trial, array and decomposition names): the run must refuse the file
	// and name those paths, and the suggested policy lines must fix it.
	kept              bool
	relative, street  string
	town, mrn, serial string
}

var corpusPeople = []corpusPerson{
	{first: "Wendeline", last: "Hallbeck", relative: "Evander", street: "Tamsin", town: "Larkbury", mrn: "MRN5520917", serial: "SN-730418"},
	{first: "Evrard", last: "Quillonby", relative: "Corisande", street: "Wrenfold", town: "Ashmeret", mrn: "MRN6610283", serial: "SN-845120"},
	{first: "Sunniva", last: "Marchetti-Vold", relative: "Tadeusz", street: "Brackenholt", town: "Pellowan", mrn: "MRN7719364", serial: "SN-512097"},
	{first: "Odalric", last: "Brennich", kept: true, relative: "Isaura", street: "Gorsemoor", town: "Quenby", mrn: "MRN8825471", serial: "SN-660231"},
	{first: "Ilvana", last: "Hand", plain: true, relative: "Brisco", street: "Thistlecombe", town: "Orrinford", mrn: "MRN1130592", serial: "SN-201934"},
	{first: "Tobiah", last: "Mass", plain: true, relative: "Leocadia", street: "Fernhallow", town: "Wyscombe", mrn: "MRN2246801", serial: "SN-318402"},
	{first: "Rosalind", last: "Sample", plain: true, relative: "Oswyn", street: "Kettleby", town: "Dunmarrow", mrn: "MRN3357016", serial: "SN-427561"},
	{first: "Anselmo", last: "Force", plain: true, relative: "Griselda", street: "Holloway", town: "Brantwick", mrn: "MRN4468230", serial: "SN-539670"},
	{first: "Miravel", last: "Grid", plain: true, relative: "Thorsby", street: "Pennicott", town: "Alderhythe", mrn: "MRN5579445", serial: "SN-648783"},
	{first: "Joryth", last: "Rest", plain: true, relative: "Albrecha", street: "Coldharbour", town: "Senwick", mrn: "MRN6680651", serial: "SN-757896"},
	{first: "Kestrin", last: "Trial", plain: true, relative: "Udolpho", street: "Marrowgate", town: "Fennick", mrn: "MRN7791867", serial: "SN-866019"},
	{first: "Bellamy", last: "Long", plain: true, relative: "Ysolde", street: "Quarrendon", town: "Holmbury", mrn: "MRN8802073", serial: "SN-975124"},
}

const corpusOperator = "Perpetua Aldwinckle"

// corpusRecording puts p's identifiers in every string-bearing part of the
// layout: subject, session and extra fields, free text, channel labels, a
// free-text unit column, a unit label, source names, history details, and (kept) group
// names.
func corpusRecording(base *record.Recording, k int, p corpusPerson) *record.Recording {
	r := *base
	low := strings.ToLower(strings.ReplaceAll(p.last, "-", ""))
	r.Subject.ID = fmt.Sprintf("RHB-%04d", 4100+k)
	r.Subject.Name = p.first + " " + p.last
	r.Subject.BirthDate = fmt.Sprintf("19%02d-%02d-%02d", 50+k*3, 1+k%12, 3+k)
	r.Subject.Phone = fmt.Sprintf("+1-555-01%02d", 20+k)
	r.Subject.Email = strings.ToLower(p.first) + "." + low + "@example.org"
	r.Subject.Notes = fmt.Sprintf("%s %s prefers mornings; son %s drives her", p.first, p.last, p.relative)
	r.Subject.Extra = record.Extra{"mrn": p.mrn}
	r.Session.ID = fmt.Sprintf("RHB-%04d-v1", 4100+k)
	r.Session.Date = fmt.Sprintf("2026-03-%02dT09:30:00Z", 2+k)
	r.Session.Site = fmt.Sprintf("7 %s Court clinic, %s", p.street, p.town)
	r.Session.Operator = corpusOperator
	r.Session.Notes = fmt.Sprintf("%s came with %s from %s", p.first, p.relative, p.town)
	r.Session.Extra = record.Extra{"home_town": p.town}
	r.Provenance.Sources = []record.SourceFile{{Name: p.last + "_" + p.first + "/2026-03-02/emg.csv", Role: "emg", Bytes: 1234}}
	r.Provenance.History = append([]record.Operation(nil), base.Provenance.History...)
	if len(r.Provenance.History) > 0 {
		r.Provenance.History[0].Details = fmt.Sprintf(`{"source":"/home/lab/%s_%s"}`, p.last, p.first)
	}
	r.Trials = append([]record.Trial(nil), base.Trials...)
	for ti := range r.Trials {
		t := &r.Trials[ti]
		t.Notes = fmt.Sprintf("%s %s asked for a break", p.first, p.last)
		t.Extra = record.Extra{"escort": p.relative}
		if p.plain {
			// kept values that hold the ordinary word on purpose
			t.Task = "isometric hand grip and ankle force ramp with rest, long trial of mass sample grid"
		}
		t.Arrays = append([]record.Array(nil), t.Arrays...)
		for ai := range t.Arrays {
			a := &t.Arrays[ai]
			a.Extra = record.Extra{"amplifier_serial": p.serial}
			a.Channels = append([]record.Channel(nil), a.Channels...)
			a.Channels[0].Label = p.last + "01"
			a.Channels[1].Label = p.mrn
			a.Decompositions = append([]record.Decomposition(nil), a.Decompositions...)
			for di := range a.Decompositions {
				d := &a.Decompositions[di]
				d.Units = append([]record.Unit(nil), d.Units...)
				for u := range d.Units {
					d.Units[u].Label = fmt.Sprintf("MU %d", u+1)
				}
				d.Units[0].Label = "MU 1 " + p.first // a unit label with a name in it
				d.Notes = "checked by " + corpusOperator + " with " + p.first
				text := make([]string, len(d.Units))
				for u := range text {
					text[u] = []string{"son " + p.relative + " waited outside", "lives at 7 " + p.street + " Court", "", "Mr " + p.last + " was tired"}[u%4]
				}
				d.ExtraColumns = append(append([]record.Column(nil), d.ExtraColumns...), record.Column{Name: "comment", Text: text})
			}
		}
	}
	if p.kept {
		t := &r.Trials[0]
		t.Name = low + "_ramp"
		t.Arrays[0].Name = low + "_ta"
		t.Arrays[0].Decompositions[0].Name = low + "_auto"
	}
	return &r
}

// corpusNeedles are the values the outside scanner searches for: every
// identifier placed, minus ordinary surnames on their own.
func corpusNeedles(k int, p corpusPerson, r *record.Recording) []string {
	n := []string{p.first + " " + p.last, p.first, r.Subject.ID, r.Session.ID, r.Subject.Phone, strings.ReplaceAll(r.Subject.Phone, "-", ""),
		r.Subject.Email, p.relative, p.street, p.town, p.mrn, p.serial, p.last + "01", corpusOperator, "Aldwinckle",
		r.Subject.BirthDate, strings.ReplaceAll(r.Subject.BirthDate, "-", ""), r.Session.Date[:10], strings.ReplaceAll(r.Session.Date[:10], "-", ""),
		fmt.Sprintf("%02d.03.2026", 2+k), p.last + "_" + p.first}
	if !p.plain {
		n = append(n, p.last)
	}
	return n
}

type corpusRun struct {
	Files []struct {
		Input    string              `json:"input"`
		Output   string              `json:"output"`
		Error    string              `json:"error"`
		Findings []deid.Finding      `json:"findings"`
		Fields   []deid.FieldOutcome `json:"fields"`
		Notes    []string            `json:"notes"`
	} `json:"files"`
	Written int `json:"written"`
	Failed  int `json:"failed"`
}

// TestDeidentifyCorpus de-identifies a corpus of identified recordings and
// proves, with a raw-bytes scanner that is not muarc's (testdata/rawscan.py,
// Python standard library only), that no identifier is left in any output
// or in a packed deposit; that subjects with ordinary surnames (Hand, Mass,
// Sample, Force, Grid, Rest, Trial, Long) are never refused; that the one
// subject with identifiers in kept group names is refused with the paths
// and the policy lines that fix it, and written once they are applied; and
// that the dry run reports exactly what the real run does.
func TestDeidentifyCorpus(t *testing.T) {
	py := reftest.NeedPython(t)
	cfg := synth.TestConfig() // small: one level, one array, short
	cfg.LevelsPctMVC, cfg.PlateauS, cfg.RampS, cfg.RestS, cfg.UnitsPerMuscle = []float64{20}, 1, 0.5, 0, 4
	cfg.Arrays = cfg.Arrays[:1]
	gens, err := synth.Generate(cfg)
	if err != nil {
		t.Fatal(err)
	}
	root := t.TempDir()
	src := filepath.Join(root, "originals")
	var needles []string
	for k, p := range corpusPeople {
		r := corpusRecording(gens[0].Recording, k, p)
		dir := filepath.Join(src, p.last+"_"+p.first)
		if err := os.MkdirAll(dir, 0o755); err != nil {
			t.Fatal(err)
		}
		if err := recfile.Write(filepath.Join(dir, strings.ToLower(p.last)+"_visit1.h5"), r, recfile.WriteOptions{}); err != nil {
			t.Fatal(err)
		}
		needles = append(needles, corpusNeedles(k, p, r)...)
	}
	needleFile := filepath.Join(root, "needles.json")
	b, _ := json.Marshal(needles)
	if err := os.WriteFile(needleFile, b, 0o600); err != nil {
		t.Fatal(err)
	}
	rawscan := func(files ...string) (hits [][]any, n int) {
		t.Helper()
		out, err := exec.Command(py, append([]string{"testdata/rawscan.py", needleFile}, files...)...).Output()
		if err != nil {
			t.Fatalf("rawscan: %v", err)
		}
		var r struct {
			Files int     `json:"files"`
			Hits  [][]any `json:"hits"`
		}
		if err := json.Unmarshal(out, &r); err != nil {
			t.Fatal(err)
		}
		return r.Hits, r.Files
	}
	// The scanner sees the identifiers in the originals (it can fail).
	var origs []string
	filepath.Walk(src, func(p string, fi os.FileInfo, err error) error {
		if err == nil && !fi.IsDir() {
			origs = append(origs, p)
		}
		return nil
	})
	if hits, _ := rawscan(origs...); len(hits) < len(corpusPeople)*10 {
		t.Fatalf("the outside scanner finds only %d identifiers in the originals", len(hits))
	}

	// A fixed key, not `muarc key new`: date shifts follow the key, and a
	// random key now and then shifts one subject's session onto another
	// subject's real date (2026-03-02..13), which the outside scanner,
	// searching every subject's values in every output, then reports.
	key := filepath.Join(root, "study.key")
	fixed := sha256.Sum256([]byte("muarc de-identification corpus test key"))
	if err := os.WriteFile(key, []byte(hex.EncodeToString(fixed[:])+"\n"), 0o600); err != nil {
		t.Fatal(err)
	}
	fixPolicy := filepath.Join(root, "fix.yaml")
	os.WriteFile(fixPolicy, []byte("name: corpus-fix\nbase: muarc-safe-harbor-1\nfields:\n"+
		"  trials[].name: pseudonymize\n  trials[].arrays[].name: pseudonymize\n  trials[].arrays[].decompositions[].name: pseudonymize\n"), 0o644)

	for _, stage := range []struct {
		name   string
		policy []string
	}{{"default", nil}, {"fixed", []string{"--policy", fixPolicy}}} {
		out := filepath.Join(root, "shared-"+stage.name)
		args := append([]string{"deidentify", src, "-o", out, "--key", key, "--json"}, stage.policy...)
		dryOut, se, dryCode := runMuarc(t, root, append(args, "--dry-run")...)
		realOut, se2, realCode := runMuarc(t, root, args...)
		var dry, real corpusRun
		if err := json.Unmarshal([]byte(dryOut), &dry); err != nil {
			t.Fatalf("%s dry run: %v\n%s", stage.name, err, se)
		}
		if err := json.Unmarshal([]byte(realOut), &real); err != nil {
			t.Fatalf("%s run: %v\n%s", stage.name, err, se2)
		}
		if dryCode != realCode || len(dry.Files) != len(corpusPeople) || len(real.Files) != len(dry.Files) {
			t.Fatalf("%s: dry run exit %d, %d files; run exit %d, %d files", stage.name, dryCode, len(dry.Files), realCode, len(real.Files))
		}
		var written []string
		for i := range real.Files {
			d, r := dry.Files[i], real.Files[i]
			if d.Input != r.Input || d.Output != r.Output || d.Error != r.Error || !reflect.DeepEqual(d.Findings, r.Findings) ||
				!reflect.DeepEqual(d.Fields, r.Fields) || !reflect.DeepEqual(d.Notes, r.Notes) {
				t.Errorf("%s: dry run and run differ for %s:\n dry %+v\n run %+v", stage.name, r.Input, d, r)
			}
			var p corpusPerson
			for _, q := range corpusPeople {
				if strings.HasPrefix(r.Input, q.last+"_"+q.first+"/") {
					p = q
				}
			}
			refuse := p.kept && stage.name == "default"
			if (r.Error != "") != refuse {
				t.Errorf("%s: %s: error %q (refusal expected: %v)", stage.name, r.Input, r.Error, refuse)
			}
			if refuse {
				var paths []string
				for _, f := range r.Findings {
					paths = append(paths, f.Path)
					if !strings.Contains(f.Fix, "to pseudonymize") || strings.Contains(f.Fix, "drop") {
						t.Errorf("%s: fix %q offers an action the field does not allow (a name is kept or pseudonymized)", f.Path, f.Fix)
					}
				}
				want := "trials[0].arrays[0].decompositions[0].name,trials[0].arrays[0].name,trials[0].name"
				if strings.Join(paths, ",") != want {
					t.Errorf("%s: findings at %v, want %s", r.Input, paths, want)
				}
			}
			if r.Error == "" {
				written = append(written, filepath.Join(out, r.Output))
			}
		}
		if hits, n := rawscan(written...); len(hits) != 0 || n != len(written) {
			t.Errorf("%s: the outside scanner finds identifiers in the outputs: %v", stage.name, hits)
		}
		if stage.name != "fixed" {
			continue
		}
		if len(written) != len(corpusPeople) {
			t.Fatalf("fixed policy: %d of %d written", len(written), len(corpusPeople))
		}
		dep := filepath.Join(root, "deposit")
		if o, se, code := runMuarc(t, root, "pack", out, "-o", dep); code != 0 {
			t.Fatalf("pack: %s%s", o, se)
		}
		var files []string
		filepath.Walk(dep, func(p string, fi os.FileInfo, err error) error {
			if err == nil && !fi.IsDir() {
				files = append(files, p)
			}
			return nil
		})
		if hits, n := rawscan(files...); len(hits) != 0 || n < len(corpusPeople)+3 {
			t.Errorf("deposit: the outside scanner finds identifiers in %d files: %v", n, hits)
		}
	}
}
