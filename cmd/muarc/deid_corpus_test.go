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
	"regexp"
	"strings"
	"testing"
	"time"

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

// corpusCross is the subject whose task names the first subject.
const corpusCross = 1

// corpusDates are the birth date of subject k in the spellings the corpus
// writes into free text (ISO 8601 in birth_date itself).
func corpusDates(k int) (iso, dotted, words string) {
	d := time.Date(1950+k*3, time.Month(1+k%12), 3+k, 0, 0, 0, 0, time.UTC)
	return d.Format("2006-01-02"), d.Format("02.01.2006"), d.Format("2 January 2006")
}

// corpusRecording puts p's identifiers in every string-bearing part of the
// layout that a lab's own values fill: subject, session, study and their
// extra fields, free text, trial and array extras (EDF annotations as
// import keeps them), channel labels, a unit label, free-text unit
// columns, source names, history details, and (kept) group names, the
// study's description, a history entry's software and the name of a
// number column of the unit table.
func corpusRecording(base *record.Recording, k int, p corpusPerson) *record.Recording {
	r := *base
	low := strings.ToLower(strings.ReplaceAll(p.last, "-", ""))
	iso, dotted, words := corpusDates(k)
	email := strings.ToLower(p.first) + "." + low + "@example.org"
	r.Subject.ID = fmt.Sprintf("RHB-%04d", 4100+k)
	r.Subject.Name = p.first + " " + p.last
	r.Subject.BirthDate = iso
	r.Subject.Phone = fmt.Sprintf("+1-555-01%02d", 20+k)
	r.Subject.Email = email
	r.Subject.Notes = fmt.Sprintf("%s %s prefers mornings; son %s drives her; born %s", p.first, p.last, p.relative, dotted)
	r.Subject.Extra = record.Extra{"mrn": p.mrn, "alt_phone": fmt.Sprintf("155501%02d", 20+k)}
	r.Study.Extra = record.Extra{"referral": "referred by the family of " + p.first + " " + p.last}
	r.Session.ID = fmt.Sprintf("RHB-%04d-v1", 4100+k)
	r.Session.Date = fmt.Sprintf("2026-03-%02dT09:30:00Z", 2+k)
	r.Session.Site = fmt.Sprintf("7 %s Court clinic, %s", p.street, p.town)
	r.Session.Operator = corpusOperator
	r.Session.Notes = fmt.Sprintf("%s came with %s from %s; date of birth %s", p.first, p.relative, p.town, words)
	r.Session.Extra = record.Extra{"home_town": p.town}
	compact := strings.ReplaceAll(iso, "-", "") + "_" + strings.ReplaceAll(r.Session.Date[:10], "-", "")
	r.Provenance.Sources = []record.SourceFile{{Name: p.last + "_" + p.first + "/2026-03-02/emg.csv", Role: "emg", Bytes: 1234},
		{Name: p.last + "_" + p.first + "/" + compact + "_force.csv", Role: "force", Bytes: 999}}
	r.Provenance.History = []record.Operation{{Action: "import", Software: "muarc 0.1.0", Time: time.Date(2026, 3, 15, 8, 0, 0, 0, time.UTC),
		Details: fmt.Sprintf(`{"source":"/home/lab/%s_%s","mail":%q}`, p.last, p.first, email)}}
	r.Trials = append([]record.Trial(nil), base.Trials...)
	for ti := range r.Trials {
		t := &r.Trials[ti]
		t.Notes = fmt.Sprintf("%s %s asked for a break on %02d.03.2026", p.first, p.last, 2+k)
		t.Extra = record.Extra{"escort": p.relative, "contact": email, "callback": strings.ReplaceAll(r.Subject.Phone, "-", ""),
			"edf_annotations": fmt.Sprintf(`[{"onset_s":1.5,"text":"%s %s pressed the button"}]`, p.first, p.last)}
		if p.plain {
			// kept values that hold the ordinary word on purpose
			t.Task = "isometric hand grip and ankle force ramp with rest, long trial of mass sample grid"
		}
		if k == corpusCross {
			// a kept value naming another subject of the study
			t.Task = "isometric ramp, same protocol as " + corpusPeople[0].last
		}
		t.Arrays = append([]record.Array(nil), t.Arrays...)
		for ai := range t.Arrays {
			a := &t.Arrays[ai]
			a.Extra = record.Extra{"amplifier_serial": p.serial, "fitted_by": corpusOperator}
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
				rater := make([]string, len(d.Units))
				for u := range text {
					text[u] = []string{"son " + p.relative + " waited outside", "lives at 7 " + p.street + " Court", "", "Mr " + p.last + " was tired"}[u%4]
					rater[u] = corpusOperator
				}
				d.ExtraColumns = append(append([]record.Column(nil), d.ExtraColumns...),
					record.Column{Name: "comment", Text: text}, record.Column{Name: "rater", Text: rater})
			}
		}
	}
	if p.kept {
		t := &r.Trials[0]
		t.Name = low + "_ramp"
		t.Arrays[0].Name = low + "_ta"
		d := &t.Arrays[0].Decompositions[0]
		d.Name = low + "_auto"
		t.Arrays[0].PlacementDescription = "placed by " + corpusOperator
		t.Arrays[0].Reference = "ankle strap; questions to " + corpusSpacedPhone(k)
		r.Study.Description = "pilot recordings, first participant " + p.first + " " + p.last
		r.Provenance.History = append(r.Provenance.History, record.Operation{Action: "import", Software: "lab notebook of " + p.last,
			Time: time.Date(2026, 3, 20, 8, 0, 0, 0, time.UTC), Details: "{}"})
		vals := make([]float64, len(d.Units))
		d.ExtraColumns = append(d.ExtraColumns, record.Column{Name: low + "_tapping", Values: vals})
	}
	return &r
}

// corpusNeedles are the values the outside scanner searches for: every
// identifier placed, minus ordinary surnames on their own (the layout's
// names and English hold them; muarc judges them in the values).
func corpusNeedles(k int, p corpusPerson, r *record.Recording) []string {
	iso, dotted, words := corpusDates(k)
	n := []string{p.first + " " + p.last, p.first, r.Subject.ID, r.Session.ID, r.Subject.Phone, strings.ReplaceAll(r.Subject.Phone, "-", ""),
		r.Subject.Email, p.relative, p.street, p.town, p.mrn, p.serial, p.last + "01", corpusOperator, "Aldwinckle",
		iso, strings.ReplaceAll(iso, "-", ""), dotted, words, r.Session.Date[:10], strings.ReplaceAll(r.Session.Date[:10], "-", ""),
		fmt.Sprintf("%02d.03.2026", 2+k), p.last + "_" + p.first}
	if !p.plain {
		n = append(n, p.last)
	}
	if p.kept {
		n = append(n, corpusSpacedPhone(k))
	}
	return n
}

// corpusSpacedPhone is subject k's phone number written another way.
func corpusSpacedPhone(k int) string { return fmt.Sprintf("(555) 01 %02d", 20+k) }

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
// Python standard library only), that every identifier placed is in the
// originals and none is left in any output, in the BIDS dataset exported
// from them or in a packed deposit (file contents and names); that subjects
// with ordinary surnames (Hand, Mass, Sample, Force, Grid, Rest, Trial,
// Long) are never refused by the built-in policy and get a note where a
// kept value uses the word; that a policy keeping channel labels refuses
// every subject, ordinary surnames included (Hand01), naming the label;
// that the one subject with identifiers in kept values, and the one whose
// task names another subject, are refused with the paths and policy lines,
// and written once those lines are applied; and
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
		out, err := exec.Command(py, append([]string{"testdata/rawscan.py", needleFile, "--root", root}, files...)...).Output()
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
	filesUnder := func(dir string) []string {
		var files []string
		filepath.Walk(dir, func(p string, fi os.FileInfo, err error) error {
			if err == nil && !fi.IsDir() {
				files = append(files, p)
			}
			return nil
		})
		return files
	}
	// The scanner sees every identifier in the originals (it can fail).
	hits, _ := rawscan(filesUnder(src)...)
	seen := map[string]bool{}
	for _, h := range hits {
		if h[2] != "name" {
			seen[h[1].(string)] = true
		}
	}
	for _, n := range needles {
		if !seen[n] {
			t.Errorf("the outside scanner does not find %q in the originals", n)
		}
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
	keepLabels := filepath.Join(root, "keep-labels.yaml")
	os.WriteFile(keepLabels, []byte("name: corpus-keep-labels\nbase: muarc-safe-harbor-1\nfields:\n"+
		"  trials[].arrays[].channels[].label: keep\n  trials[].arrays[].decompositions[].units[].label: keep\n"), 0o644)
	fixPolicy := filepath.Join(root, "fix.yaml")

	var kept corpusPerson
	for _, p := range corpusPeople {
		if p.kept {
			kept = p
		}
	}
	keptLow := strings.ToLower(kept.last)
	wantKept := []string{"provenance.history[1].software", "study.description",
		"trials[0].arrays[0].decompositions[0].name", "trials[0].arrays[0].decompositions[0].units[].extra." + keptLow + "_tapping (its name)",
		"trials[0].arrays[0].name", "trials[0].arrays[0].placement_description", "trials[0].arrays[0].reference", "trials[0].name"}
	for _, stage := range []struct {
		name   string
		policy []string
	}{{"default", nil}, {"keep-labels", []string{"--policy", keepLabels}}, {"fixed", []string{"--policy", fixPolicy}}} {
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
		fixes := map[string]string{}
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
			cross := p.last == corpusPeople[corpusCross].last
			refuse := (p.kept || cross) && stage.name == "default" || stage.name == "keep-labels"
			if (r.Error != "") != refuse {
				t.Errorf("%s: %s: error %q (refusal expected: %v)", stage.name, r.Input, r.Error, refuse)
			}
			var paths []string
			for _, f := range r.Findings {
				paths = append(paths, f.Path)
				m := fixLine.FindStringSubmatch(f.Fix)
				if m == nil || strings.Contains(f.What, p.last) || strings.Contains(f.What, p.first) {
					t.Errorf("%s: %s: finding %+v: want a masked value and a policy line", stage.name, f.Path, f)
					continue
				}
				fixes[m[1]] = strings.SplitN(strings.ReplaceAll(m[2], " or ", ", "), ", ", 2)[0]
			}
			switch {
			case stage.name == "keep-labels":
				// Every subject's first channel label holds the surname
				// glued to digits (Hallbeck01, Hand01), the second a record
				// number, the first unit label the first name.
				want := map[string]bool{"trials[0].arrays[0].channels[0].label": true, "trials[0].arrays[0].channels[1].label": true,
					"trials[0].arrays[0].decompositions[0].units[0].label": true}
				for _, f := range r.Findings {
					delete(want, f.Path)
					if strings.Contains(f.Path, "label") && !strings.Contains(f.Fix, "to generalize or drop") {
						t.Errorf("%s: fix %q, want generalize or drop", f.Path, f.Fix)
					}
				}
				if len(want) > 0 {
					t.Errorf("keep-labels: %s: no finding at %v (findings %v)", r.Input, want, paths)
				}
			case cross && stage.name == "default":
				if strings.Join(paths, ",") != "trials[0].task" {
					t.Errorf("%s: findings at %v, want trials[0].task (it names another subject)", r.Input, paths)
				}
			case refuse:
				if strings.Join(paths, ",") != strings.Join(wantKept, ",") {
					t.Errorf("%s: findings at %v, want %v", r.Input, paths, wantKept)
				}
			case p.plain && stage.name == "default":
				// Never silent: the task that uses the surname as a word is
				// a note naming the field.
				var noted bool
				for _, n := range r.Notes {
					noted = noted || strings.HasPrefix(n, "trials[0].task holds") && !strings.Contains(n, p.last)
				}
				if !noted {
					t.Errorf("%s: no note naming trials[0].task: %q", r.Input, r.Notes)
				}
			}
			if r.Error == "" {
				written = append(written, filepath.Join(out, r.Output))
			}
		}
		if hits, n := rawscan(written...); len(hits) != 0 || n != len(written) {
			t.Errorf("%s: the outside scanner finds identifiers in the outputs: %v", stage.name, hits)
		}
		if stage.name == "default" {
			// The fixed stage applies the lines the findings proposed.
			doc := "name: corpus-fix\nbase: muarc-safe-harbor-1\nfields:\n"
			for path, act := range fixes {
				doc += fmt.Sprintf("  %q: %s\n", path, act)
			}
			os.WriteFile(fixPolicy, []byte(doc), 0o644)
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
		files := filesUnder(dep)
		if hits, n := rawscan(files...); len(hits) != 0 || n < len(corpusPeople)+3 {
			t.Errorf("deposit: the outside scanner finds identifiers in %d files: %v", n, hits)
		}
		bidsOut := filepath.Join(root, "bids")
		if o, se, code := runMuarc(t, root, "export", out, "--bids", bidsOut); code != 0 {
			t.Fatalf("export --bids: %s%s", o, se)
		}
		files = filesUnder(bidsOut)
		if hits, n := rawscan(files...); len(hits) != 0 || n < len(corpusPeople)*3 {
			t.Errorf("BIDS export: the outside scanner finds identifiers in %d files: %v", n, hits)
		}
	}
}

// fixLine reads a finding's fix: the policy path and the actions offered.
var fixLine = regexp.MustCompile(`^fix: set the policy line "([^"]+)" to (.+)$`)
