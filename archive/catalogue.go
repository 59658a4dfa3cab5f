package archive

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"runtime"
	"sort"
	"sync"
	"syscall"
	"time"

	"muarc/internal/atomicfile"
	"muarc/record"
	"muarc/schema"
)

// The catalogue of a study folder is one JSON Lines file beside the
// recordings, CatalogueName, holding the index rows of every recording
// with what identifies the file they came from (size, modification and
// change times, inode, and a content check). An index run with it reads
// only the folder's listing and the catalogue; recordings that are new or
// changed are read again and the catalogue is rewritten atomically. The
// format is documented in archive/CATALOGUE.md.

// CatalogueName is the catalogue's file name in the study folder (a dot
// name: FindRecordings, pack and validate leave it out).
const CatalogueName = ".muarc-catalogue.jsonl"

// Catalogue format name and version (the first line of the file).
const (
	CatalogueFormat        = "muarc-catalogue"
	CatalogueFormatVersion = 1
)

// catalogueHeader is the catalogue's first line.
type catalogueHeader struct {
	Format        string `json:"format"`
	FormatVersion int    `json:"format_version"`
	// Software wrote the rows; rows of another version are read again
	// (the index's figures may have changed with it).
	Software string `json:"software"`
	Written  string `json:"written"`
	Files    int    `json:"files"`
}

// fileStamp is what proves, without opening it, that a recording is the
// one an entry was made from.
type fileStamp struct {
	Bytes   int64  `json:"bytes"`
	MtimeNs int64  `json:"mtime_ns"`
	CtimeNs int64  `json:"ctime_ns"`
	Inode   uint64 `json:"inode"`
	Device  uint64 `json:"device"`
}

// catalogueEntry is one line after the header: one recording.
type catalogueEntry struct {
	Path string `json:"path"`
	fileStamp
	// Content is "metadata_sha256:<hex>" (the file's own metadata digest)
	// or "root_attributes_sha256:<hex>" for a file without one.
	Content string        `json:"content"`
	Summary summaryRecord `json:"summary"`
}

// summaryRecord is a RecordingSummary in JSON (unknown numbers omitted).
// The study's extra fields are not kept.
type summaryRecord struct {
	StudyID          string      `json:"study_id"`
	StudyTitle       string      `json:"study_title,omitempty"`
	StudyDescription string      `json:"study_description,omitempty"`
	StudyContact     string      `json:"study_contact,omitempty"`
	StudyLicense     string      `json:"study_license,omitempty"`
	Subject          string      `json:"subject"`
	Sex              string      `json:"sex,omitempty"`
	AgeYears         *float64    `json:"age_years,omitempty"`
	AgeBand          string      `json:"age_band,omitempty"`
	DominantSide     string      `json:"dominant_side,omitempty"`
	HeightCm         *float64    `json:"height_cm,omitempty"`
	MassKg           *float64    `json:"mass_kg,omitempty"`
	HeightBandCm     string      `json:"height_band_cm,omitempty"`
	MassBandKg       string      `json:"mass_band_kg,omitempty"`
	Session          string      `json:"session"`
	Trials           int         `json:"trials"`
	Rows             []rowRecord `json:"rows"`
}

// rowRecord is an IndexRow as the catalogue and the index's worker
// processes carry it: the members of IndexRow's JSON, unknown numbers
// omitted, decoded in one pass (a catalogue of 10,000 recordings is
// mostly rows; IndexRow.UnmarshalJSON decodes each row twice).
type rowRecord struct {
	File                  string   `json:"file"`
	Bytes                 int64    `json:"bytes"`
	Subject               string   `json:"subject"`
	Session               string   `json:"session"`
	Trial                 string   `json:"trial"`
	Array                 string   `json:"array"`
	Muscle                string   `json:"muscle"`
	Side                  string   `json:"side"`
	LevelPctMVC           *float64 `json:"level_pct_mvc,omitempty"`
	DurationS             float64  `json:"duration_s"`
	Channels              int      `json:"channels"`
	Decomposition         string   `json:"decomposition"`
	Decompositions        int      `json:"decompositions"`
	Units                 int      `json:"units"`
	Discharges            int64    `json:"discharges"`
	LowConfidenceUnits    int      `json:"low_confidence_units"`
	LabMeanRatePPS        *float64 `json:"lab_mean_rate_pps,omitempty"`
	DerivedPlateauRatePPS *float64 `json:"derived_plateau_rate_pps,omitempty"`
	DerivedComputed       string   `json:"derived_computed,omitempty"`
}

func rowRecordOf(r IndexRow) rowRecord {
	return rowRecord{File: r.File, Bytes: r.Bytes, Subject: r.Subject, Session: r.Session, Trial: r.Trial, Array: r.Array,
		Muscle: r.Muscle, Side: r.Side, LevelPctMVC: known(r.LevelPctMVC), DurationS: r.DurationS, Channels: r.Channels,
		Decomposition: r.Decomposition, Decompositions: r.Decompositions, Units: r.Units, Discharges: r.Discharges,
		LowConfidenceUnits: r.LowConfidenceUnits, LabMeanRatePPS: known(r.LabMeanRatePPS),
		DerivedPlateauRatePPS: known(r.DerivedPlateauRatePPS), DerivedComputed: r.DerivedComputed}
}

func (r rowRecord) row() IndexRow {
	return IndexRow{File: r.File, Bytes: r.Bytes, Subject: r.Subject, Session: r.Session, Trial: r.Trial, Array: r.Array,
		Muscle: r.Muscle, Side: r.Side, LevelPctMVC: orNaN(r.LevelPctMVC), DurationS: r.DurationS, Channels: r.Channels,
		Decomposition: r.Decomposition, Decompositions: r.Decompositions, Units: r.Units, Discharges: r.Discharges,
		LowConfidenceUnits: r.LowConfidenceUnits, LabMeanRatePPS: orNaN(r.LabMeanRatePPS),
		DerivedPlateauRatePPS: orNaN(r.DerivedPlateauRatePPS), DerivedComputed: r.DerivedComputed}
}

func recordOf(s *RecordingSummary) summaryRecord {
	var rows []rowRecord
	for _, r := range s.Rows {
		rows = append(rows, rowRecordOf(r))
	}
	return summaryRecord{StudyID: s.Study.ID, StudyTitle: s.Study.Title, StudyDescription: s.Study.Description,
		StudyContact: s.Study.Contact, StudyLicense: s.Study.License,
		Subject: s.Subject.ID, Sex: s.Subject.Sex, AgeYears: known(s.Subject.AgeYears), AgeBand: s.Subject.AgeBand,
		DominantSide: s.Subject.DominantSide, HeightCm: known(s.Subject.HeightCm), MassKg: known(s.Subject.MassKg),
		HeightBandCm: s.Subject.HeightBandCm, MassBandKg: s.Subject.MassBandKg,
		Session: s.Session, Trials: s.Trials, Rows: rows}
}

func (r summaryRecord) summary(file string, size int64) RecordingSummary {
	s := RecordingSummary{File: file, Bytes: size, Session: r.Session, Trials: r.Trials,
		Study: record.Study{ID: r.StudyID, Title: r.StudyTitle, Description: r.StudyDescription, Contact: r.StudyContact, License: r.StudyLicense},
		Subject: SubjectRow{ID: r.Subject, Sex: r.Sex, AgeYears: orNaN(r.AgeYears), AgeBand: r.AgeBand,
			DominantSide: r.DominantSide, HeightCm: orNaN(r.HeightCm), MassKg: orNaN(r.MassKg),
			HeightBandCm: r.HeightBandCm, MassBandKg: r.MassBandKg}}
	for _, row := range r.Rows {
		x := row.row()
		x.File, x.Bytes = file, size
		s.Rows = append(s.Rows, x)
	}
	return s
}

// CatalogueMode says what an index run does with the catalogue.
type CatalogueMode int

const (
	// CatalogueUse reads the catalogue when there is one and refreshes it
	// when anything changed; without one, nothing is written.
	CatalogueUse CatalogueMode = iota
	// CatalogueCreate is CatalogueUse that also creates the catalogue.
	CatalogueCreate
	// CatalogueIgnore reads every recording and neither reads nor writes
	// a catalogue.
	CatalogueIgnore
)

// StudyOptions tune IndexStudy.
type StudyOptions struct {
	// Catalogue says whether the catalogue is read and written.
	Catalogue CatalogueMode
	// Workers is how many recordings are read at once (0: one per CPU).
	Workers int
	// Isolated reads recordings in worker processes (internal/isolate),
	// so that a file that crashes the HDF5 library is reported as
	// unreadable; the program must serve isolate workers (isolate.Serve).
	Isolated bool
}

// StudyInfo says what IndexStudy did.
type StudyInfo struct {
	// Recordings found; Reused from the catalogue by their stamp alone;
	// Rechecked by their content check (their stamp changed, their size,
	// modification time and content did not); Read opened and read.
	Recordings, Reused, Rechecked, Read int
	// Catalogue is the catalogue's path when one was read or written;
	// Written says it was (re)written.
	Catalogue string
	Written   bool
	// Notes explain a catalogue that was not used or could not be written.
	Notes []string
}

// IndexStudy returns the summaries of every recording under dir, in file
// order, using and refreshing the study's catalogue as opt says. A
// catalogue entry is used only when the file's size, modification time,
// change time, inode and device all equal the entry's; when only the change
// time, inode or device differ (the folder was copied or restored), the
// file's content check (its metadata digest) decides. Anything else is
// read again. Unreadable recordings are left out and named in the joined
// error, and never cached.
func IndexStudy(dir string, opt StudyOptions) ([]RecordingSummary, StudyInfo, error) {
	var info StudyInfo
	files, _, err := FindRecordings(dir)
	if err != nil {
		return nil, info, err
	}
	info.Recordings = len(files)
	catPath := filepath.Join(dir, CatalogueName)
	old := map[string]*catalogueEntry{}
	haveCat := false
	if opt.Catalogue != CatalogueIgnore {
		m, note, err := readCatalogue(catPath)
		switch {
		case err == nil:
			old, haveCat = m, true
			info.Catalogue = catPath
		case !errors.Is(err, os.ErrNotExist):
			info.Notes = append(info.Notes, note)
		}
	}
	entries := make([]*catalogueEntry, len(files))
	errs := make([]error, len(files))
	var toRead, toCheck []int
	for i, rel := range files {
		st, err := stampOf(filepath.Join(dir, filepath.FromSlash(rel)))
		if err != nil {
			errs[i] = err
			continue
		}
		e := old[rel]
		switch {
		case e != nil && e.fileStamp == st:
			entries[i] = e
			info.Reused++
		case e != nil && e.Bytes == st.Bytes && e.MtimeNs == st.MtimeNs && e.Content != "":
			entries[i] = &catalogueEntry{Path: rel, fileStamp: st, Content: e.Content, Summary: e.Summary}
			toCheck = append(toCheck, i)
		default:
			entries[i] = &catalogueEntry{Path: rel, fileStamp: st}
			toRead = append(toRead, i)
		}
	}
	writeCat := opt.Catalogue == CatalogueCreate || (opt.Catalogue == CatalogueUse && haveCat)
	r := summaryReader{dir: dir, isolated: opt.Isolated, content: writeCat}
	same := make([]bool, len(toCheck))
	r.run(len(toCheck), opt.Workers, func(k int) error {
		c, err := r.contentCheck(files[toCheck[k]])
		same[k] = err == nil && c == entries[toCheck[k]].Content
		return nil
	})
	for k, i := range toCheck {
		if same[k] {
			info.Rechecked++
		} else {
			toRead = append(toRead, i)
		}
	}
	sort.Ints(toRead)
	again := toRead
	readErrs := r.run(len(again), opt.Workers, func(k int) error {
		i := again[k]
		s, content, err := r.summary(files[i])
		if err != nil {
			return err
		}
		entries[i].Content, entries[i].Summary = content, recordOf(s)
		return nil
	})
	info.Read = len(again)
	for k, err := range readErrs {
		if err != nil {
			errs[again[k]] = err
		}
	}
	var sums []RecordingSummary
	var keep []*catalogueEntry
	var bad []error
	for i, e := range entries {
		if errs[i] != nil {
			bad = append(bad, fmt.Errorf("%s: %w", files[i], errs[i]))
			continue
		}
		sums = append(sums, e.Summary.summary(files[i], e.Bytes))
		keep = append(keep, e)
	}
	changed := info.Reused != len(keep) || len(keep) != len(old)
	if writeCat && (changed || opt.Catalogue == CatalogueCreate) {
		if err := writeCatalogue(catPath, keep); err != nil {
			info.Notes = append(info.Notes, fmt.Sprintf("the catalogue %s was not written: %v (the index itself is complete)", catPath, err))
		} else {
			info.Catalogue, info.Written = catPath, true
		}
	}
	return sums, info, errors.Join(bad...)
}

// stampOf stats path (following no link: FindRecordings lists regular
// files only).
func stampOf(path string) (fileStamp, error) {
	fi, err := os.Lstat(path)
	if err != nil {
		return fileStamp{}, err
	}
	st := fileStamp{Bytes: fi.Size(), MtimeNs: fi.ModTime().UnixNano()}
	if sys, ok := fi.Sys().(*syscall.Stat_t); ok {
		st.CtimeNs = sys.Ctim.Sec*1e9 + sys.Ctim.Nsec
		st.Inode, st.Device = sys.Ino, uint64(sys.Dev)
	}
	return st, nil
}

// readCatalogue reads a catalogue. Any doubt about it (another format or
// version, another software version, a line that does not parse, a path
// twice) discards all of it, with a note saying why.
func readCatalogue(path string) (map[string]*catalogueEntry, string, error) {
	data, err := os.ReadFile(path)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, "", err
		}
		return nil, fmt.Sprintf("the catalogue %s could not be read (%v); every recording is read", path, err), err
	}
	discard := func(why string) (map[string]*catalogueEntry, string, error) {
		return nil, fmt.Sprintf("the catalogue %s is not used (%s); every recording is read and it is written anew", path, why), errors.New(why)
	}
	if len(data) == 0 {
		return discard("it is empty")
	}
	lines := bytes.Split(bytes.TrimSuffix(data, []byte("\n")), []byte("\n"))
	var h catalogueHeader
	if err := json.Unmarshal(lines[0], &h); err != nil || h.Format != CatalogueFormat {
		return discard("its first line is not a muarc-catalogue header")
	}
	if h.FormatVersion != CatalogueFormatVersion {
		return discard(fmt.Sprintf("format version %d, this muarc reads %d", h.FormatVersion, CatalogueFormatVersion))
	}
	if h.Software != softwareName() {
		return discard(fmt.Sprintf("written by %s, this is %s", h.Software, softwareName()))
	}
	// The lines are decoded on all cores (most of an index run from the
	// catalogue is this decoding).
	lines = lines[1:]
	entries := make([]*catalogueEntry, len(lines))
	bad := make([]bool, len(lines))
	var wg sync.WaitGroup
	parts := runtime.NumCPU()
	for p := 0; p < parts; p++ {
		wg.Add(1)
		go func(p int) {
			defer wg.Done()
			for k := p * len(lines) / parts; k < (p+1)*len(lines)/parts; k++ {
				e := &catalogueEntry{}
				if err := json.Unmarshal(lines[k], e); err != nil || e.Path == "" {
					bad[k] = true
					continue
				}
				entries[k] = e
			}
		}(p)
	}
	wg.Wait()
	m := make(map[string]*catalogueEntry, len(entries))
	for k, e := range entries {
		line := k + 2
		if bad[k] {
			return discard(fmt.Sprintf("line %d does not parse", line))
		}
		if m[e.Path] != nil {
			return discard(fmt.Sprintf("line %d lists %s a second time", line, e.Path))
		}
		m[e.Path] = e
	}
	if len(m) != h.Files {
		return discard(fmt.Sprintf("its header counts %d files, it holds %d", h.Files, len(m)))
	}
	return m, "", nil
}

func softwareName() string { return "muarc " + schema.SoftwareVersion }

// writeCatalogue writes the catalogue atomically (temporary file, fsync,
// rename).
func writeCatalogue(path string, entries []*catalogueEntry) error {
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(catalogueHeader{Format: CatalogueFormat, FormatVersion: CatalogueFormatVersion,
		Software: softwareName(), Written: time.Now().UTC().Format(time.RFC3339), Files: len(entries)}); err != nil {
		return err
	}
	for _, e := range entries {
		if err := enc.Encode(e); err != nil {
			return err
		}
	}
	return atomicfile.WriteFile(path, b.Bytes(), true)
}

// rootContent is a recording's content check: its metadata digest, or for
// a file without one a SHA-256 over its root attributes (name, type and
// value, sorted by name).
func rootContent(digest string, attrs []rootAttr) string {
	if digest != "" {
		return "metadata_sha256:" + digest
	}
	sort.Slice(attrs, func(i, j int) bool { return attrs[i].Name < attrs[j].Name })
	h := sha256.New()
	for _, a := range attrs {
		fmt.Fprintf(h, "%s\x00%s\x00%v\n", a.Name, a.Type, a.Value)
	}
	return "root_attributes_sha256:" + hex.EncodeToString(h.Sum(nil))
}

type rootAttr struct {
	Name, Type string
	Value      any
}
