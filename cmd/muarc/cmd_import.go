package main

import (
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"strings"

	"github.com/spf13/cobra"

	"muarc/convert"
	"muarc/internal/atomicfile"
	"muarc/internal/batch"
	"muarc/recfile"
	"muarc/record"
)

type importFlags struct {
	meta, profile, out, dtype, shard, shardReport string
	labMeta, subjects                             string
	force, emg, dis, units, read                  []string
	overwrite, json, allowGaps, allowRange        bool
	rate                                          float64
	workers                                       int
	// Reading overrides (take precedence over the profile).
	delimiter, decimalComma, header, timeColumn, timeUnit string
	shape, timeBase, labels                               string
	disDelimiter, disDecimalComma, disHeader              string
	firstIndex                                            int
	tolerance                                             float64
}

func init() {
	var fl importFlags
	cmd := &cobra.Command{
		Use:   "import [SOURCE_DIR]",
		Short: "Import plain-text exports (signals, discharges, unit tables, metadata) into muarc files",
		Long: `Import one recording from its plain-text files:

  muarc import --meta M --force F --emg E [--emg E2 ...] --discharges D --units U [--profile P] -o OUT.h5

or a whole study, one recording per folder, in parallel:

  muarc import --profile P SOURCE_DIR -o OUT_DIR

Start the metadata sidecar from "muarc schema --example > metadata.json", or keep
the lab's own metadata files (one per recording, "key: value" lines or a one-row
table, and one subjects table for the study) and map their names and words in
the profile's lab_metadata section (convert/PROFILES.md, "A lab's own metadata").

Delimiters, headers, units, time columns and decimal commas are detected only
where one reading fits. A discharge file (one line per unit, "MU1: t1 t2 ...",
one column per unit, a unit,time table or a 0/1 matrix) is read the way that
fits. Where two readings would store different values (labels or times, s,
ms or samples, 0- or 1-based, a time column or a channel, ...) nothing is
written and the message names the readings and the flags that pick each
(--shape, --labels, --time-base, --first-index, --discharge-*, and
--read ROLE.MEMBER=VALUE for one file role, e.g. --read emg.rate_hz=2048).
Unit labels are kept as written. The report names every file read, what was
found and what was not stored. An export folder (muarc export FILE -o D)
imports back as OUT_DIR/D.h5 (or as OUT.h5 when -o names a .h5 file), its
derived_units_* and derived_muaps_* tables into
each decomposition's derived/ group (never into the lab's unit table). EMG samples
whose every cell is a plain decimal with the same number of decimals are integer
counts in disguise: they are stored as counts (int8/int16/int32) with
scale_factor and add_offset, exactly, and export writes every cell back as it
was. Otherwise they are stored as float32 when every value reads back at the
digits written, else float64 (--dtype forces a float type and the report gives
the largest error that causes). Nothing is written when an input is bad; inputs
are never changed. A profile (YAML or JSON, see convert/PROFILES.md) says which
file is which and how to read it.

An EDF, EDF+, BDF or BDF+ file given as --emg holds one trial: its signals go
to arrays and force (profile section edf), annotations written "discharge
ARRAY/DECOMPOSITION unit LABEL" become discharges (labels as written), all
other annotations are kept as text; a file muarc exported gives back its
trial name and units (convert/PROFILES.md, "EDF and BDF files").`,
		Args: cobra.MaximumNArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runImport(cmd.OutOrStdout(), fl, args)
		},
	}
	f := cmd.Flags()
	f.StringVar(&fl.meta, "meta", "", "metadata sidecar (JSON or YAML)")
	f.StringVar(&fl.labMeta, "lab-meta", "", "the lab's own metadata file of the recording, mapped by the profile's lab_metadata section")
	f.StringVar(&fl.subjects, "subjects", "", "the study's subjects table (CSV/TSV, one row per subject), mapped by the profile's lab_metadata section")
	f.StringArrayVar(&fl.force, "force", nil, "force file (one per trial; repeat)")
	f.StringArrayVar(&fl.emg, "emg", nil, "EMG file (one per array and trial; repeat)")
	f.StringArrayVar(&fl.dis, "discharges", nil, "discharge file (repeat)")
	f.StringArrayVar(&fl.units, "units", nil, "unit table (repeat)")
	f.StringVar(&fl.profile, "profile", "", "mapping profile (YAML or JSON); default: the built-in one")
	f.StringVarP(&fl.out, "output", "o", "", "output file (one recording) or folder (a study)")
	f.BoolVar(&fl.overwrite, "overwrite", false, "replace existing output files")
	f.BoolVar(&fl.json, "json", false, "print the import report as JSON")
	f.StringVar(&fl.dtype, "dtype", "", "force a float EMG sample type: float32 or float64 (never integer counts)")
	f.Float64Var(&fl.rate, "rate", 0, "sampling rate in Hz for signal files without a time column")
	f.BoolVar(&fl.allowGaps, "allow-gaps", false, "accept gaps in time columns (missing samples become NaN)")
	f.BoolVar(&fl.allowRange, "allow-out-of-range", false, "store inf/-Infinity cells and numbers beyond float64 as ±Inf, and non-zero numbers below it as 0 (default: refuse them)")
	f.StringVar(&fl.shard, "shard", "", "study form: import only part i of n (i/n)")
	f.StringVar(&fl.shardReport, "shard-report", "", "study form: also write this run's shard report (muarc-shard-report JSON) to `FILE`, for muarc merge-reports")
	f.IntVar(&fl.workers, "workers", 0, "study form: recordings imported at once (0 = one per core)")
	f.StringArrayVar(&fl.read, "read", nil, "a reading option for one file role, ROLE.MEMBER=VALUE as in a profile (repeat): e.g. emg.rate_hz=2048, force.time_column=none, units.delimiter=semicolon")
	f.StringVar(&fl.delimiter, "delimiter", "", "signal files: auto, comma, semicolon, tab or whitespace")
	f.StringVar(&fl.decimalComma, "decimal-comma", "", "signal files: auto, yes or no")
	f.StringVar(&fl.header, "header", "", "signal files: auto, yes or no")
	f.StringVar(&fl.timeColumn, "time-column", "", "signal files: auto, none, first or a column label")
	f.StringVar(&fl.timeUnit, "time-unit", "", "signal files: unit of the time column, s, ms or samples")
	f.StringVar(&fl.shape, "shape", "", "discharge files: long, columns, lines or matrix (default: detect when only one reading fits)")
	f.StringVar(&fl.labels, "labels", "", "discharge files: yes when the file names its units (each line starts with the unit's label, or a header of labels over columns), no when it holds only times (default: detect)")
	f.StringVar(&fl.timeBase, "time-base", "", "discharge files: s, ms or samples (default: detect when only one fits)")
	f.IntVar(&fl.firstIndex, "first-index", -1, "discharge files in samples: 0 or 1 for 0- or 1-based (default: 0 when an index 0 occurs)")
	f.StringVar(&fl.disDelimiter, "discharge-delimiter", "", "discharge files: comma, semicolon, tab or whitespace (default: detect)")
	f.StringVar(&fl.disDecimalComma, "discharge-decimal-comma", "", "discharge files: yes or no (default: detect)")
	f.StringVar(&fl.disHeader, "discharge-header", "", "discharge files: yes or no, whether the first line names the columns (default: detect)")
	f.Float64Var(&fl.tolerance, "tolerance", 0, "discharge times: samples off the grid before a time is reported (default 0.1)")
	rootCmd.AddCommand(cmd)
}

func runImport(w io.Writer, fl importFlags, args []string) error {
	if fl.out == "" {
		return withExit(2, errors.New("give the output with -o"))
	}
	var dtype record.SampleType
	switch fl.dtype {
	case "":
	case "float32", "float64":
		dtype = record.SampleType(fl.dtype)
	default:
		return withExit(2, fmt.Errorf("--dtype %q: want float32 or float64", fl.dtype))
	}
	prof := convert.DefaultProfile()
	if fl.profile != "" {
		p, err := convert.LoadProfile(fl.profile)
		if err != nil {
			return withExit(2, err)
		}
		prof = p
	}
	if err := overrideProfile(prof, fl); err != nil {
		return withExit(2, err)
	}
	if len(args) == 1 {
		if fl.meta != "" || fl.labMeta != "" || len(fl.force)+len(fl.emg)+len(fl.dis)+len(fl.units) > 0 {
			return withExit(2, errors.New("give either SOURCE_DIR or the files (--meta, --force, --emg, ...), not both"))
		}
		return importStudy(w, fl, args[0], prof, dtype)
	}
	if len(fl.emg)+len(fl.force) == 0 {
		return withExit(2, errors.New("give the files of a recording (--emg, --force, ...) or a SOURCE_DIR"))
	}
	in := convert.Inputs{Meta: fl.meta, LabMeta: fl.labMeta, Subjects: fl.subjects, Force: fl.force, EMG: fl.emg, Discharges: fl.dis, Units: fl.units,
		Profile: prof, DType: dtype, RateHz: fl.rate, AllowGaps: fl.allowGaps}
	if err := atomicfile.CheckTarget(fl.out, fl.overwrite); err != nil {
		return withExit(2, err)
	}
	bar := newProgress("import", 1)
	rep, err := convert.ImportRecording(in, fl.out, recfile.WriteOptions{Overwrite: fl.overwrite, Progress: func(done, total int64) {
		if bar.total != total {
			bar.total = total
		}
		bar.Add(done - bar.done)
	}})
	bar.Finish()
	if err != nil {
		if fl.json {
			printJSON(w, map[string]any{"error": err.Error(), "problem": convert.AsParseError(err)})
			return silentExit(2)
		}
		return withExit(2, err)
	}
	if fl.json {
		return printJSON(w, rep)
	}
	rep.WriteText(w)
	return nil
}

func importStudy(w io.Writer, fl importFlags, src string, prof *convert.Profile, dtype record.SampleType) error {
	shard, err := batch.ParseShard(fl.shard)
	if err != nil {
		return withExit(2, err)
	}
	res, err := importStudyDir(src, fl.out, convert.StudyOptions{Profile: prof, SubjectsFile: fl.subjects, DType: dtype, Shard: shard, Workers: fl.workers, Overwrite: fl.overwrite}, "import")
	if err != nil {
		return withExit(2, err)
	}
	var failed []string
	for _, r := range res {
		if r.Error != "" {
			failed = append(failed, r.Recording)
		}
	}
	if fl.shardReport != "" {
		files := make([]shardFile, len(res))
		for i, r := range res {
			files[i] = shardFile{Path: filepath.Join(src, r.Recording), Err: r.Error}
		}
		if err := writeShardReport(fl.shardReport, "import", src, shard, files); err != nil {
			return withExit(2, err)
		}
	}
	if fl.json {
		printJSON(w, map[string]any{"recordings": res, "failed": failed})
	} else {
		for _, r := range res {
			if r.Error != "" {
				fmt.Fprintf(w, "FAILED %s: %s\n", r.Recording, r.Error)
				continue
			}
			r.Report.WriteText(w)
		}
		if len(failed) > 0 {
			fmt.Fprintf(w, "%d of %d recordings failed: %s\n", len(failed), len(res), strings.Join(failed, ", "))
		} else {
			fmt.Fprintf(w, "imported %d %s into %s\n", len(res), pluralWord(len(res), "recording", "recordings"), fl.out)
		}
	}
	for _, r := range res {
		var ns *atomicfile.NoSpaceError
		if errors.As(r.Err, &ns) {
			return withExit(2, ns)
		}
	}
	if len(failed) > 0 {
		return silentExit(1)
	}
	return nil
}

// overrideProfile applies the reading flags over the profile.
func overrideProfile(p *convert.Profile, fl importFlags) error {
	return p.Override(convert.Overrides{Delimiter: fl.delimiter, DecimalComma: fl.decimalComma, Header: fl.header,
		TimeColumn: fl.timeColumn, TimeUnit: fl.timeUnit, Shape: fl.shape, TimeBase: fl.timeBase, Labels: fl.labels,
		DischargeDelimiter: fl.disDelimiter, DischargeDecimalComma: fl.disDecimalComma, DischargeHeader: fl.disHeader,
		FirstIndex: fl.firstIndex, ToleranceSamples: fl.tolerance, AllowOutOfRange: fl.allowRange, Read: fl.read})
}

// importStudyDir runs convert.ImportStudy with a progress bar (the command
// and the demo).
func importStudyDir(src, outDir string, opt convert.StudyOptions, label string) ([]convert.StudyResult, error) {
	bar := newProgress(label, 0)
	opt.Progress = func(done, total int) {
		bar.total = int64(total)
		bar.Add(int64(done) - bar.done)
	}
	defer bar.Finish()
	return convert.ImportStudy(src, outDir, opt)
}
