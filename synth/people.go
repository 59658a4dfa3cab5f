package synth

import (
	"fmt"
	"math"
	"math/rand/v2"
	"strings"

	"muarc/record"
)

// The study scenario is invented: a fictional institute, fictional people.
// Phone numbers are in the 555-0100..0199 range kept for fiction and e-mail
// addresses use example.org (RFC 2606), so nothing reaches a real person.
const (
	studyID      = "FIMC-ADF-01"
	studyTitle   = "Ankle dorsiflexion fatigue study (fictional)"
	studyDesc    = "Invented demo study: isometric ankle dorsiflexion along trapezoidal force targets with two high-density surface EMG grids on the dorsiflexors. Generated data, no real participant."
	studyContact = "Data desk, Fennbrook Institute for Motor Control (fictional), data-desk@example.org"
	studyLicense = "CC0-1.0"
	sessionSite  = "Fennbrook Institute for Motor Control (fictional), motor lab B"
	// sessionMainsHz is the invented lab's mains frequency.
	sessionMainsHz = 50.0
	trialTask      = "isometric ankle dorsiflexion along a trapezoidal force target"
	synthSoftware  = "muarc synth"
)

var (
	firstNames = []string{"Ilse", "Tomasz", "Noor", "Bertil", "Ayaka", "Oswin", "Marisol", "Kvido"}
	lastNames  = []string{"Varnwood", "Quillfeather", "Elbramsey", "Thornquist", "Halloway-Dunne", "Pemberlake", "Ostrovane", "Griswell"}
	operators  = []string{"R. Osterkamp", "J. Lindqvale", "M. Ferrow"}
	complaints = []string{"mild calf soreness", "a stiff left knee after cycling", "poor sleep the night before", "a small blister under the strap"}
)

// person is an invented subject with a session.
type person struct {
	code                      string
	name, birth, phone, email string
	sex, side                 string
	heightCm, massKg          float64
	sessionDate               string // RFC 3339
	ageYears                  float64
	operator                  string
	notes, sessionNotes       string
}

func invent(k int, rng *rand.Rand) person {
	first := firstNames[k%len(firstNames)]
	last := lastNames[(k*3+k/len(firstNames))%len(lastNames)]
	by := 1968 + rng.IntN(35)
	bm := 1 + rng.IntN(12)
	bd := 1 + rng.IntN(28)
	sd := 2 + k*3 // session day in March 2026
	p := person{
		code:  fmt.Sprintf("S%02d", k+1),
		name:  first + " " + last,
		birth: fmt.Sprintf("%04d-%02d-%02d", by, bm, bd),
		phone: fmt.Sprintf("+1-555-01%02d", (17+k*23)%100),
		email: strings.ToLower(first+"."+strings.ReplaceAll(last, "-", "")) + "@example.org",
		sex:   []string{"female", "male"}[rng.IntN(2)],
		side:  []string{"right", "right", "left"}[rng.IntN(3)],
		// Rounded as a lab writes them.
		heightCm:    float64(158 + rng.IntN(35)),
		massKg:      math.Round((52+rng.Float64()*40)*10) / 10,
		sessionDate: fmt.Sprintf("2026-03-%02dT%02d:%02d:00Z", sd, 8+rng.IntN(8), 15*rng.IntN(4)),
		operator:    operators[k%len(operators)],
	}
	age := 2026 - by
	if bm > 3 || (bm == 3 && bd > sd) {
		age--
	}
	p.ageYears = float64(age)
	p.notes = fmt.Sprintf("%s reported %s on 2026-03-%02d; follow-up call on 2026-04-%02d at %s.",
		p.name, complaints[rng.IntN(len(complaints))], max(1, sd-1), 1+rng.IntN(20), p.phone)
	p.sessionNotes = fmt.Sprintf("Operator %s; %s (born %s) rested 2 min between trials.", p.operator, first, p.birth)
	return p
}

func (p person) subject() record.Subject {
	return record.Subject{
		ID: p.code, Name: p.name, BirthDate: p.birth, AgeYears: p.ageYears,
		Sex: p.sex, HeightCm: p.heightCm, MassKg: p.massKg, DominantSide: p.side,
		Phone: p.phone, Email: p.email, Notes: p.notes,
	}
}

func (p person) session() record.Session {
	return record.Session{
		ID: p.code + "-V1", Date: p.sessionDate, Site: sessionSite,
		Operator: p.operator, Notes: p.sessionNotes, PowerLineHz: sessionMainsHz,
	}
}

func study() record.Study {
	return record.Study{ID: studyID, Title: studyTitle, Description: studyDesc,
		Contact: studyContact, License: studyLicense}
}
