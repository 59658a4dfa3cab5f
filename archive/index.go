package archive

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"

	"muarc/internal/batch"
	"muarc/internal/fieldbind"
	"muarc/record"
)

// IndexRow describes one electrode array of one trial of one recording.
type IndexRow struct {
	// File is the recording's path relative to the indexed folder
	// (slash-separated); Bytes its size in bytes.
	File  string `json:"file"`
	Bytes int64  `json:"bytes"`
	// Subject is the subject identifier as stored (a pseudonym once
	// de-identified); Session the session identifier.
	Subject string `json:"subject"`
	Session string `json:"session"`
	Trial   string `json:"trial"`
	Array   string `json:"array"`
	Muscle  string `json:"muscle"`
	Side    string `json:"side"`
	// LevelPctMVC is the trial's plateau target in % MVC; NaN when not known
	// (omitted from JSON).
	LevelPctMVC float64 `json:"-"`
	// DurationS is the EMG duration in seconds (samples / sampling rate).
	DurationS float64 `json:"duration_s"`
	// Channels is the number of EMG channels of the array.
	Channels int `json:"channels"`
	// Decomposition names the decomposition the unit counts come from: the
	// last one edited by hand, else the last one; "" when there is none.
	// Decompositions is how many the array has.
	Decomposition  string `json:"decomposition"`
	Decompositions int    `json:"decompositions"`
	// Units, Discharges and LowConfidenceUnits count motor units, their
	// discharges and the units below the validator's quality rules
	// (silhouette or PNR under the thresholds) in that decomposition.
	Units              int   `json:"units"`
	Discharges         int64 `json:"discharges"`
	LowConfidenceUnits int   `json:"low_confidence_units"`
	// LabMeanRatePPS is the mean over units of the lab's own mean_rate_pps
	// (units/); DerivedPlateauRatePPS the mean over units of muarc's
	// plateau_rate_pps (derived/units/); NaN when none (omitted from JSON).
	// DerivedComputed is when the derived figures were computed (RFC 3339),
	// "" when there are none.
	LabMeanRatePPS        float64 `json:"-"`
	DerivedPlateauRatePPS float64 `json:"-"`
	DerivedComputed       string  `json:"derived_computed,omitempty"`
}

// MarshalJSON writes the row with the numbers not known (level_pct_mvc,
// lab_mean_rate_pps, derived_plateau_rate_pps) omitted.
func (r IndexRow) MarshalJSON() ([]byte, error) { return json.Marshal(rowRecordOf(r)) }

// known is &v, or nil when v is NaN.
func known(v float64) *float64 {
	if math.IsNaN(v) {
		return nil
	}
	return &v
}

// UnmarshalJSON reads a row written by MarshalJSON (a number absent ->
// NaN).
func (r *IndexRow) UnmarshalJSON(b []byte) error {
	var v rowRecord
	if err := json.Unmarshal(b, &v); err != nil {
		return err
	}
	*r = v.row()
	return nil
}

// orNaN is *p, or NaN when p is nil.
func orNaN(p *float64) float64 {
	if p == nil {
		return math.NaN()
	}
	return *p
}

// IndexOptions select and tune an index run.
type IndexOptions struct {
	// Muscle keeps rows whose muscle equals it (case-blind); "" keeps all.
	Muscle string
	// Subject keeps rows of this subject identifier; "" keeps all.
	Subject string
	// Level keeps rows whose target level equals it (in % MVC, within
	// 1e-6); NaN keeps all. Use math.NaN() for "any": the zero value 0
	// selects rest trials.
	Level float64
	// Workers is the number of files opened at once (0: one per CPU).
	Workers int
}

// AnyLevel returns IndexOptions that keep every row.
func AnyLevel() IndexOptions { return IndexOptions{Level: math.NaN()} }

// RecordingSummary is what the index and the study tables know about one
// recording: its rows and the non-identifying subject and study fields.
type RecordingSummary struct {
	File    string
	Bytes   int64
	Study   record.Study
	Subject SubjectRow
	Session string
	Trials  int
	Rows    []IndexRow
}

// SubjectRow holds the subject fields the study tables show: the
// registry's subject fields that do not identify a person (schema.Fields,
// bound by the `layout` tags; tables_test.go fails when one is missing).
// Identifying fields (name, birth date, phone, e-mail, notes) are never
// copied here. The JSON names are the registry's (struct tags cannot look
// them up; the same test compares them).
type SubjectRow struct {
	ID           string  `json:"subject" layout:"id"`
	Sex          string  `json:"sex" layout:"sex"`
	AgeYears     float64 `json:"-" layout:"age_years"`
	AgeBand      string  `json:"age_band" layout:"age_band"`
	DominantSide string  `json:"dominant_side" layout:"dominant_side"`
	HeightCm     float64 `json:"-" layout:"height_cm"`
	MassKg       float64 `json:"-" layout:"mass_kg"`
	HeightBandCm string  `json:"height_band_cm,omitempty" layout:"height_band_cm"`
	MassBandKg   string  `json:"mass_band_kg,omitempty" layout:"mass_band_kg"`
}

// subjectRowOf copies the subject's non-identifying fields.
func subjectRowOf(s *record.Subject) SubjectRow {
	var r SubjectRow
	if err := fieldbind.Copy(&r, s, "subject"); err != nil {
		panic(err) // the same registry kinds on both sides: cannot happen
	}
	return r
}

// FindRecordings lists the muarc recordings under dir: regular files named
// *.h5 or *.hdf5 (any case), recursively, skipping names that start with
// "." (temporary and staging files). Paths are relative to dir,
// slash-separated, sorted. Other files are returned in skipped so that
// callers can say what they left out.
func FindRecordings(dir string) (recs, skipped []string, err error) {
	st, err := os.Stat(dir)
	if err != nil {
		return nil, nil, err
	}
	if !st.IsDir() {
		return nil, nil, fmt.Errorf("%s: not a folder (give the folder holding the recordings)", dir)
	}
	err = filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if p == dir {
			return nil
		}
		rel, _ := filepath.Rel(dir, p)
		rel = filepath.ToSlash(rel)
		if strings.HasPrefix(d.Name(), ".") {
			if d.IsDir() {
				return fs.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			return nil
		}
		ext := strings.ToLower(filepath.Ext(d.Name()))
		if d.Type().IsRegular() && (ext == ".h5" || ext == ".hdf5") {
			recs = append(recs, rel)
		} else {
			skipped = append(skipped, rel)
		}
		return nil
	})
	sort.Strings(recs)
	sort.Strings(skipped)
	return recs, skipped, err
}

// Index returns one row per recording, trial and array of the recordings
// under dir, filtered by opt. It reads attributes and small tables only,
// never the EMG samples, so it is quick on large studies. Files that cannot
// be read are left out of the rows and reported together in the error (one
// line each, with the file named); the rows of the others are still
// returned.
func Index(dir string, opt IndexOptions) ([]IndexRow, error) {
	sums, err := Summaries(dir, opt.Workers)
	var rows []IndexRow
	for _, s := range opt.Filter(sums) {
		rows = append(rows, s.Rows...)
	}
	return rows, err
}

// Filter keeps the summaries with at least one row that opt selects, with
// only those rows (used for study tables of a selection).
func (o IndexOptions) Filter(sums []RecordingSummary) []RecordingSummary {
	var out []RecordingSummary
	for _, s := range sums {
		var rows []IndexRow
		for _, r := range s.Rows {
			if o.keep(r) {
				rows = append(rows, r)
			}
		}
		if len(rows) > 0 || (len(s.Rows) == 0 && o.Muscle == "" && o.Subject == "" && math.IsNaN(o.Level)) {
			s.Rows = rows
			out = append(out, s)
		}
	}
	return out
}

func (o IndexOptions) keep(r IndexRow) bool {
	if o.Muscle != "" && !strings.EqualFold(o.Muscle, r.Muscle) {
		return false
	}
	if o.Subject != "" && o.Subject != r.Subject {
		return false
	}
	if !math.IsNaN(o.Level) && !(math.Abs(o.Level-r.LevelPctMVC) <= 1e-6) {
		return false
	}
	return true
}

// Summaries reads every recording under dir (attributes only) on workers
// and returns their summaries in file order. Unreadable files are reported
// in the joined error and left out.
func Summaries(dir string, workers int) ([]RecordingSummary, error) {
	files, _, err := FindRecordings(dir)
	if err != nil {
		return nil, err
	}
	out := make([]*RecordingSummary, len(files))
	errs := batch.Run(len(files), workers, func(i int) error {
		s, _, err := readSummary(filepath.Join(dir, filepath.FromSlash(files[i])), files[i], false)
		out[i] = s
		return err
	}, nil)
	var sums []RecordingSummary
	var bad []error
	for i, s := range out {
		if errs[i] != nil {
			bad = append(bad, fmt.Errorf("%s: %w", files[i], errs[i]))
			continue
		}
		sums = append(sums, *s)
	}
	return sums, errors.Join(bad...)
}

// summaryOf builds a recording's summary from its model (attributes and
// small tables; the samples are only asked for their shape).
func summaryOf(rec *record.Recording, rel string, size int64, lowConf func(record.Unit) bool) *RecordingSummary {
	s := &RecordingSummary{
		File: rel, Bytes: size, Study: rec.Study, Session: rec.Session.ID, Trials: len(rec.Trials),
		Subject: subjectRowOf(&rec.Subject),
	}
	for _, t := range rec.Trials {
		for _, a := range t.Arrays {
			r := IndexRow{File: rel, Bytes: size, Subject: rec.Subject.ID, Session: rec.Session.ID,
				Trial: t.Name, Array: a.Name, Muscle: a.Muscle, Side: a.Side, LevelPctMVC: t.TargetPctMVC,
				DurationS: a.DurationS(), Channels: len(a.Channels), Decompositions: len(a.Decompositions)}
			if a.Samples != nil {
				_, r.Channels = a.Samples.Shape()
			}
			r.LabMeanRatePPS, r.DerivedPlateauRatePPS = math.NaN(), math.NaN()
			if k := record.ReportedDecomposition(a.Decompositions); k >= 0 {
				d := a.Decompositions[k]
				r.LabMeanRatePPS = meanOf(len(d.Units), func(i int) float64 { return d.Units[i].MeanRatePPS })
				if d.Derived != nil {
					r.DerivedComputed = d.Derived.Computed.UTC().Format(time.RFC3339)
					r.DerivedPlateauRatePPS = meanOf(len(d.Derived.Units), func(i int) float64 { return d.Derived.Units[i].PlateauRatePPS })
				}
				r.Decomposition = d.Name
				r.Units = len(d.Units)
				for _, u := range d.Units {
					r.Discharges += int64(len(u.Discharges))
					if lowConf(u) {
						r.LowConfidenceUnits++
					}
				}
			}
			s.Rows = append(s.Rows, r)
		}
	}
	return s
}

// meanOf is the mean of the known values of get(0..n-1); NaN when none.
func meanOf(n int, get func(int) float64) float64 {
	sum, k := 0.0, 0
	for i := 0; i < n; i++ {
		if v := get(i); !math.IsNaN(v) && !math.IsInf(v, 0) {
			sum += v
			k++
		}
	}
	if k == 0 {
		return math.NaN()
	}
	return sum / float64(k)
}

// IndexColumns are the TSV header names, in order.
var IndexColumns = []string{"file", "bytes", "subject", "session", "trial", "array", "muscle", "side",
	"level_pct_mvc", "duration_s", "channels", "decomposition", "decompositions", "units", "discharges",
	"low_confidence_units", "lab_mean_rate_pps", "derived_plateau_rate_pps", "derived_computed"}

// WriteIndexTSV writes rows as tab-separated values with a header line.
// Unknown numbers are empty cells.
func WriteIndexTSV(w io.Writer, rows []IndexRow) error {
	var b bytes.Buffer
	b.WriteString(strings.Join(IndexColumns, "\t") + "\n")
	for _, r := range rows {
		cells := []string{r.File, strconv.FormatInt(r.Bytes, 10), r.Subject, r.Session, r.Trial, r.Array,
			r.Muscle, r.Side, num(r.LevelPctMVC), num(r.DurationS), strconv.Itoa(r.Channels), r.Decomposition,
			strconv.Itoa(r.Decompositions), strconv.Itoa(r.Units), strconv.FormatInt(r.Discharges, 10),
			strconv.Itoa(r.LowConfidenceUnits), num(r.LabMeanRatePPS), num(r.DerivedPlateauRatePPS), r.DerivedComputed}
		for i := range cells {
			cells[i] = tsvCell(cells[i])
		}
		b.WriteString(strings.Join(cells, "\t") + "\n")
	}
	_, err := w.Write(b.Bytes())
	return err
}

// num formats a number exactly (shortest form that reads back the same);
// NaN is the empty cell.
func num(v float64) string {
	if math.IsNaN(v) {
		return ""
	}
	return strconv.FormatFloat(v, 'g', -1, 64)
}
