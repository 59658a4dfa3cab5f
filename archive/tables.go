package archive

import (
	"bytes"
	"fmt"
	"math"
	"path/filepath"
	"strconv"
	"strings"

	"muarc/internal/atomicfile"
	"muarc/internal/fieldbind"
)

// Study table file names.
const (
	SubjectsTable   = "subjects.tsv"
	RecordingsTable = "recordings.tsv"
)

// Tables are the two study tables, tab-separated with a header line, and
// notes on anything the tables had to reconcile.
type Tables struct {
	// Subjects has one row per subject: subject (the id), then the
	// SubjectRow fields in registry order (age_years, age_band, sex,
	// height_cm, mass_kg, dominant_side), sessions, recordings.
	Subjects []byte
	// Recordings has one row per recording: file, bytes, sha256 (when
	// known), study, subject, session, trials, arrays, units, discharges,
	// duration_s (the sum over trials of each trial's longest array).
	Recordings []byte
	// Notes says where recordings of one subject disagree (the first
	// recording's value is shown and the cell is marked "varies" instead).
	Notes []string
}

// StudyTables builds the study tables from recording summaries. sums keys
// (optional) give each file's SHA-256 by the summary's File. Identifying
// fields never appear: only the SubjectRow fields are used.
func StudyTables(sums []RecordingSummary, sha map[string]string) Tables {
	var t Tables
	type subj struct {
		row        []string
		sessions   map[string]bool
		recordings int
	}
	subjects := map[string]*subj{}
	var order []string
	var rec bytes.Buffer
	rec.WriteString("file\tbytes\tsha256\tstudy\tsubject\tsession\ttrials\tarrays\tunits\tdischarges\tduration_s\n")
	for _, s := range sums {
		sr := s.Subject
		cells := subjectCells(&sr)
		e, ok := subjects[sr.ID]
		if !ok {
			e = &subj{row: cells, sessions: map[string]bool{}}
			subjects[sr.ID] = e
			order = append(order, sr.ID)
		} else {
			names := subjectColumns()
			for i := 1; i < len(cells); i++ {
				if e.row[i] != cells[i] && e.row[i] != "varies" {
					t.Notes = append(t.Notes, fmt.Sprintf("subject %q: %s is %q in one recording and %q in %s; the table says \"varies\"",
						sr.ID, names[i], e.row[i], cells[i], s.File))
					e.row[i] = "varies"
				}
			}
		}
		e.sessions[s.Session] = true
		e.recordings++

		var units int
		var discharges int64
		trialLen := map[string]float64{}
		for _, r := range s.Rows {
			units += r.Units
			discharges += r.Discharges
			trialLen[r.Trial] = math.Max(trialLen[r.Trial], r.DurationS)
		}
		trials := s.Trials
		if len(s.Rows) > 0 {
			trials = len(trialLen)
		}
		var dur float64
		for _, k := range sortedKeys(trialLen) {
			dur += trialLen[k]
		}
		cellsR := []string{s.File, strconv.FormatInt(s.Bytes, 10), sha[s.File], s.Study.ID, sr.ID, s.Session,
			strconv.Itoa(trials), strconv.Itoa(len(s.Rows)), strconv.Itoa(units), strconv.FormatInt(discharges, 10), num(dur)}
		for i := range cellsR {
			cellsR[i] = tsvCell(cellsR[i])
		}
		rec.WriteString(strings.Join(cellsR, "\t") + "\n")
	}
	var sub bytes.Buffer
	sub.WriteString(strings.Join(append(subjectColumns(), "sessions", "recordings"), "\t") + "\n")
	for _, id := range order {
		e := subjects[id]
		cells := append(append([]string(nil), e.row...), strconv.Itoa(len(e.sessions)), strconv.Itoa(e.recordings))
		for i := range cells {
			cells[i] = tsvCell(cells[i])
		}
		sub.WriteString(strings.Join(cells, "\t") + "\n")
	}
	t.Subjects = sub.Bytes()
	t.Recordings = rec.Bytes()
	return t
}

// subjectIDColumn heads the subjects table's first column, the subject's
// id (the registry's subject.id): "subject" says whose row it is.
const subjectIDColumn = "subject"

// subjectColumns are the subjects table's columns from the subject's
// fields: the SubjectRow fields in registry order (the id, first there,
// under subjectIDColumn).
func subjectColumns() []string {
	var out []string
	for _, b := range fieldbind.Bind(&SubjectRow{}, "subject") {
		if b.Name() == "id" {
			out = append(out, subjectIDColumn)
			continue
		}
		out = append(out, b.Name())
	}
	return out
}

// subjectCells are a subject's cells in subjectColumns order; an unknown
// number is empty.
func subjectCells(sr *SubjectRow) []string {
	var out []string
	for _, b := range fieldbind.Bind(sr, "subject") {
		switch v := b.Get().(type) {
		case float64:
			out = append(out, num(v))
		case int64:
			out = append(out, strconv.FormatInt(v, 10))
		default:
			out = append(out, fmt.Sprint(v))
		}
	}
	return out
}

// WriteTables writes subjects.tsv and recordings.tsv into outDir (which
// must exist), each atomically; existing tables are replaced only when
// overwrite is true.
func WriteTables(outDir string, t Tables, overwrite bool) error {
	if err := atomicfile.WriteFile(filepath.Join(outDir, SubjectsTable), t.Subjects, overwrite); err != nil {
		return err
	}
	return atomicfile.WriteFile(filepath.Join(outDir, RecordingsTable), t.Recordings, overwrite)
}
