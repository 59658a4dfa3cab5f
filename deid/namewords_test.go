package deid

import (
	"strings"
	"testing"

	"muarc/record"
)

// TestNameWordJudgement checks the rule for name parts that are ordinary
// words (namewords.go) both ways: values that use "Hand" or "Long" as a
// name or code are findings, values that use them as words are notes, and
// values without them are neither. The names are invented; the cases are
// the rule's own examples (deid/POLICY.md, "Ordinary-word names").
func TestNameWordJudgement(t *testing.T) {
	wc := newWordCheck("Ilvana Hand", "Bellamy Long", "Miravel Grid")
	if got := strings.Join(wc.list(), ","); got != "grid,hand,long" {
		t.Fatalf("words searched: %s, want grid,hand,long (Ilvana, Bellamy and Miravel are not ordinary words)", got)
	}
	findings := []string{
		"Hand01", "hand01", "HAND01", "Hand_01", "01Hand", "HandS01", "MRNHand", "hand_s01", "s01_hand",
		"IlvanaHand", "HandIlvana", "ilvana_hand", "Ilvana Hand", "Hand, Ilvana", "Hand Ilvana",
		"Mr Hand", "Mr. Hand was tired", "Frau Hand", "son of Hand", "asked Hand about the strap",
		"Hand", "HAND", "Hand 01", "hand 01", "01 Hand", "Hand S01", "Long", "Long02", "MU 1 Long",
		"ramp_Hand_01", "checked by Long", "Bellamy Long's grip", "Hand's",
	}
	notes := []string{
		"right hand", "edited_by_hand", "isometric hand grip and ankle force ramp", "long contraction",
		"Hand grip at 30 % MVC", "Long ramp with rest", "Right Hand Grip", "HandGrip", "hand_grip_30pct",
		"long_ramp_01", "hand", "the hand. Long rest followed", "LONG RAMP", "grip by hand 3 times",
		"Hand: the strap was loose", "ta_grid", "grid_ta", "grid ta",
	}
	none := []string{"", "handle", "Longitudinal", "Handgrip", "ramp_30pct", "MU 7", "e12", "belong", "handhold", "Hallbeck01"}
	for _, v := range findings {
		if h, ok := wc.judge(v); !ok || !h.finding {
			t.Errorf("%q: want a finding, got %+v (found %v)", v, h, ok)
		}
	}
	for _, v := range notes {
		if h, ok := wc.judge(v); !ok || h.finding {
			t.Errorf("%q: want a note, got %+v (found %v)", v, h, ok)
		}
	}
	for _, v := range none {
		if h, ok := wc.judge(v); ok {
			t.Errorf("%q: want nothing, got %+v", v, h)
		}
	}
	// Names that are not ordinary words are not judged here: they are
	// needles searched everywhere (needles.go).
	if !newWordCheck("Wendeline Hallbeck").empty() {
		t.Error("Hallbeck is not an ordinary word and must not be judged as one")
	}
}

// TestValueTokens checks the token split: case changes and digits are
// boundaries, other characters separate.
func TestValueTokens(t *testing.T) {
	for in, want := range map[string]string{
		"Hand01":         "Hand|01",
		"AnnaHand":       "Anna|Hand",
		"edited_by_hand": "edited|by|hand",
		"MRNHand":        "MRN|Hand",
		"HAND01":         "HAND|01",
		"s01_hand":       "s|01|hand",
		"Hand's":         "Hand",
		"Ilvana-Hand":    "Ilvana|Hand",
		"r2c5":           "r|2|c|5",
	} {
		var got []string
		for _, tk := range valueTokens(in) {
			got = append(got, tk.s)
		}
		if strings.Join(got, "|") != want {
			t.Errorf("%q: tokens %v, want %s", in, got, want)
		}
	}
}

// TestOrdinarySurnameLabel is the leak the rule closes: a subject called
// Hand with a channel label Hand01 under a policy that keeps labels is
// refused, naming the label's path and the policy line that fixes it,
// while the built-in policy (labels replaced) writes it with a note for a
// task that says "hand grip".
func TestOrdinarySurnameLabel(t *testing.T) {
	rec := identifiable()
	rec.Subject.Name = "Ilvana Hand"
	rec.Trials[0].Task = "isometric hand grip"
	rec.Trials[0].Arrays[0].Channels[0].Label = "Hand01"
	ps := testKey(t)
	pol, err := ParsePolicy([]byte(`{"name":"keep-labels","base":"muarc-safe-harbor-1","fields":{"trials[].arrays[].channels[].label":"keep"}}`), "keep.json")
	if err != nil {
		t.Fatal(err)
	}
	_, err = Apply(rec, Options{Policy: pol, Pseudonymizer: ps})
	oe, ok := err.(*OutputError)
	if !ok || len(oe.Findings) != 1 {
		t.Fatalf("keep labels: want one finding, got %v", err)
	}
	f := oe.Findings[0]
	if f.Path != "trials[0].arrays[0].channels[0].label" || !strings.Contains(f.Fix, `"trials[].arrays[].channels[].label" to generalize or drop`) || strings.Contains(f.What, "Hand") {
		t.Errorf("finding %+v: want the label's path, a fix offering generalize or drop, and the value masked", f)
	}
	res, err := Apply(rec, Options{Pseudonymizer: ps})
	if err != nil {
		t.Fatalf("built-in policy: %v", err)
	}
	if got := res.Recording.Trials[0].Arrays[0].Channels[0].Label; got != PositionLabel(rec.Trials[0].Arrays[0].Channels[0], 0) {
		t.Errorf("label %q not replaced by its grid position", got)
	}
	var note string
	for _, n := range res.Notes {
		if strings.HasPrefix(n, "trials[0].task ") {
			note = n
		}
	}
	if note == "" || strings.Contains(note, "Hand") || strings.Contains(note, "hand grip") {
		t.Errorf("want a masked note naming trials[0].task, got %q", res.Notes)
	}
	// The same label through --check with --needle Hand.
	out := &record.Recording{Trials: []record.Trial{{Name: "t", Arrays: []record.Array{{Name: "a", Channels: []record.Channel{{Label: "Hand01"}}}}}}}
	wf, _ := checkWords(out, newWordCheck("Hand"))
	if len(wf) != 1 || wf[0].Path != "trials[0].arrays[0].channels[0].label" {
		t.Errorf("checkWords: %+v", wf)
	}
}

// TestFindingPlaceAndFix: a finding names the HDF5 place (the subject's
// name is an attribute, a trial's name is its group's name) and offers
// only actions that take the value out: shift and year only for a date.
func TestFindingPlaceAndFix(t *testing.T) {
	r := identifiable()
	f := finding(r, "subject.name", "Ottilie Quarnstrom", "x")
	if f.HDF5 != "attribute name of /subject" {
		t.Errorf("subject.name in the file: %q", f.HDF5)
	}
	if f := finding(r, "trials[0].name", "ramp_30", "x"); f.HDF5 != "the name of group /trials/ramp_30" {
		t.Errorf("trials[0].name in the file: %q", f.HDF5)
	}
	text := finding(r, "trials[0].arrays[0].decompositions[0].units[0].extra.rater", "Mrs Quarnstrom", "x")
	date := finding(r, "subject.extra.visit_day", "2026-03-14", "x")
	if !strings.HasSuffix(text.Fix, "to drop, pseudonymize or scrub") || !strings.HasSuffix(date.Fix, "to drop, pseudonymize, scrub, shift or year") {
		t.Errorf("fixes: text %q, date %q", text.Fix, date.Fix)
	}
}

// TestOtherSubjects: a value naming another subject of the study (its
// surname inside a token, its e-mail address) is found; the subject's own
// name is left to its own needles; ordinary words are not names.
func TestOtherSubjects(t *testing.T) {
	sp := newStudyPeople()
	sp.add("S1", "Wendeline Hallbeck", "w.hallbeck@example.org")
	sp.add("S2", "Ilvana Hand", "")
	for _, c := range []struct {
		value, self string
		want        bool
	}{
		{"same protocol as Hallbeck", "S2", true},
		{"ramp_hallbeck01", "S2", true},
		{"ask w.hallbeck@example.org.", "S2", true},
		{"same protocol as Hallbeck", "S1", false}, // own name: its own needles
		{"isometric hand grip", "S1", false},       // Hand is an ordinary word
		{"Ilvana came too", "S1", true},
		{"tibialis anterior", "S1", false},
	} {
		if got := sp.other(c.value, c.self); got != c.want {
			t.Errorf("%q for %s: %v, want %v", c.value, c.self, got, c.want)
		}
	}
}

// TestPhoneWrittenOtherwise: the subject's phone number in a kept value,
// spaced or bracketed differently from the recorded one, is a finding.
func TestPhoneWrittenOtherwise(t *testing.T) {
	rec := identifiable() // phone +44 20 7946 0958
	for _, v := range []string{"call 7946-0958", "tel. (020) 79 46 09 58", "+442079460958"} {
		rec.Trials[0].Task = v
		_, err := Apply(rec, Options{Pseudonymizer: testKey(t)})
		oe, ok := err.(*OutputError)
		if !ok || len(oe.Findings) == 0 {
			t.Errorf("%q: want a finding at trials[0].task, got %v", v, err)
			continue
		}
		for _, f := range oe.Findings {
			if f.Path != "trials[0].task" {
				t.Errorf("%q: finding at %s", v, f.Path)
			}
		}
	}
	rec.Trials[0].Task = "ramp of 20 s at 30 % MVC, 2048 samples per second"
	if _, err := Apply(rec, Options{Pseudonymizer: testKey(t)}); err != nil {
		t.Errorf("a task without the number: %v", err)
	}
}
