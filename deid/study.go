package deid

import (
	"crypto/sha256"
	"encoding/binary"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"hash"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"sync"
	"time"

	"muarc/internal/atomicfile"
	"muarc/internal/batch"
	"muarc/recfile"
	"muarc/record"
	"muarc/schema"
	"muarc/validate"
)

// StudyOptions control DeidentifyStudy and DeidentifyFile.
type StudyOptions struct {
	// Policy is the policy; nil means Default().
	Policy *Policy
	// Key is the study key (required).
	Key *Key
	// Workers is the number of files done at once (0: one per CPU).
	Workers int
	// Shard selects a part of the study's files (batch.All for all).
	Shard batch.Shard
	// DryRun builds the plan and writes nothing.
	DryRun bool
	// Overwrite replaces existing output files.
	Overwrite bool
	// Linkage, when set, is where the private linkage file (original id ->
	// pseudonym) goes: mode 0600, never inside the output folder.
	Linkage string
	// K is the group size of the k-anonymity report (0: the policy's k).
	K int
	// Progress, when set, is called after each file.
	Progress func(done, total int)
	// Now is the time of the history entry (zero: the current time).
	Now time.Time
	// AcceptDamaged de-identifies a source that fails validation's
	// integrity checks (chunk checksums, structure, metadata digest) as it
	// reads, recording the damage in the output's history. Without it such
	// a source is refused: a copy would carry the damage under a clean new
	// checksum and digest.
	AcceptDamaged bool
}

// FileOutcome is the report of one input file.
type FileOutcome struct {
	// Input is the input's name relative to the source folder. It may itself
	// identify: the report is for the person holding the originals.
	Input string `json:"input"`
	// Output is the output's name relative to the output folder.
	Output  string `json:"output,omitempty"`
	Subject string `json:"subject,omitempty"`
	Session string `json:"session,omitempty"`
	// Fields, Unlisted, Scrubbed and Notes as in Result.
	Fields   []FieldOutcome `json:"fields,omitempty"`
	Unlisted []string       `json:"unlisted_dropped,omitempty"`
	Scrubbed []Removal      `json:"scrubbed,omitempty"`
	Notes    []string       `json:"notes,omitempty"`
	// Scan is the leak scan of the written output.
	Scan *ScanSummary `json:"scan,omitempty"`
	// DataChecked is the number of datasets whose values were compared with
	// the input's by SHA-256 and found identical.
	DataChecked int `json:"datasets_bit_exact,omitempty"`
	// Findings are the strings that would still identify, by path, with
	// the policy line that fixes each (when the file was refused for them).
	Findings []Finding `json:"findings,omitempty"`
	// Error says why the file was not written ("" when it was).
	Error string `json:"error,omitempty"`

	err   error
	quasi QuasiIDs
	pseud string // the subject's pseudonym, even when the policy drops the id
}

// ScanSummary is what the leak scan of one output found.
type ScanSummary struct {
	// Bytes is the file size scanned.
	Bytes int64 `json:"bytes_scanned"`
	// Values is the number of original identifying values searched for,
	// each as UTF-8, UTF-16LE and UTF-16BE (dates in every spelling).
	Values int `json:"values_searched"`
	// Unscannable are values too short to search for in the raw bytes
	// (masked); they were still searched for in the decoded metadata.
	Unscannable []string `json:"too_short_for_byte_scan,omitempty"`
	// Leaks are the values found (masked), in the raw bytes or in the
	// decoded metadata view.
	Leaks []string `json:"leaks"`
	// Findings are the strings of the output read back that still hold an
	// original value, by path.
	Findings []Finding `json:"findings,omitempty"`
	// StillIdentifying are paths IdentifyingFields reports in the output.
	StillIdentifying []string `json:"still_identifying,omitempty"`
}

// PlanLine is one line of the policy plan: a field and its action.
type PlanLine struct {
	Path   string `json:"path"`
	Action string `json:"action"`
}

// StudyReport is the report of a de-identification run.
type StudyReport struct {
	Policy         string        `json:"policy"`
	PolicySHA256   string        `json:"policy_sha256"`
	KeyFingerprint string        `json:"key_fingerprint"`
	DryRun         bool          `json:"dry_run"`
	Shard          string        `json:"shard,omitempty"`
	Files          []FileOutcome `json:"files"`
	Written        int           `json:"written"`
	Failed         int           `json:"failed"`
	// Plan lists every field of the layout and what the policy does to it
	// (dry runs).
	Plan []PlanLine `json:"plan,omitempty"`
	// Collisions are pseudonyms that two different ids map to.
	Collisions []string `json:"collisions,omitempty"`
	// KAnonymity is the report over the subjects written (or planned).
	KAnonymity *KReport `json:"k_anonymity,omitempty"`
	// Linkage is the linkage file written, if asked.
	Linkage string   `json:"linkage_file,omitempty"`
	Notes   []string `json:"notes,omitempty"`
	// Caution is the reminder every report carries.
	Caution string `json:"caution"`
}

// Caution is printed with every report.
const Caution = "muarc helps de-identify; it does not certify. The ethics board, the consent given and local data-protection law decide what may be shared. A face photograph, a voice recording or a rare diagnosis in any attachment can identify a person too."

// Plan returns every field of the layout (from the field registry), in a
// stable order, with what the policy does to it, then the recorded data
// carried unchanged.
func (p *Policy) Plan() []PlanLine {
	paths := policyPaths()
	for k := range p.Fields {
		if !slices.Contains(paths, k) {
			paths = append(paths, k)
		}
	}
	sort.Strings(paths)
	var out []PlanLine
	for _, k := range paths {
		act, named := p.ActionFor(k)
		s := string(act)
		if !named {
			s = "drop (not named in the policy)"
		}
		if k == "trials[].arrays[].decompositions[].units[].extra.*" && act != Drop {
			s += " (number columns; a text column is dropped unless named on its own)"
		}
		out = append(out, PlanLine{k, s})
	}
	for _, f := range schema.Fields {
		if f.Class == schema.ClassCarried {
			out = append(out, PlanLine{f.Path(), "keep (the recorded data, always carried bit-exact)"})
		}
	}
	out = append(out, PlanLine{"trials[].arrays[].decompositions[].discharges", "keep (the recorded data, always carried bit-exact)"})
	return out
}

// checkLinkage checks, before anything is written, that the linkage file
// can be written where asked: outside the output folder, in a folder that
// exists and takes a new file, and not over an existing file.
func checkLinkage(path, outDir string) error {
	if path == "" {
		return nil
	}
	if insideDir(path, outDir) {
		return fmt.Errorf("%s: the linkage file must not lie inside the output folder %s (it links pseudonyms back to people); give a path beside the originals", path, outDir)
	}
	if _, err := os.Lstat(path); err == nil {
		return fmt.Errorf("%s: %w (refusing to overwrite a linkage file; give a new name)", path, atomicfile.ErrExists)
	}
	dir := filepath.Dir(path)
	fi, err := os.Stat(dir)
	if err != nil || !fi.IsDir() {
		return fmt.Errorf("%s: the linkage file's folder %s does not exist; create it first (nothing was written)", path, dir)
	}
	probe, err := os.CreateTemp(dir, ".linkage-probe-*")
	if err != nil {
		return fmt.Errorf("%s: cannot write in %s: %v (nothing was written)", path, dir, err)
	}
	probe.Close()
	return os.Remove(probe.Name())
}

// job is one input file of a run.
type job struct {
	in, rel  string
	subj     string // original subject id
	sess     string
	out      string // output name
	preError error
	damage   map[string]int // integrity findings accepted, by check id
}

// DeidentifyStudy de-identifies every muarc file (*.h5) under srcDir into
// outDir (created if needed), one fresh file per input, named by the
// subject's and session's pseudonyms. Inputs are never modified. Every
// output is scanned for leaks before it is published; a file that fails is
// not written and the run carries on. The returned error is for problems
// with the run itself (bad folders, key, linkage path); per-file failures
// are in the report.
func DeidentifyStudy(srcDir, outDir string, opt StudyOptions) (*StudyReport, error) {
	if opt.Key == nil {
		return nil, fmt.Errorf("no key: make one with `muarc key new FILE` and give --key")
	}
	inputs, err := findInputs(srcDir, outDir)
	if err != nil {
		return nil, err
	}
	if len(inputs) == 0 {
		return nil, fmt.Errorf("%s: no muarc files (*.h5) found", srcDir)
	}
	return DeidentifyFiles(srcDir, inputs, outDir, opt)
}

// DeidentifyFiles is DeidentifyStudy for a given list of files, named
// relative to srcDir (opt.Shard selects among them).
func DeidentifyFiles(srcDir string, rels []string, outDir string, opt StudyOptions) (*StudyReport, error) {
	if opt.Key == nil {
		return nil, fmt.Errorf("no key: make one with `muarc key new FILE` and give --key")
	}
	sel := opt.Shard.Select(rels)
	if len(sel) == 0 {
		return nil, fmt.Errorf("shard %s holds no file", opt.Shard)
	}
	jobs := make([]*job, len(sel))
	for i, rel := range sel {
		jobs[i] = &job{in: filepath.Join(srcDir, rel), rel: rel}
	}
	return run(jobs, outDir, false, opt)
}

// DeidentifyFile de-identifies one file into outPath.
func DeidentifyFile(inPath, outPath string, opt StudyOptions) (*StudyReport, error) {
	if opt.Key == nil {
		return nil, fmt.Errorf("no key: make one with `muarc key new FILE` and give --key")
	}
	if same, _ := samePath(inPath, outPath); same {
		return nil, fmt.Errorf("%s: the output would replace the input; de-identification writes a fresh file", outPath)
	}
	j := &job{in: inPath, rel: filepath.Base(inPath), out: filepath.Base(outPath)}
	return run([]*job{j}, filepath.Dir(outPath), true, opt)
}

func samePath(a, b string) (bool, error) {
	fa, err := os.Stat(a)
	if err != nil {
		return false, err
	}
	fb, err := os.Stat(b)
	if err != nil {
		return false, err
	}
	return os.SameFile(fa, fb), nil
}

// findInputs lists *.h5 files under dir (relative, sorted), skipping hidden
// entries and the output folder when it lies inside.
func findInputs(dir, outDir string) ([]string, error) {
	fi, err := os.Stat(dir)
	if err != nil {
		return nil, err
	}
	if !fi.IsDir() {
		return nil, fmt.Errorf("%s: not a folder", dir)
	}
	absOut, _ := filepath.Abs(outDir)
	absSrc, _ := filepath.Abs(dir)
	if absOut == absSrc {
		return nil, fmt.Errorf("%s: the output folder must differ from the source folder", outDir)
	}
	var out []string
	err = filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if p != dir && strings.HasPrefix(d.Name(), ".") {
			if d.IsDir() {
				return filepath.SkipDir
			}
			return nil
		}
		if d.IsDir() {
			if a, _ := filepath.Abs(p); a == absOut {
				return filepath.SkipDir
			}
			return nil
		}
		if d.Type().IsRegular() && strings.EqualFold(filepath.Ext(p), ".h5") {
			rel, _ := filepath.Rel(dir, p)
			out = append(out, rel)
		}
		return nil
	})
	sort.Strings(out)
	return out, err
}

// insideDir reports whether path lies in dir (after resolving symbolic
// links of the existing parts).
func insideDir(path, dir string) bool {
	resolve := func(p string) string {
		a, err := filepath.Abs(p)
		if err != nil {
			return p
		}
		// resolve the longest existing prefix
		rest := ""
		for {
			if r, err := filepath.EvalSymlinks(a); err == nil {
				return filepath.Join(r, rest)
			}
			parent := filepath.Dir(a)
			if parent == a {
				return filepath.Join(a, rest)
			}
			rest = filepath.Join(filepath.Base(a), rest)
			a = parent
		}
	}
	p, d := resolve(path), resolve(dir)
	rel, err := filepath.Rel(d, p)
	return err == nil && rel != ".." && !strings.HasPrefix(rel, ".."+string(filepath.Separator))
}

func run(jobs []*job, outDir string, single bool, opt StudyOptions) (*StudyReport, error) {
	pol := opt.Policy
	if pol == nil {
		pol = Default()
	}
	ps := NewPseudonymizer(opt.Key)
	rep := &StudyReport{Policy: pol.Name, PolicySHA256: pol.SHA256(), KeyFingerprint: opt.Key.Fingerprint(),
		DryRun: opt.DryRun, Caution: Caution, Files: make([]FileOutcome, len(jobs))}
	if opt.Shard.N > 1 {
		rep.Shard = opt.Shard.String()
		rep.Notes = append(rep.Notes, "this run covers one shard: collisions and k-anonymity are judged within the shard only; run the report without --shard for the whole study")
	}
	if err := checkLinkage(opt.Linkage, outDir); err != nil {
		return nil, err
	}
	if opt.DryRun {
		rep.Plan = pol.Plan()
	} else if err := os.MkdirAll(outDir, 0o755); err != nil {
		return nil, err
	}
	checkSources(jobs, opt)
	// Pre-pass: ids, pseudonyms, collisions and output names, before any write.
	subjects, sessions := NewRegistry(), NewRegistry()
	for _, j := range jobs {
		if j.preError != nil {
			continue
		}
		view, err := recfile.MetadataView(j.in)
		if err != nil {
			j.preError = err
			continue
		}
		j.subj = strings.TrimSpace(viewString(view, "subject", "id"))
		j.sess = strings.TrimSpace(viewString(view, "session", "id"))
		if j.subj == "" {
			j.preError = fmt.Errorf("subject.id is empty: give every recording its subject code before de-identifying (the code keys the pseudonym and the date shift)")
			continue
		}
		if err := subjects.Add(ps.Subject(j.subj), j.subj); err != nil {
			j.preError = err
		}
		if j.sess != "" {
			if err := sessions.Add(ps.Session(j.subj, j.sess), j.subj+"\x00"+j.sess); err != nil {
				j.preError = err
			}
		}
	}
	rep.Collisions = append(subjects.Collisions(), sessions.Collisions()...)
	bad := map[string]bool{}
	for _, c := range rep.Collisions {
		bad[c] = true
	}
	names := map[string]int{}
	for _, j := range jobs {
		if j.preError == nil && (bad[ps.Subject(j.subj)] || j.sess != "" && bad[ps.Session(j.subj, j.sess)]) {
			j.preError = fmt.Errorf("pseudonym collision: make a new key for this study")
		}
		if single || j.preError != nil {
			continue
		}
		base := ps.Subject(j.subj) + "_"
		if j.sess != "" {
			base += ps.Session(j.subj, j.sess)
		} else {
			base += short("R-", ps.digest("file", j.subj, j.rel))
		}
		names[base]++
		if n := names[base]; n > 1 {
			base = fmt.Sprintf("%s_%d", base, n)
		}
		j.out = base + ".h5"
	}
	done := 0
	var mu sync.Mutex
	errs := batch.Run(len(jobs), opt.Workers, func(i int) error {
		fo, err := doFile(jobs[i], outDir, pol, ps, opt)
		fo.Input = jobs[i].rel
		if err != nil {
			fo.Error, fo.err = err.Error(), err
			var oe *OutputError
			if errors.As(err, &oe) {
				fo.Findings = oe.Findings
			}
		}
		rep.Files[i] = fo
		return err
	}, func(i int, err error) {
		mu.Lock()
		done++
		d := done
		mu.Unlock()
		if opt.Progress != nil {
			opt.Progress(d, len(jobs))
		}
	})
	seen := map[string]bool{}
	var quasi []SubjectQuasi
	var links []linkRow
	for i, err := range errs {
		fo := &rep.Files[i]
		if err != nil {
			rep.Failed++
			continue
		}
		if !opt.DryRun {
			rep.Written++
		}
		if !seen[fo.pseud] {
			seen[fo.pseud] = true
			quasi = append(quasi, SubjectQuasi{fo.pseud, fo.quasi})
		}
		links = append(links, linkRow{jobs[i].subj, fo.pseud, jobs[i].sess, fo.Session, fo.Output})
	}
	if len(quasi) > 0 {
		k := opt.K
		if k == 0 {
			k = pol.K
		}
		rep.KAnonymity = KAnonymity(quasi, k)
	}
	if opt.Linkage != "" && !opt.DryRun && len(links) > 0 {
		if err := writeLinkage(opt.Linkage, links); err != nil {
			return rep, err
		}
		rep.Linkage = opt.Linkage
	}
	return rep, nil
}

// NoSpace returns the first failure that was a full disk (an
// *atomicfile.NoSpaceError naming the output), or nil.
func (r *StudyReport) NoSpace() error {
	for _, f := range r.Files {
		var ns *atomicfile.NoSpaceError
		if errors.As(f.err, &ns) {
			return ns
		}
	}
	return nil
}

func viewString(view map[string]any, group, key string) string {
	g, _ := view[group].(map[string]any)
	s, _ := g[key].(string)
	return s
}

// checkSources validates every input (validate.Validator, with the chunk
// scan) before anything reads it here: an input that cannot be read (a
// crash of the HDF5 library included, when the program isolates
// validation) or that fails an integrity check is refused, unless
// AcceptDamaged, which records the damage instead.
func checkSources(jobs []*job, opt StudyOptions) {
	vopt := validate.DefaultOptions()
	vopt.ChecksumScan = true
	batch.Run(len(jobs), opt.Workers, func(i int) error {
		j := jobs[i]
		if j.preError != nil {
			return nil
		}
		rep := validate.Validator(j.in, vopt)
		if rep.ReadError != "" {
			j.preError = fmt.Errorf("could not read: %s", rep.ReadError)
			return nil
		}
		damage := rep.Damage()
		if len(damage) == 0 {
			return nil
		}
		if !opt.AcceptDamaged {
			j.preError = fmt.Errorf("refused: the source fails its integrity checks: %s. Restore it from a copy; or give --accept-damaged to de-identify it as read (recorded in the output's history)",
				rep.DamageText(5))
			return nil
		}
		j.damage = map[string]int{}
		for _, f := range damage {
			j.damage[f.Check]++
		}
		return nil
	}, nil)
}

func damageCounts(m map[string]int) string {
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for i, k := range keys {
		keys[i] = fmt.Sprintf("%s x%d", k, m[k])
	}
	return strings.Join(keys, ", ")
}

// doFile de-identifies one input.
func doFile(j *job, outDir string, pol *Policy, ps *Pseudonymizer, opt StudyOptions) (FileOutcome, error) {
	fo := FileOutcome{Output: j.out}
	if j.preError != nil {
		return fo, j.preError
	}
	f, err := recfile.Open(j.in)
	if err != nil {
		return fo, err
	}
	defer f.Close()
	rec := f.Recording()
	res, err := Apply(rec, Options{Policy: pol, Pseudonymizer: ps, InputPath: j.in, Now: opt.Now, AcceptedDamage: j.damage})
	if err != nil {
		return fo, err
	}
	fo.Subject, fo.Session = res.Subject, res.Session
	fo.Fields, fo.Unlisted, fo.Scrubbed, fo.Notes = res.Fields, res.Unlisted, res.Scrubbed, res.Notes
	fo.quasi, fo.pseud = res.Quasi, ps.Subject(j.subj)
	if len(j.damage) > 0 {
		fo.Notes = append(fo.Notes, fmt.Sprintf("the source fails its integrity checks (%s); de-identified as read because damage was accepted, and recorded in the output's history", damageCounts(j.damage)))
	}
	final := filepath.Join(outDir, j.out)
	if err := atomicfile.CheckTarget(final, opt.Overwrite); err != nil {
		return fo, err // a dry run says so too
	}
	if pol.SHA256() == Default().SHA256() {
		if still := IdentifyingFields(res.Recording); len(still) > 0 {
			return fo, fmt.Errorf("the output would still hold identifying fields %s; it was not written", strings.Join(still, ", "))
		}
	}
	if opt.DryRun {
		return fo, nil
	}
	t, err := atomicfile.Create(final, opt.Overwrite)
	if err != nil {
		return fo, err
	}
	// Hash the input's samples as the writer streams them (it reads each
	// array once, in order), so the input need not be read twice. The
	// output stays mode 0600 under its temporary name until it has passed
	// the scan.
	hashed := wrapSamples(res.Recording)
	if err := recfile.WriteInto(t.Path, res.Recording, recfile.WriteOptions{Overwrite: true}); err != nil {
		return fo, t.Abandon(fmt.Errorf("%s: %w", final, err))
	}
	known := map[string]string{}
	for path, hs := range hashed {
		hs.rec.Samples = hs.src // unwrap
		if d, ok := hs.sum(); ok {
			known[path] = d
		}
	}
	scan, n, err := verifyOutput(t.Path, res, pol, known)
	fo.Scan, fo.DataChecked = scan, n
	if err != nil {
		return fo, t.Abandon(err)
	}
	return fo, t.Publish()
}

// verifyOutput scans a written output for the original identifying values
// (raw bytes and decoded metadata), asks IdentifyingFields about it under the
// default policy, and compares every dataset's values with the input's.
func verifyOutput(path string, res *Result, pol *Policy, known map[string]string) (*ScanSummary, int, error) {
	needles := res.Needles()
	sum := &ScanSummary{Values: len(needles), Unscannable: res.Unscannable, Leaks: []string{}}
	if fi, err := os.Stat(path); err == nil {
		sum.Bytes = fi.Size()
	}
	leaks, err := ScanBytes(path, needles)
	if err != nil {
		return sum, 0, err
	}
	for _, l := range leaks {
		sum.Leaks = append(sum.Leaks, l.String())
	}
	view, err := recfile.MetadataView(path)
	if err != nil {
		return sum, 0, fmt.Errorf("reading the output back: %w", err)
	}
	for _, h := range scanText(viewText(view), needles) {
		sum.Leaks = append(sum.Leaks, maskValue(h)+" found in the decoded metadata")
	}
	f, err := recfile.Open(path)
	if err != nil {
		return sum, 0, fmt.Errorf("reading the output back: %w", err)
	}
	defer f.Close()
	out := f.Recording()
	sum.Findings = checkStrings(out, needles)
	sum.StillIdentifying = IdentifyingFields(out)
	if len(sum.Leaks) > 0 || len(sum.Findings) > 0 {
		return sum, 0, &OutputError{Findings: sum.Findings, Leaks: sum.Leaks}
	}
	if pol.SHA256() == Default().SHA256() && len(sum.StillIdentifying) > 0 {
		return sum, 0, fmt.Errorf("the output still holds identifying fields %s; it was not written", strings.Join(sum.StillIdentifying, ", "))
	}
	want, err := dataDigests(res.Recording, known)
	if err != nil {
		return sum, 0, fmt.Errorf("checksums of the input's data: %w", err)
	}
	got, err := DataDigests(out)
	if err != nil {
		return sum, 0, fmt.Errorf("checksums of the output's data: %w", err)
	}
	var diff []string
	for k, v := range want {
		if got[k] != v {
			diff = append(diff, k)
		}
	}
	for k := range got {
		if _, ok := want[k]; !ok {
			diff = append(diff, k+" (not in the input)")
		}
	}
	if len(diff) > 0 {
		sort.Strings(diff)
		return sum, 0, fmt.Errorf("data changed in writing: %s; the output was not written", strings.Join(diff, ", "))
	}
	return sum, len(want), nil
}

// DataDigests returns the SHA-256 (hex) of the values of every data block of
// a recording, keyed by metadata-view path: force and force_target values,
// EMG samples (in their stored width), discharges per unit, the unit
// figures, extra unit columns and MUAP templates. Values are hashed as their
// IEEE 754 bits, little-endian, so two recordings agree only when every
// value is bit-identical (NaN payloads included). Samples are read in blocks.
func DataDigests(rec *record.Recording) (map[string]string, error) {
	return dataDigests(rec, nil)
}

// dataDigests is DataDigests taking the digests in known as given.
func dataDigests(rec *record.Recording, known map[string]string) (map[string]string, error) {
	out := map[string]string{}
	put := func(k string, h hash.Hash) { out[k] = hex.EncodeToString(h.Sum(nil)) }
	f64 := func(h hash.Hash, v ...float64) {
		var b [8]byte
		for _, x := range v {
			binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
			h.Write(b[:])
		}
	}
	i64 := func(h hash.Hash, v ...int64) {
		var b [8]byte
		for _, x := range v {
			binary.LittleEndian.PutUint64(b[:], uint64(x))
			h.Write(b[:])
		}
	}
	for ti, t := range rec.Trials {
		p := fmt.Sprintf("trials[%d]", ti)
		for name, s := range map[string]record.Signal{"force": t.Force, "force_target": t.ForceTarget} {
			if s.Present() {
				h := sha256.New()
				f64(h, s.Values...)
				put(p+"."+name, h)
			}
		}
		for ai, a := range t.Arrays {
			q := fmt.Sprintf("%s.arrays[%d]", p, ai)
			if d, ok := known[q+".samples"]; ok && a.Samples != nil {
				out[q+".samples"] = d
			} else if a.Samples != nil {
				h := sha256.New()
				if err := hashSamples(h, a); err != nil {
					return nil, fmt.Errorf("%s.samples: %w", q, err)
				}
				put(q+".samples", h)
			}
			for di, d := range a.Decompositions {
				dp := fmt.Sprintf("%s.decompositions[%d]", q, di)
				hd, hu := sha256.New(), sha256.New()
				for _, u := range d.Units {
					i64(hd, u.ID, int64(len(u.Discharges)))
					i64(hd, u.Discharges...)
					i64(hu, u.ID)
					f64(hu, u.Silhouette, u.PNRdB, u.AccuracyPct, u.ISICoV, u.RecruitPctMVC, u.DerecruitPctMVC, u.InitialRatePPS, u.MeanRatePPS)
				}
				put(dp+".discharges", hd)
				put(dp+".units", hu)
				for _, c := range d.ExtraColumns {
					h := sha256.New()
					f64(h, c.Values...)
					for _, s := range c.Text {
						i64(h, int64(len(s)))
						h.Write([]byte(s))
					}
					put(dp+".units[].extra."+c.Name, h)
				}
				if d.MUAPs != nil {
					h := sha256.New()
					i64(h, int64(d.MUAPs.Units), int64(d.MUAPs.Channels), int64(d.MUAPs.Lags), int64(d.MUAPs.FirstLag))
					var b [4]byte
					for _, x := range d.MUAPs.Data {
						binary.LittleEndian.PutUint32(b[:], math.Float32bits(x))
						h.Write(b[:])
					}
					put(dp+".muaps", h)
				}
			}
		}
	}
	return out, nil
}

// hashSamples hashes an array's samples block by block in their stored width.
func hashSamples(h hash.Hash, a record.Array) error {
	rows, ch := a.Samples.Shape()
	if ch <= 0 {
		return nil
	}
	block := max(1, (1<<20)/ch)
	var b [8]byte
	if a.SampleType == record.Float64 {
		buf := make([]float64, block*ch)
		for r := 0; r < rows; r += block {
			n := min(block, rows-r)
			if err := a.Samples.ReadFloat64(r, buf[:n*ch]); err != nil {
				return err
			}
			for _, x := range buf[:n*ch] {
				binary.LittleEndian.PutUint64(b[:], math.Float64bits(x))
				h.Write(b[:])
			}
		}
		return nil
	}
	buf := make([]float32, block*ch)
	for r := 0; r < rows; r += block {
		n := min(block, rows-r)
		if err := a.Samples.ReadFloat32(r, buf[:n*ch]); err != nil {
			return err
		}
		for _, x := range buf[:n*ch] {
			binary.LittleEndian.PutUint32(b[:4], math.Float32bits(x))
			h.Write(b[:4])
		}
	}
	return nil
}

// hashingSource hashes the values a sequential reader takes from src, as
// hashSamples would. A read out of order spoils the sum (ok false).
type hashingSource struct {
	src  record.SampleSource
	rec  *record.Array
	h    hash.Hash
	next int
	bad  bool
	b    [8]byte
}

func (s *hashingSource) Shape() (int, int) { return s.src.Shape() }

func (s *hashingSource) ReadFloat32(start int, dst []float32) error {
	if err := s.src.ReadFloat32(start, dst); err != nil {
		return err
	}
	_, ch := s.src.Shape()
	if start != s.next || s.rec.SampleType == record.Float64 || ch == 0 {
		s.bad = true
		return nil
	}
	for _, x := range dst {
		binary.LittleEndian.PutUint32(s.b[:4], math.Float32bits(x))
		s.h.Write(s.b[:4])
	}
	s.next += len(dst) / ch
	return nil
}

func (s *hashingSource) ReadFloat64(start int, dst []float64) error {
	if err := s.src.ReadFloat64(start, dst); err != nil {
		return err
	}
	_, ch := s.src.Shape()
	if start != s.next || s.rec.SampleType != record.Float64 || ch == 0 {
		s.bad = true
		return nil
	}
	for _, x := range dst {
		binary.LittleEndian.PutUint64(s.b[:], math.Float64bits(x))
		s.h.Write(s.b[:])
	}
	s.next += len(dst) / ch
	return nil
}

// sum returns the digest when every row was read once, in order.
func (s *hashingSource) sum() (string, bool) {
	rows, ch := s.src.Shape()
	if s.bad || s.next != rows || ch == 0 {
		return "", false
	}
	return hex.EncodeToString(s.h.Sum(nil)), true
}

// wrapSamples puts a hashingSource in front of every array's samples.
func wrapSamples(rec *record.Recording) map[string]*hashingSource {
	out := map[string]*hashingSource{}
	for ti := range rec.Trials {
		for ai := range rec.Trials[ti].Arrays {
			a := &rec.Trials[ti].Arrays[ai]
			if a.Samples == nil {
				continue
			}
			hs := &hashingSource{src: a.Samples, rec: a, h: sha256.New()}
			a.Samples = hs
			out[fmt.Sprintf("trials[%d].arrays[%d].samples", ti, ai)] = hs
		}
	}
	return out
}

type linkRow struct{ subj, subjP, sess, sessP, out string }

// writeLinkage writes the private linkage file (JSON: a warning and one
// entry per output), mode 0600, never overwriting.
func writeLinkage(path string, rows []linkRow) error {
	type link struct {
		SubjectID        string `json:"subject_id"`
		SubjectPseudonym string `json:"subject_pseudonym"`
		SessionID        string `json:"session_id,omitempty"`
		SessionPseudonym string `json:"session_pseudonym,omitempty"`
		Output           string `json:"output"`
	}
	doc := struct {
		Warning string `json:"warning"`
		Links   []link `json:"links"`
	}{Warning: "PRIVATE: this file links pseudonyms back to people. Keep it apart from the shared data, under the same protection as the originals."}
	for _, r := range rows {
		doc.Links = append(doc.Links, link{r.subj, r.subjP, r.sess, r.sessP, r.out})
	}
	b, _ := json.MarshalIndent(doc, "", "  ")
	if err := writeNew0600(path, append(b, '\n')); err != nil {
		if errors.Is(err, atomicfile.ErrExists) {
			return err
		}
		return fmt.Errorf("linkage file: %w", err)
	}
	return nil
}
