package archive

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"time"

	"muarc/archive/bagit"
	"muarc/internal/atomicfile"
	"muarc/internal/batch"
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
	// AcceptDamaged packs recordings whose only validation errors are
	// integrity damage (chunk checksums, structure, metadata digest), as
	// they are, and names them in bag-info.txt (Accepted-Damage). A
	// recording that cannot be read at all is refused regardless.
	AcceptDamaged bool
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
// size and modification time); an interrupted run, started again, skips the
// checks and the copy of what is unchanged in the source, but re-hashes
// every staged copy it reuses and copies again any whose sums no longer
// match. The cache is removed before the rename, so the deposit carries no
// trace of the source folder's paths.
//
// A full file system stops the run with an *atomicfile.NoSpaceError naming
// out; what was staged is kept for the next run.
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
	fatal    error // a failure that ends the run (a full disk), not one file

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
		p.oldDeposits()
		p.staging = StagingPath(p.out)
		if err := os.MkdirAll(filepath.Join(p.staging, bagit.PayloadDir, RecordingsDir), 0o755); err != nil {
			return nil, atomicfile.NoSpace(p.out, err)
		}
		cp := filepath.Join(p.staging, cacheFile)
		if err := p.cache.load(cp); err != nil {
			return nil, fmt.Errorf("%s: %w (delete the staging folder to start over)", cp, err)
		}
		if err := p.cache.openAppend(cp); err != nil {
			return nil, atomicfile.NoSpace(p.out, err)
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
	if p.fatal != nil {
		return p.res, p.fatal
	}
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
	return p.res, atomicfile.NoSpace(p.out, p.finishFolder(files, docs))
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
	return p.oneWith(rel, true)
}

// oneWith is one; useKnown says whether facts from shard reports (Known)
// may stand in for the checks.
func (p *packer) oneWith(rel string, useKnown bool) (FileRecord, *RecordingSummary) {
	fr := FileRecord{Path: rel}
	if p.stopped() {
		fr.Status, fr.Message = StatusError, "not packed: the run stopped on a full disk"
		return fr, nil
	}
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
	if !fromCache && useKnown {
		facts, fromKnown = p.known.get(rel, fr.Bytes, fr.MtimeNs)
		fromKnown = fromKnown && facts.Status != StatusError
	}
	if fromCache || fromKnown {
		fr.SHA256, fr.SHA512, fr.ValidationErrors, fr.Identifying, fr.Message = facts.SHA256, facts.SHA512, facts.ValidationErrors, facts.Identifying, facts.Message
		fr.Damage = facts.Damage
	} else {
		n, first, damage, ident, err := checkRecordingDamage(path)
		if err != nil {
			fr.Status, fr.Message = StatusError, err.Error()
			return fr, nil
		}
		fr.ValidationErrors, fr.Identifying, fr.Damage = n, ident, damage
		if n > 0 {
			fr.Message = "fails validation: " + strings.Join(first, "; ")
		}
	}
	p.decide(&fr)
	if fr.Status != StatusOK {
		p.record(fr)
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
	case fromCache && p.hasAll(fr) && p.stagedIntact(&fr):
		p.count(false, 0)
	case fromKnown && p.hasAll(fr):
		err := p.copyFile(&fr, path)
		if errors.Is(err, errSumsDiffer) {
			// The shard report's facts are for other bytes: check again.
			p.note("%s: %v of the shard report given with --known; checked, copied and hashed again", rel, err)
			return p.oneWith(rel, false)
		}
		if err != nil {
			p.stopOnNoSpace(err)
			return fr, sum
		}
		p.count(false, 0)
	default:
		if fromCache && p.hasAll(fr) {
			p.note("%s: the staged copy in %s no longer has the sums recorded when it was copied (changed or damaged since); copied and hashed again",
				rel, p.staging)
		}
		fr.SHA256, fr.SHA512 = "", ""
		if err := p.copyFile(&fr, path); err != nil {
			p.stopOnNoSpace(err)
			return fr, sum
		}
		p.count(true, fr.Bytes)
	}
	p.record(fr)
	return fr, sum
}

// record adds fr to the resume cache; a full disk ends the run.
func (p *packer) record(fr FileRecord) {
	if err := p.cache.putSync(&p.mu, fr); err != nil {
		if !p.stopOnNoSpace(err) {
			p.note("resume cache not updated for %s: %v", fr.Path, err)
		}
	}
}

// stopOnNoSpace ends the run when err says the disk is full (every further
// file would fail the same way) and reports whether it did.
func (p *packer) stopOnNoSpace(err error) bool {
	err = atomicfile.NoSpace(p.out, err)
	var ns *atomicfile.NoSpaceError
	if !errors.As(err, &ns) {
		return false
	}
	if ns.Path != p.out {
		err = &atomicfile.NoSpaceError{Path: p.out, Err: err} // name the deposit, not a staged file
	}
	p.mu.Lock()
	if p.fatal == nil {
		p.fatal = err
		if p.staging != "" {
			p.fatal = fmt.Errorf("%w (what was staged is kept in %s; the next run continues from there)", err, p.staging)
		}
	}
	p.mu.Unlock()
	return true
}

func (p *packer) stopped() bool {
	p.mu.Lock()
	defer p.mu.Unlock()
	return p.fatal != nil
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
	case fr.ValidationErrors > 0 && !p.acceptedDamage(fr):
		fr.Status = StatusRefused
		if len(fr.Damage) > 0 && len(fr.Damage) == fr.ValidationErrors && !strings.Contains(fr.Message, "--accept-damaged") {
			fr.Message += " (the file is damaged: restore it from a copy, or give --accept-damaged to pack it as it is, named in bag-info.txt)"
		}
	case len(fr.Identifying) > 0 && !p.opt.AllowIdentified:
		fr.Status = StatusRefused
		fr.Message = "still carries identifying fields: " + strings.Join(fr.Identifying, ", ") +
			" (run muarc deidentify first, or give --allow-identified for a closed, non-public deposit)"
	default:
		fr.Status = StatusOK
		if len(fr.Identifying) == 0 {
			fr.Message = ""
		}
		if p.acceptedDamage(fr) {
			fr.Message = "fails its integrity checks, packed as it is (--accept-damaged): " + strings.Join(fr.Damage, "; ")
		}
	}
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
