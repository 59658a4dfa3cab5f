package deid

import (
	"errors"
	"fmt"
	"io/fs"
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

	// decodeSamples makes the writer decode and encode every array's
	// samples (tests compare both paths).
	decodeSamples bool
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
	// InStudy counts words of the session's site, operator and other free
	// text not searched because the study's own kept metadata holds them.
	InStudy int `json:"words_also_in_study_metadata,omitempty"`
	// Scan is the leak scan of the written output.
	Scan *ScanSummary `json:"scan,omitempty"`
	// DataChecked is the number of datasets whose values were compared with
	// the input's by SHA-256 and found identical.
	DataChecked int `json:"datasets_bit_exact,omitempty"`
	// RawCopied is the number of sample datasets copied chunk by chunk,
	// their stored bytes unchanged (recfile.CopiesSamplesRaw); their check
	// compares their stored chunks with the input's, byte for byte, which
	// fixes the values.
	RawCopied int `json:"sample_datasets_copied_raw,omitempty"`
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

// job is one input file of a run.
type job struct {
	in, rel  string
	subj     string // original subject id
	sess     string
	out      string // output name
	preError error
	damage   map[string]int // integrity findings accepted, by check id
	// fullCheck is set once the source was validated with every chunk
	// read (checkSource); before, its samples' chunks are the write's to
	// check.
	fullCheck bool
	single    bool         // DeidentifyFile: out was given, not made from pseudonyms
	unread    []string     // parts of the source the layout does not name (left out)
	people    *studyPeople // the run's subjects, for the other-subject check
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
	j := &job{in: inPath, rel: filepath.Base(inPath), out: filepath.Base(outPath), single: true}
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
	} else {
		atomicfile.CleanDir(outDir) // what killed runs left
	}
	checkSources(jobs, opt)
	// Pre-pass: ids, pseudonyms, collisions and output names, before any write.
	subjects, sessions := NewRegistry(), NewRegistry()
	people := newStudyPeople()
	for _, j := range jobs {
		j.people = people
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
		people.add(j.subj, viewString(view, "subject", "name"), viewString(view, "subject", "email"))
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
		rep.KAnonymity = KAnonymity(quasi, k, pol.Format())
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
// AcceptDamaged, which records the damage instead. The EMG samples' chunk
// bytes are left to the write, which reads every chunk with its
// Fletcher-32 check (validate.Options.SamplesReadByCaller): one read of
// the samples, not two. Their chunk index is checked here. A dry run,
// which writes nothing, checks every chunk here.
func checkSources(jobs []*job, opt StudyOptions) {
	batch.Run(len(jobs), opt.Workers, func(i int) error {
		if jobs[i].preError == nil {
			checkSource(jobs[i], opt, opt.DryRun)
		}
		return nil
	}, nil)
}

// checkSource validates one input as checkSources does; full reads every
// chunk here too. A check that leaves the samples to the write and finds
// damage is repeated in full, so the damage reported is always the whole
// check's, as it is when the write finds a damaged chunk (doFile).
func checkSource(j *job, opt StudyOptions, full bool) {
	vopt := validate.DefaultOptions()
	vopt.ChecksumScan = true
	vopt.SamplesReadByCaller = !full
	j.fullCheck = full
	rep := validate.Validator(j.in, vopt)
	if !full && (rep.ReadError != "" || len(rep.Damage()) > 0) {
		checkSource(j, opt, true)
		return
	}
	j.unread, j.damage = nil, nil
	if rep.ReadError != "" {
		j.preError = fmt.Errorf("could not read: %s", rep.ReadError)
		return
	}
	for _, f := range rep.Findings {
		if f.Check == "structure.unexpected" {
			j.unread = append(j.unread, f.HDF5Path)
		}
	}
	damage := rep.Damage()
	if len(damage) == 0 {
		return
	}
	if !opt.AcceptDamaged {
		j.preError = fmt.Errorf("refused: the source fails its integrity checks: %s. Restore it from a copy; or give --accept-damaged to de-identify it as read (recorded in the output's history)",
			rep.DamageText(5))
		return
	}
	j.damage = map[string]int{}
	for _, f := range damage {
		j.damage[f.Check]++
	}
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
