package archive

import (
	"archive/tar"
	"bufio"
	"bytes"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"regexp"
	"sort"
	"strings"
	"sync"
	"time"

	"muarc/archive/bagit"
	"muarc/internal/atomicfile"
	"muarc/internal/batch"
	"muarc/schema"
)

// Names inside a deposit's payload folder (data/).
const (
	RecordingsDir    = "recordings"         // data/recordings/<path in the study folder>
	TablesDir        = "tables"             // data/tables/subjects.tsv, recordings.tsv
	ReadmeFile       = "README.md"          // data/README.md
	LayoutFile       = "layout.md"          // data/layout.md (schema.Layout)
	DictionaryMD     = "data-dictionary.md" // data/data-dictionary.md
	DictionaryTSV    = "data-dictionary.tsv"
	LicenceFile      = "LICENCE.txt"       // data/LICENCE.txt: the SPDX licence and where its text is
	cacheFile        = ".pack-cache.jsonl" // resume cache inside the staging folder
	stagingSuffix    = ".partial"
	identifyingLabel = "Identifying-Data"
)

// ErrRefused is returned (wrapped) by Pack when at least one recording was
// refused or could not be read; no deposit is written then.
var ErrRefused = errors.New("recordings refused")

// PackOptions tune Pack.
type PackOptions struct {
	// Licence is the SPDX identifier of the deposit's licence; "" takes the
	// recordings' study licence (which must then be set and agree).
	Licence string
	// AllowIdentified packs recordings that still carry identifying fields
	// and marks the bag so in bag-info.txt (Identifying-Data).
	AllowIdentified bool
	// Workers is the number of files checked and hashed at once (0: one per
	// CPU).
	Workers int
	// Shard, when not batch.All, makes Pack check and hash only this shard
	// of the recordings, in place, and return a ShardReport instead of
	// writing a deposit.
	Shard batch.Shard
	// Known holds hashes and check results from earlier shard runs (merged
	// reports): a recording whose path, size and modification time match is
	// copied without being checked or hashed again.
	Known []*ShardReport
	// Tar streams the bag as one POSIX tar (ustar, pax where names need it)
	// to TarTo, or to the output path when TarTo is nil. Files are hashed
	// while they are written; there is no resume in tar mode.
	Tar   bool
	TarTo io.Writer
	// SHA512 also writes manifest-sha512.txt and tagmanifest-sha512.txt
	// (RFC 8493 section 2.4 asks tools to support SHA-512 and suggests it for
	// new bags, from memory); every file is still read once.
	SHA512 bool
	// Overwrite replaces an existing output.
	Overwrite bool
	// Date is the Bagging-Date; zero means today (UTC).
	Date time.Time
	// Progress, when not nil, is told how many payload bytes were hashed or
	// copied since its last call, and the total up front with n = 0.
	Progress func(n, total int64)
}

// PackResult tells what a pack run did.
type PackResult struct {
	// Output is the deposit folder, tar file or shard report written ("" when
	// nothing was written).
	Output string `json:"output"`
	// BagName is the bag's base folder name (the tar's top folder).
	BagName string `json:"bag_name"`
	// Files has one entry per file of the source folder that was looked at:
	// recordings (ok, refused or error) and skipped non-recordings.
	Files []FileRecord `json:"files"`
	// PayloadFiles and PayloadBytes are the bag's payload (Payload-Oxum).
	PayloadFiles int64 `json:"payload_files"`
	PayloadBytes int64 `json:"payload_bytes"`
	// Hashed and HashedBytes count recordings hashed in this run; Reused
	// counts recordings whose hash came from the resume cache or from Known.
	Hashed      int   `json:"hashed"`
	HashedBytes int64 `json:"hashed_bytes"`
	Reused      int   `json:"reused"`
	// HashSeconds is the wall time of the check-copy-hash phase.
	HashSeconds float64 `json:"hash_seconds"`
	// Licence is the deposit's SPDX licence.
	Licence string `json:"licence"`
	// Identified is true when the bag is marked as carrying identifying
	// data (--allow-identified).
	Identified bool `json:"identified"`
	// Notes are things the run reconciled or decided, for people to read.
	Notes []string `json:"notes"`
	// Report is the shard report in shard mode.
	Report *ShardReport `json:"-"`
}

// Refused returns the recordings that were refused or could not be read.
func (r *PackResult) Refused() []FileRecord {
	var out []FileRecord
	for _, f := range r.Files {
		if f.Status == StatusRefused || f.Status == StatusError {
			out = append(out, f)
		}
	}
	return out
}

// StagingPath is the folder a deposit at out is built in: ".<name>.partial"
// beside it. It survives an interrupted run; running the same pack again
// continues from it (see Pack).
func StagingPath(out string) string {
	return filepath.Join(filepath.Dir(out), "."+filepath.Base(out)+stagingSuffix)
}

// Pack makes a deposit of the recordings under src: a BagIt 1.0 bag (RFC
// 8493) at out with the recordings in data/recordings/, the study tables,
// the data dictionary, the layout document and a README in data/, the
// payload and tag manifests (SHA-256) and bag-info.txt.
//
// Every recording is validated and checked for identifying fields first;
// one that fails validation, or carries identifying fields without
// AllowIdentified, is refused, and then no deposit is written (the error
// wraps ErrRefused and the result names each refused file).
//
// The bag is built in StagingPath(out) and renamed into place at the end,
// so out never holds half a deposit. The staging folder keeps a resume
// cache (.pack-cache.jsonl: one JSON FileRecord per line, keyed by path,
// size and modification time); an interrupted run, started again, copies
// and hashes only what is new or changed. The cache is removed before the
// rename, so the deposit carries no trace of the source folder's paths.
func Pack(src, out string, opt PackOptions) (*PackResult, error) {
	p, err := newPacker(src, out, opt)
	if err != nil {
		return nil, err
	}
	return p.run()
}

type packer struct {
	src, out string
	opt      PackOptions
	res      *PackResult
	staging  string
	cache    *fixityCache
	known    *fixityCache
	mu       sync.Mutex
	total    int64

	study       studyInfo
	identified  []string        // recordings packed with identifying fields
	identFields map[string]bool // the fields they carry
}

func newPacker(src, out string, opt PackOptions) (*packer, error) {
	absSrc, err := filepath.Abs(src)
	if err != nil {
		return nil, err
	}
	p := &packer{src: absSrc, opt: opt, res: &PackResult{}, cache: newFixityCache(), known: newFixityCache(),
		identFields: map[string]bool{}}
	if opt.Shard.N == 0 {
		p.opt.Shard = batch.All
	}
	if !(opt.Tar && opt.TarTo != nil) {
		if out == "" {
			return nil, fmt.Errorf("no output given (-o DEPOSIT)")
		}
		p.out, err = filepath.Abs(out)
		if err != nil {
			return nil, err
		}
		if rel, err := filepath.Rel(absSrc, p.out); err == nil && rel != ".." && !strings.HasPrefix(rel, ".."+string(filepath.Separator)) {
			return nil, fmt.Errorf("%s: the output is inside the study folder %s; put it elsewhere", out, src)
		}
		if err := atomicfile.CheckTarget(p.out, opt.Overwrite); err != nil {
			return nil, err
		}
	}
	p.res.BagName = bagName(out)
	for _, r := range opt.Known {
		for _, f := range r.Files {
			p.known.put(f)
		}
	}
	return p, nil
}

// bagName is the bag's base folder name: the output's name without .tar.
func bagName(out string) string {
	if out == "" || out == "-" {
		return "deposit"
	}
	b := filepath.Base(out)
	b = strings.TrimSuffix(b, ".tar")
	if b == "" || b == "." || b == string(filepath.Separator) {
		return "deposit"
	}
	return b
}

func (p *packer) shardMode() bool { return p.opt.Shard.N > 1 }

func (p *packer) run() (*PackResult, error) {
	recs, skipped, err := FindRecordings(p.src)
	if err != nil {
		return nil, err
	}
	if p.shardMode() {
		recs = p.opt.Shard.Select(recs)
		// Skipped files are reported by shard 1 only, so a merge lists them once.
		if p.opt.Shard.I != 1 {
			skipped = nil
		}
	} else if len(recs) == 0 {
		return nil, fmt.Errorf("%s: no recordings (*.h5, *.hdf5) found; give the folder holding the muarc files", p.src)
	}
	folder := !p.opt.Tar && !p.shardMode()
	if folder {
		p.staging = StagingPath(p.out)
		if err := os.MkdirAll(filepath.Join(p.staging, bagit.PayloadDir, RecordingsDir), 0o755); err != nil {
			return nil, err
		}
		cp := filepath.Join(p.staging, cacheFile)
		if err := p.cache.load(cp); err != nil {
			return nil, fmt.Errorf("%s: %w (delete the staging folder to start over)", cp, err)
		}
		if err := p.cache.openAppend(cp); err != nil {
			return nil, err
		}
		defer p.cache.close()
	}

	// Sizes up front for the progress total.
	sizes := make([]int64, len(recs))
	for i, r := range recs {
		if st, err := os.Stat(p.abs(r)); err == nil {
			sizes[i] = st.Size()
			p.total += st.Size()
		}
	}
	if p.opt.Progress != nil {
		p.opt.Progress(0, p.total)
	}

	start := time.Now()
	files := make([]FileRecord, len(recs))
	sums := make([]*RecordingSummary, len(recs))
	batch.Run(len(recs), p.opt.Workers, func(i int) error {
		files[i], sums[i] = p.one(recs[i], folder)
		return nil
	}, nil)
	p.res.HashSeconds = time.Since(start).Seconds()
	for _, s := range skipped {
		files = append(files, FileRecord{Path: s, Status: StatusSkipped, Message: "not a muarc recording (*.h5, *.hdf5); left out of the deposit"})
	}
	p.res.Files = files

	if p.shardMode() {
		rep := NewShardReport("pack", p.src, p.opt.Shard, files)
		p.res.Report = rep
		if p.out != "" {
			var b bytes.Buffer
			if err := writeJSON(&b, rep); err != nil {
				return nil, err
			}
			if err := atomicfile.WriteFile(p.out, b.Bytes(), p.opt.Overwrite); err != nil {
				return nil, err
			}
			p.res.Output = p.out
		}
		if n := len(p.res.Refused()); n > 0 {
			return p.res, fmt.Errorf("%d of %d recordings in shard %s: %w", n, len(recs), p.opt.Shard, ErrRefused)
		}
		return p.res, nil
	}
	if n := len(p.res.Refused()); n > 0 {
		hint := ""
		if folder && p.res.Hashed+p.res.Reused == 0 {
			// Nothing was copied: leave no staging folder behind.
			p.cache.close()
			os.RemoveAll(p.staging)
		} else if folder {
			hint = fmt.Sprintf("; what was done is kept in %s, so the next run continues from there", p.staging)
		}
		return p.res, fmt.Errorf("%d of %d recordings: %w; no deposit written%s", n, len(recs), ErrRefused, hint)
	}

	var good []RecordingSummary
	for _, s := range sums {
		good = append(good, *s)
	}
	lic, err := p.licence(good)
	if err != nil {
		return p.res, err
	}
	p.res.Licence = lic
	if !folder {
		// The tar's generated files follow the recordings, so the
		// recordings table can carry the hashes made while streaming.
		return p.res, p.writeTar(files, func() ([]doc, error) { return p.documents(good, files) })
	}
	docs, err := p.documents(good, files)
	if err != nil {
		return p.res, err
	}
	return p.res, p.finishFolder(files, docs)
}

func (p *packer) abs(rel string) string { return filepath.Join(p.src, filepath.FromSlash(rel)) }

func (p *packer) dest(rel string) string {
	return filepath.Join(p.staging, bagit.PayloadDir, RecordingsDir, filepath.FromSlash(rel))
}

func (p *packer) note(format string, args ...any) {
	p.mu.Lock()
	p.res.Notes = append(p.res.Notes, fmt.Sprintf(format, args...))
	p.mu.Unlock()
}

func (p *packer) progress(n int64) {
	if p.opt.Progress != nil && n > 0 {
		p.mu.Lock()
		p.opt.Progress(n, p.total)
		p.mu.Unlock()
	}
}

// one checks, copies and hashes one recording (as far as the mode asks).
func (p *packer) one(rel string, folder bool) (FileRecord, *RecordingSummary) {
	fr := FileRecord{Path: rel}
	path := p.abs(rel)
	st, err := os.Stat(path)
	if err != nil {
		fr.Status, fr.Message = StatusError, err.Error()
		return fr, nil
	}
	fr.Bytes, fr.MtimeNs = st.Size(), st.ModTime().UnixNano()

	sum, err := summarize(path, rel)
	if err != nil {
		fr.Status, fr.Message = StatusError, err.Error()
		return fr, nil
	}
	sum.Bytes = fr.Bytes

	facts, fromCache := p.cache.get(rel, fr.Bytes, fr.MtimeNs)
	fromKnown := false
	if !fromCache {
		facts, fromKnown = p.known.get(rel, fr.Bytes, fr.MtimeNs)
		fromKnown = fromKnown && facts.Status != StatusError
	}
	if fromCache || fromKnown {
		fr.SHA256, fr.SHA512, fr.ValidationErrors, fr.Identifying, fr.Message = facts.SHA256, facts.SHA512, facts.ValidationErrors, facts.Identifying, facts.Message
	} else {
		n, first, ident, err := checkRecording(path)
		if err != nil {
			fr.Status, fr.Message = StatusError, err.Error()
			return fr, nil
		}
		fr.ValidationErrors, fr.Identifying = n, ident
		if n > 0 {
			fr.Message = "fails validation: " + strings.Join(first, "; ")
		}
	}
	p.decide(&fr)
	if fr.Status != StatusOK {
		p.cache.putSync(&p.mu, fr)
		p.progress(fr.Bytes) // not copied, but done with
		return fr, sum
	}

	switch {
	case p.shardMode():
		if !p.hasAll(fr) {
			if err := p.hashInPlace(&fr, path); err != nil {
				return fr, sum
			}
		} else {
			p.count(false, 0)
			p.progress(fr.Bytes)
		}
	case p.opt.Tar:
		// Hashed while the tar is written.
	case fromCache && p.hasAll(fr) && sizeIs(p.dest(rel), fr.Bytes):
		p.count(false, 0)
		p.progress(fr.Bytes)
	case fromKnown && p.hasAll(fr):
		if err := p.copyFile(&fr, path, false); err != nil {
			return fr, sum
		}
		p.count(false, 0)
	default:
		if err := p.copyFile(&fr, path, true); err != nil {
			return fr, sum
		}
		p.count(true, fr.Bytes)
	}
	if err := p.cache.putSync(&p.mu, fr); err != nil {
		p.note("resume cache not updated for %s: %v", rel, err)
	}
	return fr, sum
}

func (p *packer) count(hashed bool, n int64) {
	p.mu.Lock()
	defer p.mu.Unlock()
	if hashed {
		p.res.Hashed++
		p.res.HashedBytes += n
	} else {
		p.res.Reused++
	}
}

// decide sets the status from the facts and the options.
func (p *packer) decide(fr *FileRecord) {
	switch {
	case fr.ValidationErrors > 0:
		fr.Status = StatusRefused
	case len(fr.Identifying) > 0 && !p.opt.AllowIdentified:
		fr.Status = StatusRefused
		fr.Message = "still carries identifying fields: " + strings.Join(fr.Identifying, ", ") +
			" (run muarc deidentify first, or give --allow-identified for a closed, non-public deposit)"
	default:
		fr.Status = StatusOK
		if len(fr.Identifying) == 0 {
			fr.Message = ""
		}
	}
}

func (c *fixityCache) putSync(mu *sync.Mutex, f FileRecord) error {
	mu.Lock()
	defer mu.Unlock()
	return c.record(f)
}

func sizeIs(path string, n int64) bool {
	st, err := os.Stat(path)
	return err == nil && st.Mode().IsRegular() && st.Size() == n
}

func (p *packer) hashInPlace(fr *FileRecord, path string) error {
	f, err := os.Open(path)
	if err != nil {
		fr.Status, fr.Message = StatusError, err.Error()
		return err
	}
	defer f.Close()
	mh := newMultiHash(p.algs())
	n, err := io.CopyBuffer(mh, progressReader{f, p.progress}, make([]byte, bagit.BufferSize))
	if err == nil {
		err = unchanged(path, fr, n)
	}
	if err != nil {
		fr.Status, fr.Message, fr.SHA256, fr.SHA512 = StatusError, err.Error(), "", ""
		return err
	}
	mh.set(fr)
	p.count(true, n)
	return nil
}

// unchanged checks the source still has the size and time it had before it
// was read: a file written to while packing would get a wrong hash.
func unchanged(path string, fr *FileRecord, read int64) error {
	st, err := os.Stat(path)
	if err != nil {
		return err
	}
	if read != fr.Bytes || st.Size() != fr.Bytes || st.ModTime().UnixNano() != fr.MtimeNs {
		return fmt.Errorf("changed while it was being read (size %d -> %d); pack again when nothing writes to the study folder", fr.Bytes, st.Size())
	}
	return nil
}

type progressReader struct {
	r  io.Reader
	fn func(int64)
}

func (r progressReader) Read(b []byte) (int, error) {
	n, err := r.r.Read(b)
	r.fn(int64(n))
	return n, err
}

// copyFile copies the source into the staging folder (temp name, sync,
// rename), hashing the bytes as they pass when hash is true.
func (p *packer) copyFile(fr *FileRecord, path string, hash bool) error {
	fail := func(err error) error {
		fr.Status, fr.Message = StatusError, err.Error()
		if hash {
			fr.SHA256, fr.SHA512 = "", ""
		}
		return err
	}
	dst := p.dest(fr.Path)
	if err := os.MkdirAll(filepath.Dir(dst), 0o755); err != nil {
		return fail(err)
	}
	in, err := os.Open(path)
	if err != nil {
		return fail(err)
	}
	defer in.Close()
	tmp := dst + ".copying"
	out, err := os.OpenFile(tmp, os.O_WRONLY|os.O_CREATE|os.O_TRUNC, 0o644)
	if err != nil {
		return fail(err)
	}
	h := newMultiHash(p.algs())
	buf := make([]byte, bagit.BufferSize)
	var n int64
	for {
		k, rerr := in.Read(buf)
		if k > 0 {
			if _, err := out.Write(buf[:k]); err != nil {
				out.Close()
				os.Remove(tmp)
				return fail(err)
			}
			if hash {
				h.Write(buf[:k])
			}
			n += int64(k)
			p.progress(int64(k))
		}
		if rerr == io.EOF {
			break
		}
		if rerr != nil {
			out.Close()
			os.Remove(tmp)
			return fail(rerr)
		}
	}
	err = out.Sync()
	if cerr := out.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = unchanged(path, fr, n)
	}
	if err == nil {
		err = os.Rename(tmp, dst)
	}
	if err != nil {
		os.Remove(tmp)
		return fail(err)
	}
	if hash {
		h.set(fr)
	}
	return nil
}

// doc is one generated payload file: bag-relative path and content.
type doc struct {
	path string
	data []byte
}

// documents makes the generated payload files: tables, dictionary, layout,
// README.
func (p *packer) documents(sums []RecordingSummary, files []FileRecord) ([]doc, error) {
	sha := map[string]string{}
	for _, f := range files {
		sha[f.Path] = f.SHA256
	}
	tables := StudyTables(sums, sha)
	p.res.Notes = append(p.res.Notes, tables.Notes...)
	dict, err := DataDictionary()
	if err != nil {
		return nil, err
	}
	var md, tsv bytes.Buffer
	WriteDictionaryMarkdown(&md, dict)
	WriteDictionaryTSV(&tsv, dict)

	study, notes := studyOf(sums)
	p.res.Notes = append(p.res.Notes, notes...)
	lic := p.res.Licence
	p.study = study
	for _, f := range files {
		if len(f.Identifying) > 0 {
			p.identified = append(p.identified, f.Path)
			for _, n := range f.Identifying {
				// "trials[2].notes" -> "trials[].notes": one name per field.
				p.identFields[listIndex.ReplaceAllString(n, "[]")] = true
			}
		}
	}
	p.res.Identified = p.opt.AllowIdentified
	readme := readmeText(study, lic, sums, p.opt.AllowIdentified, p.identified, p.bagDate())
	d := func(parts ...string) string { return path.Join(append([]string{bagit.PayloadDir}, parts...)...) }
	return []doc{
		{d(ReadmeFile), readme},
		{d(LicenceFile), licenceText(lic, study)},
		{d(LayoutFile), []byte(schema.Layout)},
		{d(DictionaryMD), md.Bytes()},
		{d(DictionaryTSV), tsv.Bytes()},
		{d(TablesDir, SubjectsTable), tables.Subjects},
		{d(TablesDir, RecordingsTable), tables.Recordings},
	}, nil
}

func (p *packer) bagDate() time.Time {
	if p.opt.Date.IsZero() {
		return time.Now().UTC()
	}
	return p.opt.Date.UTC()
}

var listIndex = regexp.MustCompile(`\[[0-9]+\]`)

var spdxID = regexp.MustCompile(`^[A-Za-z0-9][A-Za-z0-9.+-]*( (AND|OR|WITH) [A-Za-z0-9][A-Za-z0-9.+-]*)*$`)

// licence picks the deposit licence: the option, else the recordings'
// agreed study licence.
func (p *packer) licence(sums []RecordingSummary) (string, error) {
	seen := map[string][]string{}
	for _, s := range sums {
		if s.Study.License != "" {
			seen[s.Study.License] = append(seen[s.Study.License], s.File)
		}
	}
	if l := p.opt.Licence; l != "" {
		if !spdxID.MatchString(l) {
			return "", fmt.Errorf("--licence %q is not an SPDX licence identifier or expression (e.g. CC-BY-4.0, CC0-1.0)", l)
		}
		for other, fs := range seen {
			if other != l {
				p.note("%d recordings name licence %s in /study; the deposit is licensed %s as --licence asks", len(fs), other, l)
			}
		}
		return l, nil
	}
	switch len(seen) {
	case 0:
		return "", fmt.Errorf("no licence: the recordings' /study has none; give --licence SPDX (e.g. CC-BY-4.0)")
	case 1:
		for l := range seen {
			if !spdxID.MatchString(l) {
				return "", fmt.Errorf("study licence %q is not an SPDX identifier; give --licence SPDX", l)
			}
			return l, nil
		}
	}
	var parts []string
	for _, l := range sortedKeys(seen) {
		parts = append(parts, fmt.Sprintf("%s (%s)", l, seen[l][0]))
	}
	return "", fmt.Errorf("the recordings name different licences: %s; give --licence SPDX for the deposit", strings.Join(parts, ", "))
}

// studyOf merges the study metadata of the recordings: the first non-empty
// value of each field, with a note where recordings disagree.
func studyOf(sums []RecordingSummary) (st studyInfo, notes []string) {
	fields := []struct {
		name string
		get  func(RecordingSummary) string
		dst  *string
	}{
		{"id", func(s RecordingSummary) string { return s.Study.ID }, &st.ID},
		{"title", func(s RecordingSummary) string { return s.Study.Title }, &st.Title},
		{"description", func(s RecordingSummary) string { return s.Study.Description }, &st.Description},
		{"contact", func(s RecordingSummary) string { return s.Study.Contact }, &st.Contact},
	}
	for _, f := range fields {
		from := ""
		for _, s := range sums {
			v := f.get(s)
			if v == "" {
				continue
			}
			if *f.dst == "" {
				*f.dst, from = v, s.File
			} else if v != *f.dst {
				notes = append(notes, fmt.Sprintf("study %s differs between %s and %s; the deposit uses the first", f.name, from, s.File))
				break
			}
		}
	}
	return st, notes
}

type studyInfo struct{ ID, Title, Description, Contact string }

var emailRe = regexp.MustCompile(`[A-Za-z0-9._%+-]+@[A-Za-z0-9.-]+\.[A-Za-z]{2,}`)

// contactFields splits a contact text into Contact-Name and Contact-Email
// (RFC 8493 section 2.2.2 reserved labels).
func contactFields(c string) []bagit.Field {
	c = strings.TrimSpace(c)
	if c == "" {
		return nil
	}
	email := emailRe.FindString(c)
	name := c
	if email != "" {
		name = strings.Replace(name, "<"+email+">", "", 1)
		name = strings.Replace(name, email, "", 1)
	}
	name = strings.TrimSpace(strings.TrimRight(strings.TrimSpace(name), ",;:"))
	name = strings.TrimSpace(strings.TrimSuffix(name, "()"))
	var out []bagit.Field
	if name != "" {
		out = append(out, bagit.Field{Label: "Contact-Name", Value: name})
	}
	if email != "" {
		out = append(out, bagit.Field{Label: "Contact-Email", Value: email})
	}
	return out
}

// info builds bag-info.txt.
func (p *packer) info(octets, files int64) []byte {
	var f []bagit.Field
	if p.study.ID != "" {
		f = append(f, bagit.Field{Label: "External-Identifier", Value: p.study.ID})
	}
	desc := p.study.Title
	if p.study.Description != "" {
		if desc != "" {
			desc += ". "
		}
		desc += p.study.Description
	}
	if desc != "" {
		f = append(f, bagit.Field{Label: "External-Description", Value: desc})
	}
	f = append(f, contactFields(p.study.Contact)...)
	f = append(f,
		bagit.Field{Label: "Bagging-Date", Value: p.bagDate().Format("2006-01-02")},
		bagit.Field{Label: "Bag-Software-Agent", Value: schema.Software},
		bagit.Field{Label: "Payload-Oxum", Value: bagit.PayloadOxum(octets, files)},
		bagit.Field{Label: "Bag-Size", Value: humanBytes(octets)},
		bagit.Field{Label: "Licence-SPDX", Value: p.res.Licence},
	)
	if p.opt.AllowIdentified {
		v := "not checked: packed with --allow-identified; no recording was found to carry identifying fields, but the bag is not for public deposit"
		if len(p.identified) > 0 {
			v = fmt.Sprintf("PRESENT: packed with --allow-identified; %d recordings still carry %s. Not for public deposit",
				len(p.identified), strings.Join(sortedKeys(p.identFields), ", "))
		}
		f = append(f, bagit.Field{Label: identifyingLabel, Value: v})
	}
	return bagit.FormatInfo(f)
}

func humanBytes(n int64) string {
	units := []string{"bytes", "KB", "MB", "GB", "TB"}
	v := float64(n)
	i := 0
	for v >= 1000 && i < len(units)-1 {
		v /= 1000
		i++
	}
	if i == 0 {
		return fmt.Sprintf("%d bytes", n)
	}
	return fmt.Sprintf("%.1f %s", v, units[i])
}

// finishFolder writes the generated files and manifests into the staging
// folder, drops leftovers of earlier runs, and renames it into place.
func (p *packer) finishFolder(files []FileRecord, docs []doc) error {
	keep := map[string]bool{}
	entries := map[string][]bagit.Entry{}
	var octets, count int64
	for _, f := range files {
		if f.Status != StatusOK {
			continue
		}
		rp := path.Join(bagit.PayloadDir, RecordingsDir, f.Path)
		keep[rp] = true
		for _, alg := range p.algs() {
			entries[alg] = append(entries[alg], bagit.Entry{Path: rp, Sum: f.sum(alg)})
		}
		octets += f.Bytes
		count++
	}
	for _, d := range docs {
		if err := writeSynced(filepath.Join(p.staging, filepath.FromSlash(d.path)), d.data); err != nil {
			return err
		}
		keep[d.path] = true
		for _, alg := range p.algs() {
			entries[alg] = append(entries[alg], bagit.Entry{Path: d.path, Sum: sumOf(alg, d.data)})
		}
		octets += int64(len(d.data))
		count++
	}
	// Leftovers: recordings removed from the source since an interrupted
	// run, stray temporary copies.
	payload := filepath.Join(p.staging, bagit.PayloadDir)
	err := filepath.WalkDir(payload, func(fp string, d fs.DirEntry, err error) error {
		if err != nil || d.IsDir() {
			return err
		}
		rel, _ := filepath.Rel(p.staging, fp)
		if !keep[filepath.ToSlash(rel)] {
			return os.Remove(fp)
		}
		return nil
	})
	if err != nil {
		return err
	}
	removeEmptyDirs(payload)
	p.res.PayloadFiles, p.res.PayloadBytes = count, octets

	for _, t := range p.tagFiles(entries, p.info(octets, count)) {
		if err := writeSynced(filepath.Join(p.staging, t.path), t.data); err != nil {
			return err
		}
	}
	if err := p.cache.close(); err != nil {
		return err
	}
	if err := os.Remove(filepath.Join(p.staging, cacheFile)); err != nil && !errors.Is(err, fs.ErrNotExist) {
		return err
	}
	if err := publishDir(p.staging, p.out, p.opt.Overwrite); err != nil {
		return err
	}
	p.res.Output = p.out
	return nil
}

func removeEmptyDirs(root string) {
	var dirs []string
	filepath.WalkDir(root, func(fp string, d fs.DirEntry, err error) error {
		if err == nil && d.IsDir() && fp != root {
			dirs = append(dirs, fp)
		}
		return nil
	})
	sort.Sort(sort.Reverse(sort.StringSlice(dirs)))
	for _, d := range dirs {
		os.Remove(d) // fails, harmlessly, when not empty
	}
}

func writeSynced(path string, data []byte) error {
	if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
		return err
	}
	f, err := os.OpenFile(path, os.O_WRONLY|os.O_CREATE|os.O_TRUNC, 0o644)
	if err != nil {
		return err
	}
	if _, err := f.Write(data); err != nil {
		f.Close()
		return err
	}
	if err := f.Sync(); err != nil {
		f.Close()
		return err
	}
	return f.Close()
}

// publishDir renames the finished staging folder to out. With overwrite an
// existing out is moved aside first and removed after the rename.
func publishDir(staging, out string, overwrite bool) error {
	var old string
	if _, err := os.Lstat(out); err == nil {
		if !overwrite {
			return atomicfile.CheckTarget(out, false)
		}
		old = filepath.Join(filepath.Dir(out), fmt.Sprintf(".%s.old-%d", filepath.Base(out), time.Now().UnixNano()))
		if err := os.Rename(out, old); err != nil {
			return err
		}
	}
	if err := os.Rename(staging, out); err != nil {
		if old != "" {
			os.Rename(old, out)
		}
		return err
	}
	if d, err := os.Open(filepath.Dir(out)); err == nil {
		d.Sync()
		d.Close()
	}
	if old != "" {
		return os.RemoveAll(old)
	}
	return nil
}

// writeTar streams the bag as one tar: bagit.txt, the payload (recordings
// hashed as they are written), then the generated files, the manifest,
// bag-info.txt and the tag manifest.
func (p *packer) writeTar(files []FileRecord, makeDocs func() ([]doc, error)) error {
	write := func(w io.Writer) error {
		bw := bufio.NewWriterSize(w, bagit.BufferSize)
		tw := tar.NewWriter(bw)
		now := p.bagDate().Truncate(time.Second)
		base := p.res.BagName
		dirs := map[string]bool{}
		mkdirs := func(rel string) error {
			var parts []string
			for d := path.Dir(rel); d != "." && d != "/"; d = path.Dir(d) {
				parts = append(parts, d)
			}
			for i := len(parts) - 1; i >= 0; i-- {
				if dirs[parts[i]] {
					continue
				}
				dirs[parts[i]] = true
				if err := tw.WriteHeader(&tar.Header{Typeflag: tar.TypeDir, Name: base + "/" + parts[i] + "/", Mode: 0o755, ModTime: now}); err != nil {
					return err
				}
			}
			return nil
		}
		if err := tw.WriteHeader(&tar.Header{Typeflag: tar.TypeDir, Name: base + "/", Mode: 0o755, ModTime: now}); err != nil {
			return err
		}
		put := func(rel string, data []byte) error {
			if err := mkdirs(rel); err != nil {
				return err
			}
			if err := tw.WriteHeader(&tar.Header{Typeflag: tar.TypeReg, Name: base + "/" + rel, Mode: 0o644, Size: int64(len(data)), ModTime: now}); err != nil {
				return err
			}
			_, err := tw.Write(data)
			return err
		}
		if err := put(bagit.DeclarationFile, []byte(bagit.Declaration)); err != nil {
			return err
		}
		entries := map[string][]bagit.Entry{}
		var octets, count int64
		buf := make([]byte, bagit.BufferSize)
		for i := range files {
			fr := &files[i]
			if fr.Status != StatusOK {
				continue
			}
			rel := path.Join(bagit.PayloadDir, RecordingsDir, fr.Path)
			if err := mkdirs(rel); err != nil {
				return err
			}
			in, err := os.Open(p.abs(fr.Path))
			if err != nil {
				return fmt.Errorf("%s: %w", fr.Path, err)
			}
			if err := tw.WriteHeader(&tar.Header{Typeflag: tar.TypeReg, Name: base + "/" + rel, Mode: 0o644, Size: fr.Bytes, ModTime: time.Unix(0, fr.MtimeNs).Truncate(time.Second)}); err != nil {
				in.Close()
				return err
			}
			h := newMultiHash(p.algs())
			n, err := io.CopyBuffer(io.MultiWriter(tw, h), progressReader{io.LimitReader(in, fr.Bytes), p.progress}, buf)
			in.Close()
			if err == nil {
				err = unchanged(p.abs(fr.Path), fr, n)
			}
			if err != nil {
				return fmt.Errorf("%s: %w", fr.Path, err)
			}
			h.set(fr)
			p.count(true, n)
			for _, alg := range p.algs() {
				entries[alg] = append(entries[alg], bagit.Entry{Path: rel, Sum: fr.sum(alg)})
			}
			octets += n
			count++
		}
		docs, err := makeDocs()
		if err != nil {
			return err
		}
		for _, d := range docs {
			if err := put(d.path, d.data); err != nil {
				return err
			}
			for _, alg := range p.algs() {
				entries[alg] = append(entries[alg], bagit.Entry{Path: d.path, Sum: sumOf(alg, d.data)})
			}
			octets += int64(len(d.data))
			count++
		}
		p.res.PayloadFiles, p.res.PayloadBytes = count, octets
		for _, t := range p.tagFiles(entries, p.info(octets, count)) {
			if t.path == bagit.DeclarationFile {
				continue // written first
			}
			if err := put(t.path, t.data); err != nil {
				return err
			}
		}
		if err := tw.Close(); err != nil {
			return err
		}
		return bw.Flush()
	}
	if p.opt.TarTo != nil {
		if err := write(p.opt.TarTo); err != nil {
			return err
		}
		p.res.Output = "-"
		return nil
	}
	if err := atomicfile.Write(p.out, p.opt.Overwrite, func(f *os.File) error { return write(f) }); err != nil {
		return err
	}
	p.res.Output = p.out
	return nil
}

// ReportShard is the shard the run covered (batch.All unless sharded).
func (r *PackResult) ReportShard() batch.Shard {
	if r.Report != nil {
		if s, err := batch.ParseShard(r.Report.Shard); err == nil {
			return s
		}
	}
	return batch.All
}

// algs are the manifest algorithms of this run.
func (p *packer) algs() []string {
	if p.opt.SHA512 {
		return []string{"sha256", "sha512"}
	}
	return []string{"sha256"}
}

// hasAll reports whether fr carries a sum for every algorithm of the run.
func (p *packer) hasAll(fr FileRecord) bool {
	return fr.SHA256 != "" && (!p.opt.SHA512 || fr.SHA512 != "")
}

// tagFiles makes the tag files: bagit.txt, bag-info.txt, one payload
// manifest per algorithm, then one tag manifest per algorithm listing all of
// those (RFC 8493 section 2.2.1).
func (p *packer) tagFiles(entries map[string][]bagit.Entry, info []byte) []doc {
	tags := []doc{{bagit.DeclarationFile, []byte(bagit.Declaration)}, {bagit.InfoFile, info}}
	for _, alg := range p.algs() {
		tags = append(tags, doc{bagit.ManifestName(alg), bagit.FormatManifest(entries[alg])})
	}
	out := tags
	for _, alg := range p.algs() {
		var es []bagit.Entry
		for _, t := range tags {
			es = append(es, bagit.Entry{Path: t.path, Sum: sumOf(alg, t.data)})
		}
		out = append(out, doc{bagit.TagManifestName(alg), bagit.FormatManifest(es)})
	}
	return out
}
