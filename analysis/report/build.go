package report

import (
	"bytes"
	"errors"
	"fmt"
	"io"
	"os"
	"path"
	"path/filepath"
	"sort"
	"strconv"
	"strings"
	"time"

	"muarc/analysis"
	"muarc/analysis/plot"
	"muarc/analysis/study"
	"muarc/archive"
	"muarc/internal/atomicfile"
	"muarc/recfile"
	"muarc/record"
	"muarc/schema"
	"muarc/validate"
)

// BuildOptions tune Build.
type BuildOptions struct {
	// Title heads the page; "" gives "Study report: <folder name>".
	Title string
	// Validate sets the validation options; the zero value means
	// validate.DefaultOptions().
	Validate *validate.Options
	// Progress, when set, is called after each recording (done of total).
	Progress func(done, total int)
	// Now is the report's time stamp; zero means time.Now().
	Now time.Time
	// FigureRecordings is how many recordings, in page order, get their
	// figures drawn: 0 means as many as hold DefaultFigureTrialArrays trial x
	// array pairs (at least one), AllFigureRecordings
	// every one, NoFigureRecordings none. The sections of the others keep
	// their tables and verdict and say, with the command that draws them,
	// that their figures are not in the page (Section.PlotCommand); the
	// page's notes count them.
	FigureRecordings int
}

// Build reads every recording under dir (archive.FindRecordings) and makes
// the report page: the index (archive.Index), per recording the validation
// summary (validate.File), the derived figures per decomposition
// (analysis.Recording) and the figures, and the data dictionary
// (archive.DataDictionary).
//
// Figures per recording, to keep the page light: for each array the
// decomposition edited by hand (the last such), else the last one; its
// overview in every trial; the rate-versus-threshold scatter per array
// name; and the MUAP grid of the trial with the highest target level
// (stored templates when the file has them, else averaged from the EMG).
// `muarc plot` draws all of them. Only the first opt.FigureRecordings
// recordings get figures (BuildOptions).
func Build(dir string, opt BuildOptions) (*Page, error) {
	p, b, err := begin(dir, opt)
	if err != nil {
		return nil, err
	}
	for k, f := range p.StudyFigures {
		if f.draw == nil {
			continue
		}
		var buf bytes.Buffer
		if err := f.draw(&buf); err != nil {
			return nil, err
		}
		p.StudyFigures[k].SVG, p.StudyFigures[k].draw = buf.Bytes(), nil
	}
	for i := range b.files {
		p.Recordings = append(p.Recordings, b.section(i))
	}
	return p, nil
}

// Write makes the same page as Build and Render, writing it to w as it
// goes: the head (index and study analysis) first, then each recording's
// section, its figures included, as soon as it is made, so that memory
// does not grow with the size of the study. The returned page is an
// outline of what was written: every section's file, verdict, figure
// captions (no drawings) and PlotCommand, but not its tables, summary or
// notes; the study figures' captions; the page's notes; no index rows.
func Write(w io.Writer, dir string, opt BuildOptions) (*Page, error) {
	p, b, err := begin(dir, opt)
	if err != nil {
		return nil, err
	}
	// The head lists the recordings by file name only.
	p.Recordings = make([]Section, len(b.files))
	for i, rel := range b.files {
		p.Recordings[i].File = rel
	}
	if err := renderHead(w, p); err != nil {
		return nil, err
	}
	p.Index.Rows = nil
	// The study figures were drawn straight into the page; only their
	// captions are kept.
	for k := range p.StudyFigures {
		p.StudyFigures[k].draw = nil
	}
	for i := range b.files {
		s := b.section(i)
		if err := renderSection(w, i, &s); err != nil {
			return nil, err
		}
		o := Section{File: s.File, Status: s.Status, Class: s.Class, PlotCommand: s.PlotCommand, Figures: make([]Figure, len(s.Figures))}
		for k, f := range s.Figures {
			o.Figures[k].Caption = f.Caption
		}
		p.Recordings[i] = o
	}
	if err := renderTail(w, p); err != nil {
		return nil, err
	}
	return p, nil
}

// builder holds what the sections of a page are made with.
type builder struct {
	dir   string
	files []string
	vopt  validate.Options
	opt   BuildOptions
	// drawn is the number of recordings, from the first, whose figures are
	// drawn.
	drawn int
}

func (b *builder) section(i int) Section {
	leftOut := ""
	if i >= b.drawn {
		leftOut = PlotCommand(b.dir, b.files[i])
	}
	s := section(filepath.Join(b.dir, filepath.FromSlash(b.files[i])), b.files[i], b.vopt, leftOut)
	if b.opt.Progress != nil {
		b.opt.Progress(i+1, len(b.files))
	}
	return s
}

// begin makes everything of the page but the recordings' sections: the
// index, the study analysis and its figures, the derived-figures table and
// the data dictionary.
func begin(dir string, opt BuildOptions) (*Page, *builder, error) {
	files, skipped, err := archive.FindRecordings(dir)
	if err != nil {
		return nil, nil, err
	}
	if len(files) == 0 {
		return nil, nil, fmt.Errorf("%s: no recordings (*.h5, *.hdf5) in the folder", dir)
	}
	now := opt.Now
	if now.IsZero() {
		now = time.Now()
	}
	vopt := validate.DefaultOptions()
	if opt.Validate != nil {
		vopt = *opt.Validate
	}
	title := opt.Title
	if title == "" {
		title = studyTitle(dir, files)
	}
	p := &Page{Title: title, Generated: now.UTC().Format(time.RFC3339), Software: schema.Software, Folder: dir}
	skipped, results := apartFromResults(dir, skipped)
	for _, r := range results {
		p.Notes = append(p.Notes, fmt.Sprintf("%s/ holds the results of muarc stats --write (%s), not recordings", r, study.JSONFile))
	}
	if len(skipped) > 0 {
		p.Notes = append(p.Notes, fmt.Sprintf("%d file(s) in the folder are not recordings and are left out: %s", len(skipped), strings.Join(skipped, ", ")))
	}
	rows, ierr := archive.Index(dir, archive.AnyLevel())
	p.Index = indexTable(rows)
	if ierr != nil {
		p.Notes = append(p.Notes, "Some recordings could not be indexed: "+ierr.Error())
	}
	if res, err := study.Analyse(dir, nil); err != nil {
		p.Notes = append(p.Notes, "The study analysis could not run: "+err.Error())
	} else {
		// The figures' provenance line gives the page's time (BuildOptions.Now),
		// so that one page made twice is the same page.
		res.Computed = now.UTC().Truncate(time.Second)
		p.Study = studyTable(res)
		// Drawn when the page's head is written.
		p.StudyFigures = studyFigures(res, dir)
	}
	p.Derived = derivedTable()
	dict, derr := archive.DataDictionary()
	if derr != nil {
		p.Dictionary = Table{Empty: "The data dictionary could not be made: " + derr.Error()}
	} else {
		p.Dictionary = dictionaryTable(dict)
	}
	b := &builder{dir: dir, files: files, vopt: vopt, opt: opt, drawn: figureLimit(opt, trialArrays(files, rows))}
	if b.drawn < len(files) {
		p.Notes = append(p.Notes, figuresLeftOutNote(b.drawn, len(files), files[b.drawn]))
	}
	return p, b, nil
}

// apartFromResults takes the files of study-analysis results folders
// (those holding study.JSONFile) out of skipped and returns the rest and
// those folders, relative to dir.
func apartFromResults(dir string, skipped []string) (rest, results []string) {
	isResults := map[string]bool{}
	for _, rel := range skipped {
		d := path.Dir(rel)
		if _, seen := isResults[d]; !seen {
			_, err := os.Stat(filepath.Join(dir, filepath.FromSlash(d), study.JSONFile))
			isResults[d] = err == nil && d != "."
			if isResults[d] {
				results = append(results, d)
			}
		}
		if !isResults[d] {
			rest = append(rest, rel)
		}
	}
	return rest, results
}

func fmtNum(v float64, prec int) string { return study.Figure(v, prec, "–") }

func indexTable(rows []archive.IndexRow) Table {
	t := Table{Caption: "Index: one row per recording, trial and array",
		Columns: []string{"file", "subject", "session", "trial", "level (% MVC)", "array", "muscle", "EMG (s)", "channels", "decomposition", "units", "discharges", "low-confidence units"},
		Empty:   "no recording could be indexed"}
	for _, r := range rows {
		dec := r.Decomposition
		if r.Decompositions > 1 {
			dec = fmt.Sprintf("%s (of %d)", dec, r.Decompositions)
		}
		t.Rows = append(t.Rows, []string{r.File, r.Subject, r.Session, r.Trial, fmtNum(r.LevelPctMVC, 0), r.Array, r.Muscle,
			fmtNum(r.DurationS, 1), strconv.Itoa(r.Channels), dec, strconv.Itoa(r.Units), strconv.FormatInt(r.Discharges, 10), strconv.Itoa(r.LowConfidenceUnits)})
	}
	return t
}

// section makes one recording's part of the page. Its figures are drawn
// unless plotCmd is given: then the section names that command instead.
// Problems reading it are shown in the section, never dropped.
func section(path, rel string, vopt validate.Options, plotCmd string) Section {
	s := Section{File: rel}
	// Through validate.Validator, so that a program that isolates
	// validation (the muarc command) gets a file that crashes the HDF5
	// library back as a read error, and the file is then not opened here.
	rep := validate.Validator(path, vopt)
	errs, warns, notes := rep.Count(validate.Error), rep.Count(validate.Warning), rep.Count(validate.Note)
	switch {
	case rep.ReadError != "":
		s.Status, s.Class = "could not read", "bad"
	case errs > 0:
		s.Status, s.Class = "invalid", "bad"
	case warns > 0:
		s.Status, s.Class = "valid with warnings", "warn"
	default:
		s.Status, s.Class = "valid", "ok"
	}
	s.Validation = Table{Caption: fmt.Sprintf("Validation: %d error(s), %d warning(s), %d note(s), grouped by check", errs, warns, notes),
		Columns: []string{"severity", "check", "findings", "first at", "first message"}, Empty: "no findings"}
	if rep.ReadError != "" {
		s.Validation.Empty = "the file could not be read: " + rep.ReadError
		return s
	}
	s.Validation.Rows = groupFindings(rep.Findings)
	if len(rep.Findings) > 0 {
		s.Notes = append(s.Notes, "To see every finding with its hint: "+"muarc validate "+atomicfile.ShellQuote(dashSafe(path)))
	}
	fh, err := recfile.Open(path)
	if err != nil {
		s.Notes = append(s.Notes, "Derived figures and plots are missing: "+err.Error())
		return s
	}
	defer fh.Close()
	rec := fh.Recording()
	st := analysis.Recording(rec)
	s.Summary = summary(rec)
	s.Stats = statsTable(st)
	for _, d := range st {
		for _, n := range d.Notes {
			s.Notes = append(s.Notes, fmt.Sprintf("%s/%s/%s: %s", d.Trial, d.Array, d.Decomposition, n))
		}
	}
	if plotCmd != "" {
		s.PlotCommand = plotCmd
		return s
	}
	figs, fnotes, ferr := figures(rec, st)
	if ferr != nil {
		s.Notes = append(s.Notes, "Some figures are missing: "+ferr.Error())
	}
	s.Notes = append(s.Notes, fnotes...)
	s.Figures = figs
	return s
}

// groupFindings gives one row per severity and check: how many findings,
// and where and what the first one is. Worst severity first.
func groupFindings(fs []validate.Finding) [][]string {
	type key struct {
		sev   validate.Severity
		check string
	}
	var order []key
	count := map[key]int{}
	first := map[key]validate.Finding{}
	for _, f := range fs {
		k := key{f.Severity, f.Check}
		if count[k] == 0 {
			order = append(order, k)
			first[k] = f
		}
		count[k]++
	}
	sort.SliceStable(order, func(i, j int) bool { return order[i].sev > order[j].sev })
	var rows [][]string
	for _, k := range order {
		f := first[k]
		where := f.HDF5Path
		if where == "" {
			where = f.JSONPath
		}
		rows = append(rows, []string{k.sev.String(), k.check, strconv.Itoa(count[k]), where, f.Message})
	}
	return rows
}

func summary(rec *record.Recording) string {
	arrays, units := 0, 0
	for _, tr := range rec.Trials {
		arrays += len(tr.Arrays)
		for _, a := range tr.Arrays {
			for _, d := range a.Decompositions {
				units += len(d.Units)
			}
		}
	}
	subj := rec.Subject.ID
	if subj == "" {
		subj = "(not given)"
	}
	return fmt.Sprintf("Subject %s, session %s: %d trial(s), %d array recording(s), %d motor units over all decompositions.",
		subj, orDash(rec.Session.ID), len(rec.Trials), arrays, units)
}

func orDash(s string) string {
	if s == "" {
		return "–"
	}
	return s
}

func statsTable(st []analysis.DecompositionStats) Table {
	t := Table{Caption: "Derived figures per decomposition (regressions on recruitment threshold, % MVC)",
		Columns: []string{"trial", "array", "decomposition", "units", "plateau (s)", "plateau force, tracking RMS (% MVC)", "plateau rate: slope (pps/%MVC)", "intercept (pps)", "R²", "n",
			"initial rate: slope (pps/%MVC)", "intercept (pps)", "R²", "n"},
		Empty: "no decompositions"}
	for _, d := range st {
		pl, pf := "–", "–"
		if d.Plateau != nil {
			pl = fmt.Sprintf("%.2f–%.2f", d.Plateau.StartS, d.Plateau.EndS)
			pf = fmtNum(d.Plateau.ForceMeanPctMVC, 1) + ", " + fmtNum(d.Plateau.TrackingRMSPctMVC, 2)
		}
		f, g := d.PlateauRateFit, d.InitialRateFit
		t.Rows = append(t.Rows, []string{d.Trial, d.Array, d.Decomposition, strconv.Itoa(len(d.Units)), pl, pf,
			fmtNum(f.Slope, 3), fmtNum(f.Intercept, 2), fmtNum(f.R2, 2), strconv.Itoa(f.N),
			fmtNum(g.Slope, 3), fmtNum(g.Intercept, 2), fmtNum(g.R2, 2), strconv.Itoa(g.N)})
	}
	return t
}

// chosenDecomposition is the one the index counts (record.ReportedDecomposition).
func chosenDecomposition(arr *record.Array) []int {
	if len(arr.Decompositions) == 0 {
		return nil
	}
	return []int{record.ReportedDecomposition(arr.Decompositions)}
}

func figures(rec *record.Recording, st []analysis.DecompositionStats) ([]Figure, []string, error) {
	// The trial with the highest target level of each array name gets the
	// MUAP grid.
	top := map[string]int{}
	for ti, tr := range rec.Trials {
		for _, a := range tr.Arrays {
			if j, ok := top[a.Name]; !ok || tr.TargetPctMVC > rec.Trials[j].TargetPctMVC {
				top[a.Name] = ti
			}
		}
	}
	var errs []error
	cache := map[[2]int][]*analysis.Templates{}
	opt := plot.Options{
		Decomposition: chosenDecomposition,
		MUAPGrid: func(ti, ai, di int) bool {
			return top[rec.Trials[ti].Arrays[ai].Name] == ti
		},
		Templates: func(ti, ai, di int) (*analysis.Templates, string) {
			arr := &rec.Trials[ti].Arrays[ai]
			if t := plot.StoredTemplates(&arr.Decompositions[di]); t != nil {
				return t, "stored"
			}
			k := [2]int{ti, ai}
			ts, ok := cache[k]
			if !ok && arr.Samples != nil {
				var err error
				ts, err = analysis.ArrayTemplates(arr, analysis.MUAPHalfWindowS)
				if err != nil {
					errs = append(errs, err)
				}
				cache[k] = ts
			}
			if ts == nil {
				return nil, ""
			}
			return ts[di], "averaged"
		},
	}
	named, notes := plot.RecordingFigures(rec, st, opt)
	// Overviews first (trial order), then the scatter, then the grids.
	rank := map[string]int{"overview": 0, "rates": 1, "muaps": 2}
	sort.SliceStable(named, func(i, j int) bool { return rank[named[i].Kind] < rank[named[j].Kind] })
	var out []Figure
	for _, n := range named {
		var b bytes.Buffer
		if err := n.Figure.WriteSVG(&b); err != nil {
			errs = append(errs, fmt.Errorf("%s: %w", n.Name, err))
			continue
		}
		cap := n.Caption
		if n.Kind == "muaps" {
			cap += " Templates: " + n.Templates + "."
		}
		out = append(out, Figure{Caption: cap, SVG: b.Bytes()})
	}
	return out, notes, errors.Join(errs...)
}

// studyTitle is "Study report: " and the study title of the first
// recording that has one, else the folder's name.
func studyTitle(dir string, files []string) string {
	for _, rel := range files {
		path := filepath.Join(dir, filepath.FromSlash(rel))
		if validate.ScreenFirst(path, false) != nil {
			continue
		}
		f, err := recfile.Open(path)
		if err != nil {
			continue
		}
		t := f.Recording().Study.Title
		f.Close()
		if t != "" {
			return "Study report: " + t
		}
	}
	abs, _ := filepath.Abs(dir)
	return "Study report: " + filepath.Base(abs)
}

// studyTable lists the across-subject summary of the study analysis.
func studyTable(res *study.Result) Table {
	t := Table{Caption: "Per muscle and target level (all: every level, where the mixed model gives each level its own fixed intercept and one common slope, so that the rise of rate with level is not counted as within-subject scatter): the subjects' least-squares slopes (pps per % MVC) and intercepts (pps), and the mixed model (random intercept and slope per subject, REML): fixed slope and the between-subject share of the variance. A muscle recorded in one subject has one line per level: its slope and intercept are that line's (n = 1), with no SD and no mixed model, which need two subjects or more. muarc stats DIR gives the per-subject lines.",
		Columns: []string{"muscle", "level (% MVC)", "relation", "lines", "slope mean ± SD", "slope range", "intercept mean ± SD", "mixed slope ± SE", "between-subject share", "within-subject variance"},
		Empty:   "no units with thresholds"}
	for _, s := range res.Summary {
		lvl := fmtNum(s.LevelPct, 0)
		if s.AllLevels {
			lvl = "all"
		}
		t.Rows = append(t.Rows, []string{s.Muscle, lvl, strings.ReplaceAll(s.Relation, "_", " "), strconv.Itoa(s.Slope.N),
			study.SpreadText(s.Slope, 3, "–", fmtNum), study.RangeText(s.Slope, 3, "–", fmtNum),
			study.SpreadText(s.Intercept, 2, "–", fmtNum), study.MixedText(s.Mixed, 3, "–", fmtNum),
			fmtNum(s.Mixed.BetweenShare, 2), fmtNum(s.Mixed.WithinVar, 2)})
	}
	return t
}

func derivedTable() Table {
	t := Table{Caption: "How the derived figures and plots are computed (package analysis)", Columns: []string{"figure", "rule"}}
	m := analysis.Method()
	keys := make([]string, 0, len(m))
	for k := range m {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		t.Rows = append(t.Rows, []string{k, fmt.Sprint(m[k])})
	}
	t.Rows = append(t.Rows,
		[]string{"smoothed rate", fmt.Sprintf("discharge train convolved with a unit-area Hann window %.0f ms long", 1000*analysis.SmoothedRateWindowS)},
		[]string{"peak-to-peak map", "max - min of each channel's template over its lags, placed on the electrode grid"})
	return t
}

func dictionaryTable(d []archive.DictEntry) Table {
	t := Table{Caption: "Fields of the metadata view (schema/recording.schema.json)",
		Columns: []string{"field", "type", "unit", "required", "meaning", "allowed"}, Empty: "empty"}
	for _, e := range d {
		req := ""
		if e.Required {
			req = "yes"
		}
		t.Rows = append(t.Rows, []string{e.Field, e.Type, e.Unit, req, e.Meaning, e.Allowed})
	}
	return t
}
