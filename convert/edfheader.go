package convert

import (
	"fmt"
	"math"
	"sort"
	"strconv"
	"strings"
	"time"

	"muarc/edfplus"
	"muarc/record"
)

// labels keeps each label when it is printable ASCII, at most 16
// characters and unique in the file; otherwise it becomes "<array>
// <label>" when that fits 16 characters, else "<array up to 7 characters>
// <channel number>" (or "S<n>"). The transducer field keeps the array and
// the original label either way ("sEMG array NAME channel LABEL").
func labels(ps []*planned) {
	count := map[string]int{}
	for _, p := range ps {
		count[p.sig.Label]++
	}
	used := map[string]bool{}
	num := map[string]int{}
	for i, p := range ps {
		l := p.sig.Label
		num[p.name]++
		if count[l] > 1 || len(l) > 16 || l == "" || !printable(l) || used[l] {
			l = p.name + " " + p.sig.Label
			if len(l) > 16 || used[l] || !printable(l) {
				l = fmt.Sprintf("%.7s %d", p.name, num[p.name])
			}
			if used[l] || !printable(l) {
				l = fmt.Sprintf("S%d", i+1)
			}
			p.rep.Renamed = true
			p.sig.Label = l
		}
		p.rep.Label = l
		used[l] = true
		if len(p.sig.Transducer) > 80 || !printable(p.sig.Transducer) {
			p.sig.Transducer = ""
		}
	}
}

func printable(s string) bool {
	for i := 0; i < len(s); i++ {
		if s[i] < 32 || s[i] > 126 {
			return false
		}
	}
	return true
}

// recordDuration picks a record duration, written exactly in 8 characters,
// that gives every signal a whole number of samples per record; among
// those that also divide every signal's length, the longest whose record
// stays within 61440 bytes (the EDF+ guidance for a data record), else the
// shortest. padded is true when none divides every length.
func recordDuration(ps []*planned, f edfplus.Format) (float64, string, bool, error) {
	var cands []float64
	for k := 1; k <= 1000; k++ {
		cands = append(cands, float64(k)/1000)
	}
	for k := 2; k <= 60; k++ {
		cands = append(cands, float64(k))
	}
	whole := func(x float64) bool { return math.Abs(x-math.Round(x)) < 1e-9*math.Max(1, x) && math.Round(x) >= 1 }
	var fit, divides []float64
	for _, d := range cands {
		ok, div := true, true
		for _, p := range ps {
			spr := p.rate * d
			if !whole(spr) {
				ok = false
				break
			}
			if p.n%int(math.Round(spr)) != 0 || p.n/int(math.Round(spr)) != ps[0].n/int(math.Round(ps[0].rate*d)) {
				div = false
			}
		}
		if ok {
			fit = append(fit, d)
			if div {
				divides = append(divides, d)
			}
		}
	}
	pick := func(list []float64) float64 {
		best := list[0]
		for _, d := range list {
			b := 0
			for _, p := range ps {
				b += int(math.Round(p.rate*d)) * f.BytesPerSample()
			}
			if b <= 61440 {
				best = d
			}
		}
		return best
	}
	sort.Float64s(fit)
	sort.Float64s(divides)
	switch {
	case len(divides) > 0:
		d := pick(divides)
		return d, strconv.FormatFloat(d, 'f', -1, 64), false, nil
	case len(fit) > 0:
		d := pick(fit)
		return d, strconv.FormatFloat(d, 'f', -1, 64), true, nil
	}
	var rates []string
	for _, p := range ps {
		rates = append(rates, strconv.FormatFloat(p.rate, 'g', -1, 64)+" Hz")
	}
	return 0, "", false, fmt.Errorf("no record duration of 0.001 to 60 s gives whole samples at the rates %s", strings.Join(rates, ", "))
}

// identification fills the EDF+ patient and recording fields (EDF+
// 2.1.3.3 and 2.1.3.4): "code sex birthdate name" with X for unknowns, the
// code being the subject's (pseudonym) id; "Startdate dd-MMM-yyyy
// admincode technician equipment muarc_trial=NAME" with the study id as
// admin code (shortened so that the trial name fits) and the trial name
// as an additional subfield. trialInField is false when the trial name
// does not fit the 80 characters; the caller writes it as an annotation.
func identification(rec *record.Recording, t *record.Trial) (patient, recording string, start time.Time, trialInField bool) {
	x := func(s string) string {
		s = strings.Map(func(r rune) rune {
			if r == ' ' {
				return '_'
			}
			if r < 33 || r > 126 {
				return -1
			}
			return r
		}, s)
		if s == "" {
			return "X"
		}
		return s
	}
	sex := map[string]string{"female": "F", "male": "M"}[rec.Subject.Sex]
	birth := "X"
	if b, err := time.Parse("2006-01-02", rec.Subject.BirthDate); err == nil {
		birth = strings.ToUpper(b.Format("02-Jan-2006"))
	}
	patient = fmt.Sprintf("%s %s %s %s", x(rec.Subject.ID), x(sex), birth, x(rec.Subject.Name))
	start = time.Date(1985, 1, 1, 0, 0, 0, 0, time.UTC)
	date := "X"
	for _, layout := range []string{time.RFC3339Nano, "2006-01-02T15:04:05", "2006-01-02"} {
		if d, err := time.Parse(layout, rec.Session.Date); err == nil && d.Year() >= 1985 && d.Year() <= 2084 {
			start = time.Date(d.Year(), d.Month(), d.Day(), d.Hour(), d.Minute(), d.Second(), 0, time.UTC)
			date = strings.ToUpper(start.Format("02-Jan-2006"))
			break
		}
	}
	if s, ok := t.Extra[ExtraEDFStart].(string); ok {
		if d, err := time.Parse("2006-01-02T15:04:05", s); err == nil && date != "X" && d.Format("2006-01-02") == start.Format("2006-01-02") {
			start = d
		}
	}
	if len(patient) > 80 {
		patient = patient[:80]
	}
	admin, tail := x(rec.Study.ID), " X X "+recordingTrialPrefix+t.Name
	head := "Startdate " + date + " "
	if room := 80 - len(head) - len(tail); room >= 1 {
		return patient, head + admin[:min(len(admin), room)] + tail, start, true
	}
	recording = head + admin + " X X"
	if len(recording) > 80 {
		recording = recording[:80]
	}
	return patient, recording, start, false
}
