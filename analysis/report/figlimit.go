package report

import (
	"fmt"
	"path"
	"path/filepath"
	"strings"

	"muarc/analysis/plot"
	"muarc/analysis/study"
	"muarc/internal/atomicfile"
)

// How many recordings get their figures drawn in the page
// (BuildOptions.FigureRecordings).
const (
	// DefaultFigureRecordings is the number of recordings, in page order,
	// whose figures a page draws when BuildOptions.FigureRecordings is 0.
	// A recording's figures take 0.27 MB of the page for one trial of two
	// arrays (the average over a generated study of 2,000) and 1.7 MB for
	// the demo's three trials, so a page of a large study with every
	// figure (2,000 recordings of one trial: over 500 MB) is more than a
	// browser opens; 100 recordings keep such a page near 30 MB (170 MB
	// for recordings like the demo's), and a study of up to 100
	// recordings is drawn whole.
	DefaultFigureRecordings = 100
	// AllFigureRecordings draws the figures of every recording.
	AllFigureRecordings = -1
	// NoFigureRecordings draws no per-recording figures (the study
	// figures are drawn all the same).
	NoFigureRecordings = -2
)

// figureLimit is the number of recordings, in page order, that get their
// figures, for n recordings.
func figureLimit(opt BuildOptions, n int) int {
	switch k := opt.FigureRecordings; {
	case k == 0:
		return min(DefaultFigureRecordings, n)
	case k == NoFigureRecordings:
		return 0
	case k < 0:
		return n
	default:
		return min(k, n)
	}
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
	return fmt.Sprintf("Figures are drawn for the first %d of the %d recordings, to keep the page small enough for a browser to open. "+
		"The other %d recording sections (from %s on, in the order of the list) have their tables and validation verdict and, in place of figures, the muarc plot command that draws them; "+
		"muarc report --figures all draws every recording's figures.", drawn, total, total-drawn, firstLeftOut)
}

// MaxStudyFigureSubjects is the most subjects the page's study figure of a
// muscle shows side by side (a column of 3.2 inches each, scaled to the
// page's width: beyond about 30 a column is narrower than its tick
// labels, and a study of 2,000 subjects made a figure of 28 MB of SVG).
// The figure of a muscle with more subjects is not drawn; the page says so
// in its place.
const MaxStudyFigureSubjects = 30

// studyFigures are the study figures of the page, one per muscle in the
// order of res.Rows, drawn when the page is written; a muscle with more
// than MaxStudyFigureSubjects subjects gets a Figure with LeftOut set
// instead. dir is the study folder as given.
func studyFigures(res *study.Result, dir string) []Figure {
	subjects := map[string]map[string]bool{}
	var muscles []string
	for _, r := range res.Rows {
		if subjects[r.Muscle] == nil {
			subjects[r.Muscle] = map[string]bool{}
			muscles = append(muscles, r.Muscle)
		}
		subjects[r.Muscle][r.Subject] = true
	}
	drawable := *res
	drawable.Rows = nil
	for _, r := range res.Rows {
		if len(subjects[r.Muscle]) <= MaxStudyFigureSubjects {
			drawable.Rows = append(drawable.Rows, r)
		}
	}
	named := plot.StudyFigures(&drawable)
	var out []Figure
	for _, m := range muscles {
		n := len(subjects[m])
		if n <= MaxStudyFigureSubjects {
			f := named[0]
			named = named[1:]
			out = append(out, Figure{Caption: f.Caption, draw: f.Figure.WriteSVG})
			continue
		}
		out = append(out, Figure{Caption: fmt.Sprintf("%s: discharge rate against recruitment threshold per subject (not drawn).", m),
			LeftOut: fmt.Sprintf("The figure of %s, one column per subject, is not drawn in this page: it would have %d columns, more than the %d that stay readable side by side. "+
				"The table above summarises the subjects' lines; %s lists each subject's line (--tsv as a table).", m, n, MaxStudyFigureSubjects,
				"muarc stats "+atomicfile.ShellQuote(dashSafe(dir)))})
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
