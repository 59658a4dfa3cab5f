package convert

import (
	"fmt"
	"regexp"
	"strings"

	"muarc/edfplus"
)

// Where muarc's export records the trial name of an EDF+/BDF+ file: an
// additional subfield of the recording field, which EDF+ allows after its
// four subfields ("Startdate ...", the administration code, the technician
// and the equipment; EDF+ specification 2.1.3.3), or, when the name does
// not fit the field's 80 characters, an annotation at the file's start.
const (
	recordingTrialPrefix = "muarc_trial="
	trialAnnotationText  = "muarc trial: "
)

// groupName is the layout's rule for group names (LAYOUT.md, "Names").
var groupName = regexp.MustCompile(`^[A-Za-z0-9_][A-Za-z0-9_.\-]*$`)

func validName(s string) bool { return groupName.MatchString(s) }

// Values of ProfileEDF.Trial.
const (
	EDFTrialRecorded = "recorded"
	EDFTrialGiven    = "given"
)

// recordedTrial returns the trial name a file records and where: the
// recording field's muarc_trial= subfield or the "muarc trial:" annotation
// of the first data record. Both present and different is an error.
func recordedTrial(path string, r *edfplus.Reader) (name, where string, err error) {
	h := r.Header
	if h.Plus && strings.HasPrefix(h.Recording, "Startdate ") {
		for _, f := range strings.Fields(h.Recording)[1:] {
			if v, ok := strings.CutPrefix(f, recordingTrialPrefix); ok && v != "" {
				name, where = v, "recording field "+recordingTrialPrefix+v
			}
		}
	}
	if !h.Plus || h.Records == 0 {
		return name, where, nil
	}
	var rec edfplus.Record
	if err := r.ReadRecord(0, &rec); err != nil {
		return "", "", err
	}
	for _, an := range rec.Annotations {
		v, ok := strings.CutPrefix(an.Text, trialAnnotationText)
		if !ok || v == "" {
			continue
		}
		if name != "" && v != name {
			return "", "", &ParseError{File: path, Msg: fmt.Sprintf("the file records two trial names: %q (%s) and %q (annotation %q)", name, where, v, an.Text),
				Hint: "remove one of them"}
		}
		name, where = v, fmt.Sprintf("annotation %q", an.Text)
	}
	return name, where, nil
}

// edfTrial decides the trial of an EDF/BDF file when the file records a
// name: a name the import only defaulted gives way to it; a name the file
// name, the metadata or the folder gave is kept only when both agree,
// else the profile's edf.trial picks one, or the import stops naming both.
func (pl *Plan) edfTrial(it *input, r *edfplus.Reader, mode string) error {
	switch mode {
	case "", EDFTrialRecorded, EDFTrialGiven:
	default:
		return &ParseError{File: it.path, Msg: fmt.Sprintf("profile edf.trial is %q", mode), Hint: "write recorded, given, or leave it out"}
	}
	name, where, err := recordedTrial(it.path, r)
	if err != nil || name == "" || name == it.trial {
		if err == nil && name != "" {
			it.notes = append(it.notes, fmt.Sprintf("trial %q, also recorded in the file (%s)", name, where))
		}
		return err
	}
	if !validName(name) {
		return &ParseError{File: it.path, Msg: fmt.Sprintf("the file records trial name %q (%s), which is not a group name (letters, digits, _ - .)", name, where),
			Hint: "set the profile's edf.trial to given to use the name from the file name or the metadata"}
	}
	switch {
	case it.trialFrom == "" || mode == EDFTrialRecorded:
		it.notes = append(it.notes, fmt.Sprintf("trial %q from the file (%s)", name, where))
		it.trial = name
	case mode == EDFTrialGiven:
		it.notes = append(it.notes, fmt.Sprintf("trial %q from %s; the file records %q (%s), not used as the profile's edf.trial says", it.trial, it.trialFrom, name, where))
	default:
		return &ParseError{File: it.path, Msg: fmt.Sprintf("two trial names: %q from %s, %q recorded in the file (%s)", it.trial, it.trialFrom, name, where),
			Hint: "rename one so they agree, or set the profile's edf.trial to recorded (the file's) or given (the other)"}
	}
	return nil
}
