package report

import (
	"fmt"
	"path"
	"path/filepath"
	"strings"

	"muarc/analysis/plot"
	"muarc/analysis/study"
	"muarc/archive"
	"muarc/internal/atomicfile"
)

// How many recordings get their figures drawn in the page
// (BuildOptions.FigureRecordings).
const (
	// DefaultFigureTrialArrays is how many of the study's trial x array
	// pairs, counted from the first recording, the default page draws
	// figures for (BuildOptions.FigureRecordings 0): every recording whose
	// pairs fit, and always the first. The figures grow with the pairs
	// (an overview per trial and array, rates and MUAPs per array): 0.27
	// MB of page for a recording of one trial and two arrays (the average
	// over a generated study of 2,000) and 1.7 MB for the demo's three
	// trials of two arrays, about 0.14-0.28 MB a pair, so 200 pairs keep
	// the figures near 30-60 MB whatever the recordings hold, a page a
	// browser opens; a study with every figure (2,000 recordings of one
	// trial: over 500 MB) is more than one opens.
	DefaultFigureTrialArrays = 200
	// AllFigureRecordings draws the figures of every recording.
	AllFigureRecordings = -1
	// NoFigureRecordings draws no per-recording figures (the study
	// figures are drawn all the same).
	NoFigureRecordings = -2
)

// figureLimit is the number of recordings, in page order, that get their
// figures; pairs[i] is the number of trial x array pairs of recording i
// (the index rows; 0 when it could not be indexed, counted as 1).
func figureLimit(opt BuildOptions, pairs []int) int {
	n := len(pairs)
	switch k := opt.FigureRecordings; {
	case k == 0:
		sum := 0
		for i, c := range pairs {
			sum += max(c, 1)
			if sum > DefaultFigureTrialArrays {
				return max(i, 1)
			}
		}
		return n
	case k == NoFigureRecordings:
		return 0
	case k < 0:
		return n
	default:
		return min(k, n)
	}
}

// trialArrays counts the index rows (one per recording, trial and array)
// of each file.
func trialArrays(files []string, rows []archive.IndexRow) []int {
	at := make(map[string]int, len(files))
	for i, f := range files {
		at[f] = i
	}
	pairs := make([]int, len(files))
	for _, r := range rows {
		if i, ok := at[r.File]; ok {
			pairs[i]++
		}
	}
	return pairs
}

// PlotCommand is the command that draws the figures of the recording rel
// (slash-separated, relative to the study folder dir), into a folder named
// after it under figures/.
func PlotCommand(dir, rel string) string {
	file := dashSafe(filepath.Join(dir, filepath.FromSlash(rel)))
	out := "figures/" + strings.TrimSuffix(rel, path.Ext(rel))
	return "muarc plot " + atomicfile.ShellQuote(file) + " -o " + atomicfile.ShellQuote(out)
}

// figuresLeftOutNote is the page's note on the recordings whose figures it
// does not draw (none: "").
func figuresLeftOutNote(drawn, total int, firstLeftOut string) string {
	if drawn >= total {
		return ""
	}
	if drawn == 0 {
		return fmt.Sprintf("No recording's figures are drawn in this page (muarc report --figures 0): each of the %d recording sections has its tables and validation verdict, and the muarc plot command that draws its figures.", total)
	}
	return fmt.Sprintf("Figures are drawn for the first %d of the %d recordings (by default as many as hold %d trial x array pairs), to keep the page small enough for a browser to open. "+
		"The other %d recording sections (from %s on, in the order of the list) have their tables and validation verdict and, in place of figures, the muarc plot command that draws them; "+
		"muarc report --figures all draws every recording's figures.", drawn, total, DefaultFigureTrialArrays, total-drawn, firstLeftOut)
}

// MaxStudyFigureSubjects is the most subjects per muscle whose study
// figures the page draws (the first parts of plot.StudyFigures, each of
// plot.StudySubjectsPerFigure subjects): a study of 2,000 subjects made
// 28 MB of SVG in one figure. The muscle's other subjects get a sentence
// in place of their figures, with the command that draws them all.
const MaxStudyFigureSubjects = 30

// studyFigures are the study figures of the page, in the order of
// plot.StudyFigures, drawn when the page is written: per muscle, the parts
// of its first MaxStudyFigureSubjects subjects, and for the rest one
// Figure with LeftOut set. dir is the study folder as given.
func studyFigures(res *study.Result, dir string) []Figure {
	named := plot.StudyFigures(res)
	var out []Figure
	for i := 0; i < len(named); {
		m := named[i].Muscle
		shown, subjects, parts := 0, 0, 0
		first := ""
		for ; i < len(named) && named[i].Muscle == m; i++ {
			n := named[i]
			if parts == 0 && shown+len(n.Subjects) <= MaxStudyFigureSubjects {
				shown += len(n.Subjects)
				out = append(out, Figure{Caption: n.Caption, draw: n.Figure.WriteSVG})
				continue
			}
			if parts == 0 {
				first = n.Subjects[0]
			}
			parts++
			subjects += len(n.Subjects)
		}
		if parts == 0 {
			continue
		}
		q := atomicfile.ShellQuote(dashSafe(dir))
		out = append(out, Figure{Caption: fmt.Sprintf("%s: discharge rate against recruitment threshold, the other %d subjects (not drawn in this page).", m, subjects),
			LeftOut: fmt.Sprintf("The study figures of %s for its other %d subjects (from subject %s on, %d more parts of up to %d subjects) are not drawn in this page, which shows the first %d subjects of a muscle so that it stays small enough to open. "+
				"muarc stats %s --write draws every part as PNG and SVG (into the study folder's rate_threshold unless --out names another); muarc stats %s lists each subject's line (--tsv as a table).",
				m, subjects, first, parts, plot.StudySubjectsPerFigure, shown, q, q)})
	}
	return out
}

// dashSafe puts ./ before a path a command would read as an option.
func dashSafe(p string) string {
	if strings.HasPrefix(p, "-") {
		return "." + string(filepath.Separator) + p
	}
	return p
}
