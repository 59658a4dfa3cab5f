package convert

import (
	"fmt"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
)

// Naming the array or decomposition of a file whose name does not follow
// the profile's template: decided only when the metadata leaves one
// choice, else refused naming the choices.

// arrayForUnnamed names the array of an EMG file whose name does not
// follow the profile's template. One EMG file for a trial whose metadata
// lists one array is that array; a trial whose metadata lists other arrays
// is refused naming them; without arrays in the metadata the file name
// gives the array's name, and the report says so.
func (pl *Plan) arrayForUnnamed(it *input, emgFiles int, prof *Profile) error {
	fromName := strings.TrimSuffix(strings.TrimPrefix(filepath.Base(it.path), "emg_"), filepath.Ext(it.path))
	var listed []string
	if trialExists(pl.Rec, it.trial) {
		for _, a := range trialNamed(pl.Rec, it.trial).Arrays {
			listed = append(listed, a.Name)
		}
	}
	switch {
	case len(listed) == 0:
		it.array = fromName
		it.notes = append(it.notes, fmt.Sprintf("array %q named after the file (its name does not follow the template %s)", fromName, prof.Files.EMG))
	case slices.Contains(listed, fromName):
		it.array = fromName
	case len(listed) == 1 && emgFiles == 1:
		it.array = listed[0]
		it.notes = append(it.notes, fmt.Sprintf("the only EMG file given, for the metadata's only array %q of trial %q", listed[0], it.trial))
	default:
		return perr(it.path, 0, 0, fmt.Sprintf("name the file as the template %s says (e.g. emg_%s.csv) or set files.emg in a profile", prof.Files.EMG, listed[0]),
			"cannot tell which array of trial %q this EMG file holds: the metadata lists %s", it.trial, strings.Join(quoteAll(listed), ", "))
	}
	return nil
}

// decompositionForUnnamed names the decomposition of a discharge file or
// unit table whose name gives none (a template without {decomposition}):
// the metadata's only decomposition of the array, else "imported" when the
// metadata lists none; several are refused naming them.
func (pl *Plan) decompositionForUnnamed(it *input, tmpl string) error {
	var listed []string
	if trialExists(pl.Rec, it.trial) {
		t := trialNamed(pl.Rec, it.trial)
		for _, a := range t.Arrays {
			if a.Name == it.array {
				for _, d := range a.Decompositions {
					listed = append(listed, d.Name)
				}
			}
		}
	}
	switch len(listed) {
	case 0:
		it.dc = "imported"
		it.notes = append(it.notes, fmt.Sprintf("stored as decomposition \"imported\": the file name gives none (template %s) and the metadata names none", tmpl))
	case 1:
		it.dc = listed[0]
		it.notes = append(it.notes, fmt.Sprintf("decomposition %q: the metadata's only decomposition of array %q (the file name gives none)", listed[0], it.array))
	default:
		return perr(it.path, 0, 0, "put {decomposition} in the profile's file template, or name the file "+strings.ReplaceAll(strings.ReplaceAll(tmpl, "{array}", it.array), "{decomposition}", listed[0]),
			"cannot tell which decomposition this %s file belongs to: the metadata lists %s for array %q", it.role, strings.Join(quoteAll(listed), ", "), it.array)
	}
	return nil
}

func quoteAll(s []string) []string {
	out := make([]string, len(s))
	for i, x := range s {
		out[i] = strconv.Quote(x)
	}
	return out
}
