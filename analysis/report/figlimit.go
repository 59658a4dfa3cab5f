package report

import (
	"fmt"
	"path"
	"path/filepath"
	"strings"

	"muarc/internal/atomicfile"
)

// How many recordings get their figures drawn in the page
// (BuildOptions.FigureRecordings).
const (
	// DefaultFigureRecordings is the number of recordings, in page order,
	// whose figures a page draws when BuildOptions.FigureRecordings is 0.
	// Each recording's figures take about 0.2 to 0.5 MB of the page, so a
	// page of a large study with every figure (2,000 recordings: close to
	// 1 GB) is more than a browser opens; 100 recordings keep it to tens of
	// megabytes, and a study of up to 100 recordings is drawn whole.
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
	file := filepath.Join(dir, filepath.FromSlash(rel))
	if strings.HasPrefix(file, "-") {
		file = "." + string(filepath.Separator) + file
	}
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
		"muarc report --figures all draws every recording's figures (about 0.2 to 0.5 MB of page each).", drawn, total, total-drawn, firstLeftOut)
}
