// Package bids writes a study folder of muarc files as a BIDS 1.11.0
// dataset of the EMG datatype: dataset_description.json, participants.tsv
// and .json, and per recording and trial sub-*/[ses-*/]emg/ with the
// *_emg.bdf (BDF+, written by convert), *_emg.json, *_channels.tsv,
// *_electrodes.tsv, *_coordsystem.json and *_events.tsv (trapezoid
// phases). Motor-unit decompositions, which BIDS has no place for yet, go
// to derivatives/muarc/ as TSV tables with JSON sidecars describing every
// column. Only de-identified recordings are written unless
// Options.AllowIdentified.
package bids

import (
	"fmt"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"muarc/convert"
	"muarc/deid"
	"muarc/edfplus"
	"muarc/recfile"
	"muarc/record"
)

// Version is the BIDS version the dataset follows.
const Version = "1.11.0"

// Options say how Export writes.
type Options struct {
	AllowIdentified bool
	// Overwrite replaces an existing output folder's files.
	Overwrite bool
}

// Report says what was written and which required values were not known.
type Report struct {
	Dir        string   `json:"dir"`
	Subjects   int      `json:"subjects"`
	Recordings int      `json:"recordings"`
	DataFiles  []string `json:"data_files"`
	// NotKnown lists, per sidecar field, the files where a required or
	// recommended value was written as "n/a" because the recording does not
	// hold it.
	NotKnown map[string][]string `json:"not_known,omitempty"`
	Warnings []string            `json:"warnings,omitempty"`
}

func (r *Report) notKnown(field, file string) {
	if r.NotKnown == nil {
		r.NotKnown = map[string][]string{}
	}
	r.NotKnown[field] = append(r.NotKnown[field], file)
}

// Label turns a muarc name into a BIDS label: letters and digits only
// (BIDS "Common principles: entities", labels are alphanumeric).
func Label(s string) string {
	var b strings.Builder
	for _, r := range s {
		if r >= 'a' && r <= 'z' || r >= 'A' && r <= 'Z' || r >= '0' && r <= '9' {
			b.WriteRune(r)
		}
	}
	return b.String()
}

// Export writes the recordings (*.h5) under studyDir as a BIDS dataset in
// outDir.
func Export(studyDir, outDir string, opt Options) (*Report, error) {
	var files []string
	err := filepath.WalkDir(studyDir, func(p string, d os.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.IsDir() && strings.EqualFold(filepath.Ext(p), ".h5") {
			files = append(files, p)
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	if len(files) == 0 {
		return nil, fmt.Errorf("%s: no muarc files (*.h5)", studyDir)
	}
	sort.Strings(files)
	if !opt.Overwrite {
		if ents, err := os.ReadDir(outDir); err == nil && len(ents) > 0 {
			return nil, fmt.Errorf("%s exists and is not empty; give --overwrite or another folder", outDir)
		}
	}
	rep := &Report{Dir: outDir}
	w := &writer{dir: outDir, rep: rep, overwrite: opt.Overwrite}
	var participants []participant
	seenSub := map[string]string{}
	study := record.Study{}
	for _, path := range files {
		f, err := recfile.Open(path)
		if err != nil {
			return rep, err
		}
		rec := f.Recording()
		if left := deid.IdentifyingFields(rec); len(left) > 0 && !opt.AllowIdentified {
			f.Close()
			return rep, fmt.Errorf("%s still carries identifying fields (%s); de-identify the study first (muarc deidentify) or give --allow-identified", path, strings.Join(left[:min(4, len(left))], ", "))
		}
		if study.ID == "" {
			study = rec.Study
		}
		sub := Label(rec.Subject.ID)
		if sub == "" {
			sub = fmt.Sprintf("%02d", len(seenSub)+1)
		}
		if prev, ok := seenSub[sub]; ok && prev != rec.Subject.ID {
			f.Close()
			return rep, fmt.Errorf("subjects %q and %q give the same BIDS label %q", prev, rec.Subject.ID, sub)
		}
		if _, ok := seenSub[sub]; !ok {
			participants = append(participants, participant{id: "sub-" + sub, sex: rec.Subject.Sex, age: rec.Subject.AgeYears, band: rec.Subject.AgeBand})
		}
		seenSub[sub] = rec.Subject.ID
		err = w.recording(rec, sub, Label(rec.Session.ID))
		f.Close()
		if err != nil {
			return rep, fmt.Errorf("%s: %w", path, err)
		}
		rep.Recordings++
	}
	rep.Subjects = len(participants)
	if err := w.top(study, participants); err != nil {
		return rep, err
	}
	return rep, nil
}

type participant struct {
	id, sex, band string
	age           float64
}

type writer struct {
	dir       string
	rep       *Report
	overwrite bool
}

// recording writes every trial of one recording.
func (w *writer) recording(rec *record.Recording, sub, ses string) error {
	rel := filepath.Join("sub-"+sub, "emg")
	prefix := "sub-" + sub
	if ses != "" {
		rel = filepath.Join("sub-"+sub, "ses-"+ses, "emg")
		prefix += "_ses-" + ses
	}
	dir := filepath.Join(w.dir, rel)
	if err := os.MkdirAll(dir, 0o755); err != nil {
		return err
	}
	for ti := range rec.Trials {
		t := &rec.Trials[ti]
		task := Label(t.Name)
		if task == "" {
			return fmt.Errorf("trial %q gives an empty BIDS task label", t.Name)
		}
		base := prefix + "_task-" + task
		bdf := filepath.Join(dir, base+"_emg.bdf")
		er, err := convert.ExportEDFTrial(rec, t, bdf, convert.EDFExportOptions{Format: edfplus.BDF, Dir: dir, AllowIdentified: true, Overwrite: w.overwrite})
		if err != nil {
			return err
		}
		w.rep.DataFiles = append(w.rep.DataFiles, filepath.ToSlash(filepath.Join(rel, base+"_emg.bdf")))
		w.rep.Warnings = append(w.rep.Warnings, er.Warnings...)
		if err := w.sidecar(rec, t, er, filepath.Join(dir, base), filepath.ToSlash(filepath.Join(rel, base))); err != nil {
			return err
		}
		if err := w.derivatives(t, prefix, task, rel); err != nil {
			return err
		}
	}
	return nil
}

// firstArray is the trial's first array with samples, or nil.
func firstArray(t *record.Trial) *record.Array {
	for i := range t.Arrays {
		if t.Arrays[i].SamplingRateHz > 0 {
			return &t.Arrays[i]
		}
	}
	return nil
}

func na(v float64) any {
	if math.IsNaN(v) {
		return "n/a"
	}
	return v
}
