package convert

import (
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"
	"sync"

	"muarc/internal/atomicfile"
	"muarc/internal/batch"
	"muarc/recfile"
	"muarc/record"
)

// Finding the recordings of a study folder and importing them all, each
// into its own file.

// StudyRecording is one recording folder of a study with its inputs.
type StudyRecording struct {
	// Name is the folder's path relative to the study folder; the output
	// file is <Name>.h5 with '/' turned into '_'.
	Name   string
	Inputs Inputs
}

// FindRecordings lists the recording folders under dir that the profile
// describes, with each one's files matched to roles. A folder is a
// recording when it holds the profile's metadata file (or matches
// Profile.Recordings).
func FindRecordings(dir string, prof *Profile) ([]StudyRecording, error) {
	if prof == nil {
		prof = DefaultProfile()
	}
	var folders []string
	if prof.Recordings != "" {
		m, err := filepath.Glob(filepath.Join(dir, prof.Recordings))
		if err != nil {
			return nil, err
		}
		for _, f := range m {
			if st, err := os.Stat(f); err == nil && st.IsDir() {
				folders = append(folders, f)
			}
		}
	} else {
		err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
			if err != nil {
				return err
			}
			if d.IsDir() {
				return nil
			}
			// A recording folder holds the metadata sidecar or the lab's
			// own metadata file.
			for _, mf := range []string{prof.Files.Metadata, prof.LabMetadata.File} {
				if mf == "" || filepath.ToSlash(d.Name()) != filepath.Base(mf) {
					continue
				}
				root := filepath.Dir(p)
				if strings.Contains(mf, "/") {
					root = filepath.Clean(strings.TrimSuffix(p, filepath.FromSlash(mf)))
				}
				if len(folders) == 0 || folders[len(folders)-1] != root {
					folders = append(folders, root)
				}
			}
			return nil
		})
		if err != nil {
			return nil, err
		}
	}
	sort.Strings(folders)
	folders = slices.Compact(folders)
	var out []StudyRecording
	for _, f := range folders {
		r, err := MatchRecording(f, prof)
		if err != nil {
			return nil, err
		}
		name, _ := filepath.Rel(dir, f)
		out = append(out, StudyRecording{Name: filepath.ToSlash(name), Inputs: r})
	}
	return out, nil
}

// MatchRecording matches the files of one recording folder to roles by the
// profile's templates.
func MatchRecording(dir string, prof *Profile) (Inputs, error) {
	in := Inputs{Dir: dir, Profile: prof}
	var rels []string
	err := filepath.WalkDir(dir, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		if !d.IsDir() {
			r, _ := filepath.Rel(dir, p)
			rels = append(rels, filepath.ToSlash(r))
		}
		return nil
	})
	if err != nil {
		return in, err
	}
	sort.Strings(rels)
	reF, _ := compileTemplate(prof.Files.Force, nil)
	reE, _ := compileTemplate(prof.Files.EMG, nil)
	reD0, _ := compileTemplate(prof.Files.Discharges, nil)
	reU0, _ := compileTemplate(prof.Files.Units, nil)
	reM0, _ := compileTemplate(prof.Files.MUAPs, nil)
	reDU0, _ := compileTemplate(prof.Files.DerivedUnits, nil)
	reDM0, _ := compileTemplate(prof.Files.DerivedMUAPs, nil)
	var arrays, rest []string
	for _, r := range rels {
		p := filepath.Join(dir, filepath.FromSlash(r))
		switch {
		case r == prof.Files.Metadata:
			in.Meta = p
		case prof.LabMetadata.File != "" && r == prof.LabMetadata.File:
			in.LabMeta = p
		case r == prof.Files.History:
			in.History = p
		case matches(reF, r):
			in.Force = append(in.Force, p)
		case matches(reD0, r), matches(reU0, r), matches(reM0, r), matches(reDU0, r), matches(reDM0, r):
			rest = append(rest, r) // named once the arrays are known
		case matches(reE, r):
			in.EMG = append(in.EMG, p)
			m, _ := matchTemplate(reE, r)
			arrays = append(arrays, m["array"])
		default:
			in.Unmatched = append(in.Unmatched, r)
		}
	}
	reD, _ := compileTemplate(prof.Files.Discharges, arrays)
	reU, _ := compileTemplate(prof.Files.Units, arrays)
	reM, _ := compileTemplate(prof.Files.MUAPs, arrays)
	reDU, _ := compileTemplate(prof.Files.DerivedUnits, arrays)
	reDM, _ := compileTemplate(prof.Files.DerivedMUAPs, arrays)
	for _, r := range rest {
		p := filepath.Join(dir, filepath.FromSlash(r))
		switch {
		case matches(reD, r):
			in.Discharges = append(in.Discharges, p)
		case matches(reU, r):
			in.Units = append(in.Units, p)
		case matches(reM, r):
			in.MUAPs = append(in.MUAPs, p)
		case matches(reDU, r):
			in.DerivedUnits = append(in.DerivedUnits, p)
		case matches(reDM, r):
			in.DerivedMUAPs = append(in.DerivedMUAPs, p)
		default:
			in.Unmatched = append(in.Unmatched, r)
		}
	}
	if len(in.EMG) == 0 && len(in.Force) == 0 {
		return in, &ParseError{File: dir, Msg: "no force or EMG files match the profile", Hint: fmt.Sprintf("the profile expects %s and %s", prof.Files.Force, prof.Files.EMG)}
	}
	return in, nil
}

// StudyOptions control ImportStudy.
type StudyOptions struct {
	// Profile is the mapping profile; nil = DefaultProfile.
	Profile *Profile
	// DType forces the EMG sample type ("" = decide by the digits written).
	DType record.SampleType
	// Shard selects part of the recordings (batch.All = every one).
	Shard batch.Shard
	// Workers is the number of recordings imported at once (0 = one per
	// core).
	Workers   int
	Overwrite bool
	// SubjectsFile is the study's subjects table (--subjects); "" = the
	// profile's lab_metadata.subjects, relative to the study folder.
	SubjectsFile string
	// Progress is called after each recording with the count done and the
	// total (for a progress bar); may be nil.
	Progress func(done, total int)
}

// StudyResult is one recording's outcome in a study import.
type StudyResult struct {
	Recording string  `json:"recording"`
	Output    string  `json:"output,omitempty"`
	Report    *Report `json:"report,omitempty"`
	Error     string  `json:"error,omitempty"`
	// Err is the error itself (for errors.As: a full disk stops the run).
	Err error `json:"-"`
}

// OutputName is the file a study recording is written to inside the output
// folder: its folder's path under the study with '/' turned into '_', plus
// ".h5". When the study folder is itself the recording (an export folder),
// the file is named after that folder, never a hidden "..h5".
func OutputName(studyDir, recording string) string {
	name := strings.ReplaceAll(filepath.ToSlash(recording), "/", "_")
	if recording == "." || recording == "" {
		abs, err := filepath.Abs(studyDir)
		if err != nil {
			abs = studyDir
		}
		name = filepath.Base(abs)
	}
	name = strings.TrimLeft(name, ".")
	if name == "" || name == string(filepath.Separator) {
		name = "recording"
	}
	return name + ".h5"
}

// isRecordingName reports whether an output path is named like a recording
// file (.h5 or .hdf5, any case).
func isRecordingName(p string) bool {
	ext := strings.ToLower(filepath.Ext(p))
	return ext == ".h5" || ext == ".hdf5"
}

// ImportStudy imports every recording the profile finds under src into
// outDir (created when missing), in parallel, and returns each one's result
// (when src is itself one recording, an export folder, and outDir is named
// like a recording file, that file is written instead)
// in the order found. A recording that fails is reported in its result; the
// others are still imported. The error is for the study as a whole (no
// recordings found, unreadable folders).
func ImportStudy(src, outDir string, opt StudyOptions) ([]StudyResult, error) {
	if st, err := os.Stat(src); err != nil || !st.IsDir() {
		return nil, fmt.Errorf("%s: not a folder", src)
	}
	if opt.Profile == nil {
		opt.Profile = DefaultProfile()
	}
	recs, err := FindRecordings(src, opt.Profile)
	if err != nil {
		return nil, err
	}
	if len(recs) == 0 {
		what := opt.Profile.Files.Metadata
		if lf := opt.Profile.LabMetadata.File; lf != "" {
			what += " or " + lf
		}
		return nil, fmt.Errorf("%s: no recording folders found (each needs its metadata file %s; see the profile)", src, what)
	}
	var subjects *SubjectTable
	if sf := opt.SubjectsFile; sf != "" || opt.Profile.LabMetadata.Subjects != "" {
		if sf == "" {
			sf = opt.Profile.LabMetadata.Subjects
			if !filepath.IsAbs(sf) {
				sf = filepath.Join(src, sf)
			}
		}
		if subjects, err = ReadSubjectTable(sf, opt.Profile); err != nil {
			return nil, err
		}
	}
	byName := map[string]StudyRecording{}
	var names []string
	for _, r := range recs {
		byName[r.Name] = r
		names = append(names, r.Name)
	}
	if opt.Shard == (batch.Shard{}) {
		opt.Shard = batch.All
	}
	names = opt.Shard.Select(names)
	// An output named like a recording file (OUT.h5) is that file when the
	// folder is one recording (an export folder); for a study it would
	// become a folder with a file's name, so it is refused.
	single := ""
	if isRecordingName(outDir) {
		if len(recs) != 1 || recs[0].Name != "." {
			return nil, fmt.Errorf("%s: looks like a file name, but %s holds %d recordings, each written as a file of its own: give a folder for the output", outDir, src, len(recs))
		}
		single = outDir
		outDir = filepath.Dir(outDir)
	}
	if err := os.MkdirAll(outDir, 0o755); err != nil {
		return nil, err
	}
	atomicfile.CleanDir(outDir) // what killed runs left
	res := make([]StudyResult, len(names))
	var mu sync.Mutex
	finished := 0
	batch.Run(len(names), opt.Workers, func(i int) error {
		r := byName[names[i]]
		r.Inputs.DType = opt.DType
		r.Inputs.subjects = subjects
		if r.Inputs.SubjectFolder = strings.SplitN(r.Name, "/", 2)[0]; r.Name == "." {
			r.Inputs.SubjectFolder = ""
		}
		out := filepath.Join(outDir, OutputName(src, r.Name))
		if single != "" {
			out = single
		}
		res[i] = StudyResult{Recording: r.Name}
		rep, err := ImportRecording(r.Inputs, out, recfile.WriteOptions{Overwrite: opt.Overwrite})
		res[i].Report = rep
		if err != nil {
			res[i].Error, res[i].Err = err.Error(), err
			return err
		}
		res[i].Output = out
		return nil
	}, func(int, error) {
		if opt.Progress != nil {
			mu.Lock()
			finished++
			opt.Progress(finished, len(names))
			mu.Unlock()
		}
	})
	return res, nil
}
