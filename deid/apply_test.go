package deid

import (
	"bytes"
	"math"
	"strings"
	"testing"
	"time"

	"muarc/recfile"
	"muarc/record"
)

func testKey(t testing.TB) *Pseudonymizer {
	k, err := KeyFromBytes(bytes.Repeat([]byte{0x5a}, 32))
	if err != nil {
		t.Fatal(err)
	}
	return NewPseudonymizer(k)
}

// identifiable builds an invented recording carrying one value of every
// identifying kind (test fixture; not a check value).
func identifiable() *record.Recording {
	u := record.NewUnit(1)
	u.Discharges = []int64{10, 60, 115}
	u.PNRdB = 31.5
	n := math.NaN()
	return &record.Recording{
		Study: record.Study{ID: "stiffknee", Title: "Knee extensor units", License: "CC-BY-4.0", Extra: record.Extra{"grant": "GR-55"}},
		Subject: record.Subject{ID: "QX-0417", Name: "Ottilie Quarnstrom", BirthDate: "1961-07-02", AgeYears: n,
			Sex: "female", HeightCm: 171.5, MassKg: 64, DominantSide: "right", Phone: "+44 20 7946 0958",
			Email: "ottilie.q@mail.example.org", Notes: "Ottilie prefers mornings", Extra: record.Extra{"hospital_no": int64(4471902), "tremor": "mild"}},
		Session: record.Session{ID: "QX-0417_v2", Date: "2026-03-14T09:30:00Z", Site: "Brindlemoor clinic, room 4",
			Operator: "Pell Anwick", Notes: "called 555-013-4477 to confirm", Extra: record.Extra{"room_temp_c": 21.5}},
		Trials: []record.Trial{{
			Name: "ramp_30", Task: "isometric knee extension", TargetPctMVC: 30, MVC: 412, MVCUnit: "N.m",
			Profile: record.ForceProfile{Shape: "trapezoid", RestS: 3, RampUpS: 5, PlateauS: 20, RampDownS: 5},
			Force:   record.Signal{SamplingRateHz: 2048, Unit: "N.m", Values: []float64{0, 1.5, 3}},
			Notes:   "Ottilie Quarnstrom asked for a break on 14.03.2026",
			Arrays: []record.Array{{
				Name: "vl_grid", Muscle: "vastus lateralis", Side: "right", Rows: 2, Columns: 1, IEDMm: 8,
				Gain: n, FilterLowHz: 10, FilterHighHz: 500, SamplingRateHz: 2048, Unit: "uV",
				Channels: []record.Channel{{Label: "c1", Row: 0, Column: 0, XMm: 0, YMm: 0, Usable: true}, {Label: "c2", Row: 1, Column: 0, XMm: 0, YMm: 8, Usable: true}},
				Samples:  &record.MemSamples{Samples: 3, Channels: 2, F32: []float32{1, 2, 3, 4, 5, 6}},
				Extra:    record.Extra{"amplifier_serial": "SN-AX44719"},
				Decompositions: []record.Decomposition{{Name: "auto", Method: "blind source separation", Parameters: `{"iterations":50}`,
					Units: []record.Unit{u}, Notes: "checked by Pell Anwick",
					ExtraColumns: []record.Column{{Name: "rater", Text: []string{"blinded"}}, {Name: "cov_force", Values: []float64{0.04}}}}},
			}},
		}},
		Provenance: record.Provenance{
			Sources: []record.SourceFile{{Name: "Quarnstrom_Ottilie/2026-03-14/force.csv", Role: "force", SHA256: strings.Repeat("ab", 32), Bytes: 1200}},
			History: []record.Operation{{Action: "import", Software: "muarc 0.1.0", Time: time.Date(2026, 3, 15, 8, 0, 0, 0, time.UTC),
				Details: `{"source":"/home/lab/Quarnstrom_Ottilie"}`}},
		},
	}
}

func TestApplyDefault(t *testing.T) {
	in := identifiable()
	ps := testKey(t)
	res, err := Apply(in, Options{Pseudonymizer: ps, Now: time.Date(2026, 12, 1, 10, 0, 0, 0, time.UTC)})
	if err != nil {
		t.Fatal(err)
	}
	out := res.Recording
	s := out.Subject
	if s.ID != ps.Subject("QX-0417") || !IsPseudonym(SubjectPrefix, s.ID) {
		t.Errorf("subject id %q", s.ID)
	}
	if s.Name != "" || s.Phone != "" || s.Email != "" || s.Notes != "" {
		t.Errorf("identifying subject fields kept: %+v", s)
	}
	if s.BirthDate != "1961" {
		t.Errorf("birth date %q, want the year (45 CFR 164.514(b)(2)(i)(C))", s.BirthDate)
	}
	// 1961-07-02 to 2026-03-14: 64 whole years, band 60-69.
	if s.AgeBand != "60-69" || !math.IsNaN(s.AgeYears) {
		t.Errorf("age %v band %q", s.AgeYears, s.AgeBand)
	}
	// MeasureBand by hand: floor(171.5/10)*10 = 170, floor(64/10)*10 = 60.
	if !math.IsNaN(s.HeightCm) || s.HeightBandCm != "170-180" || s.MassBandKg != "60-70" || s.Extra["height_band_cm"] != nil {
		t.Errorf("height/mass %v %q %q %v", s.HeightCm, s.HeightBandCm, s.MassBandKg, s.Extra)
	}
	if _, ok := s.Extra["tremor"]; ok {
		t.Error("unlisted subject extra kept")
	}
	days := ps.ShiftDays("QX-0417", 365)
	want, _ := ShiftDate("2026-03-14T09:30:00Z", days)
	if out.Session.Date != want || out.Session.Date == in.Session.Date {
		t.Errorf("session date %q, want %q", out.Session.Date, want)
	}
	if out.Session.Site != "" || out.Session.Operator != "" || out.Session.Notes != "" {
		t.Error("session free text kept")
	}
	tr := out.Trials[0]
	if tr.Notes != "" || tr.Arrays[0].Extra != nil || tr.Arrays[0].Decompositions[0].Notes != "" {
		t.Error("free text or serial kept")
	}
	// Data carried by reference, untouched.
	if tr.Arrays[0].Samples != in.Trials[0].Arrays[0].Samples || &tr.Force.Values[0] != &in.Trials[0].Force.Values[0] {
		t.Error("data not carried")
	}
	if d := tr.Arrays[0].Decompositions[0]; len(d.Units) != 1 || &d.Units[0].Discharges[0] != &in.Trials[0].Arrays[0].Decompositions[0].Units[0].Discharges[0] || d.Units[0].PNRdB != 31.5 {
		t.Error("units not carried")
	}
	// A text column is free text: dropped unless the policy names it; the
	// number column is kept through the "units[].extra.*" pattern.
	if cols := tr.Arrays[0].Decompositions[0].ExtraColumns; len(cols) != 1 || cols[0].Name != "cov_force" {
		t.Errorf("unit columns %v", cols)
	}
	src := out.Provenance.Sources[0]
	if !strings.HasSuffix(src.Name, ".csv") || strings.Contains(src.Name, "Quarn") || src.SHA256 != "" || src.Bytes != 1200 {
		t.Errorf("source %+v", src)
	}
	h := out.Provenance.History
	if len(h) != 2 || h[0].Details != "{}" || !h[0].Time.Equal(in.Provenance.History[0].Time.AddDate(0, 0, days)) {
		t.Errorf("history %+v", h)
	}
	if h[1].Action != "deidentify" || !strings.Contains(h[1].Details, Default().SHA256()) || !strings.Contains(h[1].Details, ps.Fingerprint()) {
		t.Errorf("deidentify step %+v", h[1])
	}
	// The input is untouched.
	if in.Subject.Name != "Ottilie Quarnstrom" || in.Session.Date != "2026-03-14T09:30:00Z" || in.Trials[0].Notes == "" {
		t.Error("input modified")
	}
	// Unlisted fields are reported: none here, the default names every field
	// and drops unknown extras through its "extra.*" lines.
	if len(res.Unlisted) != 0 {
		t.Errorf("unlisted %v", res.Unlisted)
	}
	needles := strings.Join(res.Needles(), "|")
	for _, n := range []string{"Ottilie Quarnstrom", "Quarnstrom", "QX-0417", "2026-03-14", "14.03.2026", "1961-07-02", "ottilie.q@mail.example.org", "442079460958", "SN-AX44719", "Pell Anwick"} {
		if !strings.Contains(needles, n) {
			t.Errorf("needle %q missing", n)
		}
	}
	if !strings.Contains(needles, "4471902") {
		t.Error("numeric extra not a needle")
	}
	if got := IdentifyingFields(out); len(got) != 0 {
		t.Errorf("output still identifying: %v", got)
	}
	got := strings.Join(IdentifyingFields(in), " ")
	for _, p := range []string{"subject.id", "subject.name", "subject.birth_date", "subject.phone", "subject.email", "subject.notes",
		"subject.extra.hospital_no", "session.id", "session.date", "session.site", "session.operator", "trials[0].notes",
		"trials[0].arrays[0].extra.amplifier_serial", "trials[0].arrays[0].decompositions[0].notes",
		"provenance.sources[0].name", "provenance.sources[0].sha256", "provenance.history[0].time", "provenance.history[0].details"} {
		if !strings.Contains(got+" ", p+" ") {
			t.Errorf("IdentifyingFields misses %s (got %s)", p, got)
		}
	}
	if strings.Contains(got, "study.") && !strings.Contains(got, "study.extra.grant") {
		t.Errorf("study fields flagged: %s", got)
	}
}

func TestApplyUnlistedReported(t *testing.T) {
	pol, err := ParsePolicy([]byte(`{"name":"tiny","fields":{"subject.id":"pseudonymize","trials[].name":"keep","trials[].arrays[].name":"keep","trials[].arrays[].decompositions[].name":"keep"}}`), "tiny.json")
	if err != nil {
		t.Fatal(err)
	}
	res, err := Apply(identifiable(), Options{Policy: pol, Pseudonymizer: testKey(t)})
	if err != nil {
		t.Fatal(err)
	}
	un := strings.Join(res.Unlisted, " ")
	for _, p := range []string{"subject.name", "subject.sex", "session.date", "trials[0].task", "trials[0].force", "trials[0].arrays[0].muscle", "provenance.sources[0].name"} {
		if !strings.Contains(un, p) {
			t.Errorf("unlisted %s not reported: %s", p, un)
		}
	}
	if res.Recording.Subject.Sex != "" || res.Recording.Trials[0].Force.Present() || len(res.Recording.Provenance.Sources) != 0 {
		t.Error("unlisted field kept")
	}
}

func TestApplyRefusesLeakyKeptField(t *testing.T) {
	in := identifiable()
	in.Trials[0].Name = "quarnstrom_ramp"
	_, err := Apply(in, Options{Pseudonymizer: testKey(t)})
	if err == nil || !strings.Contains(err.Error(), "trials[0].name") || strings.Contains(err.Error(), "Quarnstrom") {
		t.Fatalf("kept trial name with the subject's name: %v", err)
	}
	pol, _ := ParsePolicy([]byte(`{"name":"p","base":"muarc-safe-harbor-1","fields":{"trials[].name":"pseudonymize"}}`), "p.json")
	res, err := Apply(in, Options{Policy: pol, Pseudonymizer: testKey(t)})
	if err != nil {
		t.Fatal(err)
	}
	if !strings.HasPrefix(res.Recording.Trials[0].Name, NamePrefix) {
		t.Fatal(res.Recording.Trials[0].Name)
	}
	in = identifiable()
	in.Trials[0].Arrays[0].Decompositions[0].ExtraColumns[0].Text[0] = "Pell Anwick" // the operator, whose field is dropped
	pol, _ = ParsePolicy([]byte(`{"name":"p","base":"muarc-safe-harbor-1","fields":{"trials[].arrays[].decompositions[].units[].extra.rater":"keep"}}`), "p.json")
	if _, err := Apply(in, Options{Policy: pol, Pseudonymizer: testKey(t)}); err == nil || !strings.Contains(err.Error(), "units[0].extra.rater") ||
		!strings.Contains(err.Error(), `"trials[].arrays[].decompositions[].units[].extra.rater" to drop, pseudonymize or scrub`) {
		t.Fatalf("kept unit column with the operator's name: %v", err)
	}
	in = identifiable()
	pol, _ = ParsePolicy([]byte(`{"name":"p","base":"muarc-safe-harbor-1","fields":{"provenance.history[].details":"keep"}}`), "p.json")
	if _, err := Apply(in, Options{Policy: pol, Pseudonymizer: testKey(t)}); err == nil || !strings.Contains(err.Error(), "provenance.history[0].details") {
		t.Fatalf("absolute path kept: %v", err)
	}
}

// TestApplyOver89: a subject of 92 gets "90 or older" and loses the birth
// year, which would show the age (45 CFR 164.514(b)(2)(i)(C): "all elements
// of dates (including year) indicative of such age").
func TestApplyOver89(t *testing.T) {
	in := identifiable()
	in.Subject.BirthDate = "1933-05-01"
	res, err := Apply(in, Options{Pseudonymizer: testKey(t)})
	if err != nil {
		t.Fatal(err)
	}
	if s := res.Recording.Subject; s.AgeBand != OldestBand || s.BirthDate != "" {
		t.Fatalf("band %q birth %q", s.AgeBand, s.BirthDate)
	}
	in.Subject.AgeYears = 91
	in.Subject.BirthDate = ""
	if got := IdentifyingFields(in); !strings.Contains(strings.Join(got, " "), "subject.age_years") {
		t.Errorf("age 91 not flagged: %v", got)
	}
}

func TestApplyScrubAndYear(t *testing.T) {
	pol, err := ParsePolicy([]byte(`{"name":"p","base":"muarc-safe-harbor-1","fields":{"trials[].notes":"scrub","session.date":"year","trials[].arrays[].decompositions[].units[].extra.rater":"drop"}}`), "p.json")
	if err != nil {
		t.Fatal(err)
	}
	res, err := Apply(identifiable(), Options{Policy: pol, Pseudonymizer: testKey(t)})
	if err != nil {
		t.Fatal(err)
	}
	out := res.Recording
	if n := out.Trials[0].Notes; n != "[name] asked for a break on [date]" {
		t.Errorf("scrubbed notes %q", n)
	}
	in := identifiable()
	in.Trials[0].Notes = "Anwick checked the straps"
	res2, err := Apply(in, Options{Policy: pol, Pseudonymizer: testKey(t)})
	if err != nil {
		t.Fatal(err)
	}
	if n := res2.Recording.Trials[0].Notes; n != "[name] checked the straps" {
		t.Errorf("scrubbed notes %q", n)
	}
	if out.Session.Date != "" || out.Session.DateYear != 2026 || out.Session.Extra["date_year"] != nil {
		t.Errorf("session %+v", out.Session)
	}
	if len(res.Scrubbed) == 0 {
		t.Error("no removals reported")
	}
}

func TestKAnonymity(t *testing.T) {
	var subs []SubjectQuasi
	add := func(id, sex, age, h, m, side string) {
		subs = append(subs, SubjectQuasi{id, QuasiIDs{sex, age, h, m, side}})
	}
	for i, a := range []string{"a", "b", "c", "d", "e"} {
		add(a, "female", "30-39", "160-170", "60-70", []string{"right", "right", "left", "right", "right"}[i])
	}
	add("f", "male", "40-49", "180-190", "80-90", "right")
	add("g", "male", "50-59", "170-180", "80-90", "right")
	r := KAnonymity(subs, 2, "json")
	// By hand: groups {a,b,d,e}=4, {c}=1, {f}=1, {g}=1.
	if r.Groups != 4 || r.Smallest != 1 || strings.Join(r.BelowK, ",") != "c,f,g" {
		t.Fatalf("%+v", r)
	}
	if !r.Lifted || len(r.Steps) == 0 || r.Steps[len(r.Steps)-1].BelowK != 0 {
		t.Fatalf("steps %+v", r.Steps)
	}
	// By hand: c joins a,b,d,e once dominant side goes (cost 1); f and g
	// (male, 80-90 kg) differ in age (40-49, 50-59: one 40-59 band of 20
	// years, cost 1) and height (180-190, 170-180: 20 cm bands still split
	// them as 180-200 and 160-180, so height goes, cost 2). Total 4; nothing
	// cheaper reaches 0 below k.
	var changes []string
	for _, st := range r.Steps {
		changes = append(changes, st.Change)
	}
	if got := strings.Join(changes, "; "); got != "age bands of 20 years; height bands of 20 cm; drop height; drop dominant_side" {
		t.Errorf("steps %s", got)
	}
	// Applying the steps by hand must give what they claim.
	cur := subs
	level := map[string]int{}
	for _, st := range r.Steps {
		for _, q := range QuasiNames {
			if level[q]+1 < len(ladders[q]) && ladders[q][level[q]+1].change == st.Change {
				level[q]++
				cur = generalise(cur, q, ladders[q][level[q]])
			}
		}
		if countBelow(cur, 2) != st.BelowK {
			t.Fatalf("step %q claims %d below k", st.Change, st.BelowK)
		}
	}
	if widenAge("30-39", 20) != "20-39" || widenAge("80-89", 20) != "80 or older" || widenMeasure("172.5", 20) != "160-180" {
		t.Error("widen")
	}
	// k = 5 over a,b,c,d,e: groups of 4 and 1, both below 5.
	if r := KAnonymity(subs[:5], 5, "json"); r.Smallest != 1 || len(r.BelowK) != 5 || !r.Lifted || r.Steps[0].Change != "drop dominant_side" {
		t.Fatalf("%+v", r)
	}
}

// TestHashingSource: the digest taken while a writer streams the samples
// equals the one read afterwards; a read out of order spoils it.
func TestHashingSource(t *testing.T) {
	rec := identifiable()
	m := &record.MemSamples{Samples: 5, Channels: 2, F32: []float32{1, 2, 3, 4, 5, 6, 7, 8, 9, float32(math.NaN())}}
	rec.Trials[0].Arrays[0].Samples = m
	want, _ := DataDigests(rec)
	hs := wrapSamples(rec, recfile.WriteOptions{})["trials[0].arrays[0].samples"]
	buf := make([]float32, 4)
	hs.ReadFloat32(0, buf)
	hs.ReadFloat32(2, buf)
	hs.ReadFloat32(4, buf[:2])
	if got, ok := hs.sum(); !ok || got != want["trials[0].arrays[0].samples"] {
		t.Fatalf("streamed digest %s %v, want %s", got, ok, want["trials[0].arrays[0].samples"])
	}
	hs = wrapSamples(rec, recfile.WriteOptions{})["trials[0].arrays[0].samples"]
	hs.ReadFloat32(2, buf)
	if _, ok := hs.sum(); ok {
		t.Fatal("out-of-order read accepted")
	}
}

// TestAgeOver89FromDates checks the age rule of Safe Harbor, 45 CFR
// 164.514(b)(2)(i)(C): "all ages over 89 ... aggregated into a single
// category of age 90 or older". The age is computed from birth date and
// session date when both are known, and the higher of that and the recorded
// age_years decides. Dates on both sides of the 90th birthday.
func TestAgeOver89FromDates(t *testing.T) {
	cases := []struct {
		ageYears      float64
		birth, date   string
		band, ageNote string
	}{
		// the day before the 90th birthday: 89 by the dates
		{89, "1936-03-15", "2026-03-14T09:30:00Z", "80-89", ""},
		// the 90th birthday itself: 90 by the dates, though age_years says 89
		{89, "1936-03-14", "2026-03-14T09:30:00Z", OldestBand, "age from birth date"},
		// the day after: 90
		{89, "1936-03-13", "2026-03-14T09:30:00Z", OldestBand, "age from birth date"},
		// a recorded age above the dates' wins
		{90, "1936-03-15", "2026-03-14T09:30:00Z", OldestBand, ""},
		// no recorded age: the dates alone
		{math.NaN(), "1936-03-14", "2026-03-14", OldestBand, "age from birth date"},
		{math.NaN(), "1936-03-15", "2026-03-14", "80-89", ""},
	}
	for _, c := range cases {
		in := identifiable()
		in.Subject.AgeYears, in.Subject.BirthDate, in.Session.Date = c.ageYears, c.birth, c.date
		in.Trials[0].Notes = ""
		res, err := Apply(in, Options{Pseudonymizer: testKey(t)})
		if err != nil {
			t.Fatal(err)
		}
		s := res.Recording.Subject
		if s.AgeBand != c.band || !math.IsNaN(s.AgeYears) {
			t.Errorf("age %v born %s, session %s: band %q age %v, want %q", c.ageYears, c.birth, c.date, s.AgeBand, s.AgeYears, c.band)
		}
		if c.band == OldestBand && s.BirthDate != "" {
			t.Errorf("born %s: birth year %q kept for an age over 89 (dates including year indicative of such age)", c.birth, s.BirthDate)
		}
		notes := ""
		for _, f := range res.Fields {
			if strings.HasPrefix(f.Path, "subject.age") {
				notes += f.Note
			}
		}
		if !strings.Contains(notes, c.ageNote) {
			t.Errorf("born %s: notes %q lack %q", c.birth, notes, c.ageNote)
		}
		// A recorded band below 90 does not survive an age over 89.
		in.Subject.AgeBand = "80-89"
		res, _ = Apply(in, Options{Pseudonymizer: testKey(t)})
		if got := res.Recording.Subject.AgeBand; got != c.band {
			t.Errorf("recorded band 80-89, born %s: band %q, want %q", c.birth, got, c.band)
		}
	}
	if a, fromDates := AgeAtSession(&record.Recording{Subject: record.Subject{AgeYears: 89.5, BirthDate: "1936-03-15"}, Session: record.Session{Date: "2026-03-14"}}); a != 89.5 || fromDates {
		t.Errorf("AgeAtSession kept %v (dates %v), want the recorded 89.5", a, fromDates)
	}
}

// TestHashingCounts: integer samples reach the writer as counts (the
// wrapped source is still a record.CountSource with the same scale), so a
// de-identified copy keeps counts and scale bit for bit, and the digest
// taken while streaming equals the one read afterwards.
func TestHashingCounts(t *testing.T) {
	rec := identifiable()
	sc, err := record.DecimalScale(1907, -5, 4)
	if err != nil {
		t.Fatal(err)
	}
	a := &rec.Trials[0].Arrays[0]
	a.SampleType, a.Scale = record.Int16, sc
	a.Samples = &record.MemCounts{Samples: 3, Channels: 2, Counts: []int32{-32768, 32767, 0, 1, -1, 7}, CountScale: sc}
	want, _ := DataDigests(rec)
	wrapSamples(rec, recfile.WriteOptions{})
	cs, ok := rec.Trials[0].Arrays[0].Samples.(record.CountSource)
	if !ok || cs.Scale() != sc {
		t.Fatalf("the wrapped samples are %T, not counts of %+v", rec.Trials[0].Arrays[0].Samples, sc)
	}
	buf := make([]int32, 4)
	cs.ReadCounts(0, buf)
	cs.ReadCounts(2, buf[:2])
	if buf[0] != -1 || buf[1] != 7 {
		t.Fatalf("counts %v", buf[:2])
	}
	hs := cs.(*hashingCounts)
	if got, ok := hs.sum(); !ok || got != want["trials[0].arrays[0].samples"] {
		t.Fatalf("streamed digest %s %v, want %s", got, ok, want["trials[0].arrays[0].samples"])
	}
}

// TestKHintFormats: every policy hint of the k-anonymity ladders, written
// in a YAML or a JSON policy's own format, is a line that the policy reader
// accepts in a file of that format and that makes the change it names.
func TestKHintFormats(t *testing.T) {
	for q, ladder := range ladders {
		for _, r := range ladder[1:] {
			for _, c := range []struct{ name, doc string }{
				{"p.yaml", "name: hint\nbase: muarc-safe-harbor-1\n" + r.hint("yaml") + "\n"},
				{"p.json", `{"name": "hint", "base": "muarc-safe-harbor-1", ` + r.hint("json") + "}"},
			} {
				p, err := ParsePolicy([]byte(c.doc), c.name)
				if err != nil {
					t.Errorf("%s %q: the hint does not parse: %v\n%s", q, r.change, err, c.doc)
					continue
				}
				if p.Format() != strings.TrimPrefix(c.name, "p.") {
					t.Errorf("%s: format %q", c.name, p.Format())
				}
				for _, f := range r.drop {
					if p.Fields[f] != Drop {
						t.Errorf("%s %q: %s is %q, not drop", c.name, r.change, f, p.Fields[f])
					}
				}
				got := map[string]float64{"age_band_years": float64(p.AgeBandYears), "height_band_cm": p.HeightBandCm, "mass_band_kg": p.MassBandKg}
				if r.setting != "" && got[r.setting] != r.width {
					t.Errorf("%s %q: %s = %g", c.name, r.change, r.setting, got[r.setting])
				}
			}
		}
	}
	if h := ladders["height"][2].hint("yaml"); h != "fields: {subject.height_cm: drop}" {
		t.Errorf("YAML hint %q", h)
	}
	if h := ladders["age_band"][1].hint("json"); h != `"age_band_years": 20` {
		t.Errorf("JSON hint %q", h)
	}
}
