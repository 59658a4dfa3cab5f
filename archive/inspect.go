package archive

import (
	"fmt"
	"os"

	"muarc/deid"
	"muarc/recfile"
	"muarc/validate"
)

// maxListed is how many validation errors a refusal message quotes.
const maxListed = 3

// lowConfidenceRules are the quality gates the index counts units against:
// the validator's defaults.
var lowConfidenceRules = validate.DefaultOptions().Rules

// summarize opens a recording (attributes and small tables only; samples
// stay on disk) and builds its summary. The file is screened first
// (validate.Screener) when the program installed a screen.
func summarize(path, rel string) (*RecordingSummary, error) {
	st, err := os.Stat(path)
	if err != nil {
		return nil, err
	}
	if err := validate.ScreenFirst(path, false); err != nil {
		return nil, err
	}
	return fullSummary(path, rel, st.Size())
}

// checkRecording validates a recording (with the checksum scan) and lists
// its identifying fields still set. A file that could not be read in
// validation (a crash of the HDF5 library included) is not opened here.
func checkRecording(path string) (nerr int, first []string, identifying []string, err error) {
	nerr, first, _, identifying, err = checkRecordingDamage(path)
	return nerr, first, identifying, err
}

// checkRecordingDamage is checkRecording that also lists the integrity
// damage validation found ("check at path" per finding; none when the file
// could not be read at all, which is never accepted).
func checkRecordingDamage(path string) (nerr int, first, damage, identifying []string, err error) {
	rep := validate.Validator(path, validate.DefaultOptions())
	nerr, first = reportErrors(rep)
	if rep.ReadError != "" {
		return nerr, first, nil, nil, nil
	}
	for _, f := range rep.Damage() {
		damage = append(damage, f.Check+" at "+f.HDF5Path)
	}
	identifying, err = identifyingFields(path, nerr)
	if err != nil {
		return 0, nil, nil, nil, err
	}
	return nerr, first, damage, identifying, nil
}

// identifyingFields opens a validated recording and lists its identifying
// fields still set.
func identifyingFields(path string, nerr int) ([]string, error) {
	f, err := recfile.Open(path)
	if err != nil {
		if nerr > 0 {
			// Validation already said why; the refusal carries it.
			return nil, nil
		}
		return nil, err
	}
	defer f.Close()
	return deid.IdentifyingFields(f.Recording()), nil
}

// validateFile validates a recording without the checksum scan (the
// deposit check scans chunks itself to report each bad one).
func validateFile(path string) (int, []string, error) {
	opt := validate.DefaultOptions()
	opt.ChecksumScan = false
	return validateWith(path, opt)
}

func validateWith(path string, opt validate.Options) (int, []string, error) {
	n, first := reportErrors(validate.Validator(path, opt))
	return n, first, nil
}

// reportErrors counts a report's errors (a read error counts one) and
// quotes the first few, integrity damage first.
func reportErrors(rep *validate.Report) (int, []string) {
	if rep.ReadError != "" {
		return 1, []string{rep.ReadError}
	}
	var first []string
	for _, f := range rep.Damage() {
		if len(first) < maxListed {
			first = append(first, f.String())
		}
	}
	for _, f := range rep.Findings {
		if f.Severity == validate.Error && !validate.IsIntegrityCheck(f.Check) && len(first) < maxListed {
			first = append(first, f.String())
		}
	}
	n := rep.Count(validate.Error)
	if n > maxListed {
		first = append(first, fmt.Sprintf("and %d more (run muarc validate on the file)", n-maxListed))
	}
	return n, first
}
