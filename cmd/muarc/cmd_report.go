package main

import (
	"bufio"
	"fmt"
	"io"
	"os"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"muarc/analysis/plot"
	"muarc/analysis/report"
	"muarc/internal/atomicfile"
)

var reportFlags struct {
	out, title, figures string
	json, overwrite     bool
}

var reportCmd = &cobra.Command{
	Use:   "report DIR -o report.html",
	Short: "Write one self-contained HTML page about a study folder",
	Long: fmt.Sprintf(`report reads every recording under DIR (*.h5, *.hdf5, recursively; names
starting with "." are skipped) and writes one HTML page: the index (one row
per recording, trial and array), per recording its validation summary (the
findings of muarc validate grouped by check), its derived figures per
decomposition (as muarc stats: plateau, rate regressions on recruitment
threshold) and its figures inline as SVG (as muarc plot: per array the
decomposition edited by hand, else the last one; the overview of every trial,
the rate-versus-threshold scatter, the MUAP grid of the highest target
level), how the figures are computed, and the data dictionary.

Figures are drawn for the first recordings in the page's order, by default
(--figures fit) as many as hold the study's first %d trial x array pairs,
at least one (--figures N draws the first N recordings', --figures all
every one, --figures 0 none): a recording's figures take from 0.3 MB of the
page (one trial, two arrays) to a few MB (the demo's three trials: 1.7
MB), and a page of thousands of recordings with all of them is more than a
browser opens. Every other recording keeps its section with the tables and
the validation verdict, and says in words that its figures are not in the
page, with the command that draws them (muarc plot FILE -o figures/NAME); a note at the top
of the page counts them. The study figures of a muscle show its subjects
side by side, %d to a figure; the page draws those of its first %d
subjects and, in place of the rest, says how many are left out and names
muarc stats DIR --write, which draws every part, and muarc stats DIR, which
lists every subject's line.

The page has no scripts and loads nothing from anywhere: it opens in a
browser with no network and can be mailed or archived as it is. It shows
what the files hold: before a study is shared, the ethics board, the consent
given and local data-protection law decide what may leave the lab.

Exit status: 0 written, 2 the folder could not be read or the page not
written (or bad usage), or a recording could not be read: the page is then
still written, with it marked. Recordings that fail validation are shown as
such in the page.`, report.DefaultFigureTrialArrays, plot.StudySubjectsPerFigure, report.MaxStudyFigureSubjects),
	Args: cobra.ExactArgs(1),
	RunE: runReport,
}

func init() {
	f := reportCmd.Flags()
	f.StringVarP(&reportFlags.out, "output", "o", "", "the HTML file to write (required)")
	f.StringVar(&reportFlags.title, "title", "", "page title (default: \"Study report: \" and the folder name)")
	f.StringVar(&reportFlags.figures, "figures", "fit", fmt.Sprintf("draw the figures of the first N recordings (a number), all, or those that fit (the first recordings holding %d trial x array pairs); the others name the command that draws them", report.DefaultFigureTrialArrays))
	f.BoolVar(&reportFlags.overwrite, "overwrite", false, "replace the output file if it exists")
	f.BoolVar(&reportFlags.json, "json", false, "print a summary of what was written as JSON")
	reportCmd.MarkFlagRequired("output")
	rootCmd.AddCommand(reportCmd)
}

// reportSummary says what a report holds.
type reportSummary struct {
	Report     string   `json:"report"`
	Bytes      int      `json:"bytes"`
	Recordings int      `json:"recordings"`
	Figures    int      `json:"figures"`
	Statuses   []string `json:"statuses"`
	// Unreadable counts the recordings that could not be read (shown in
	// the page; exit status 2).
	Unreadable int `json:"unreadable"`
	// FiguresLeftOut counts the recordings whose figures the page does
	// not draw (--figures); their sections give the command that does.
	FiguresLeftOut int      `json:"figures_left_out"`
	Notes          []string `json:"notes"`
}

// parseFigureRecordings reads --figures: a count of recordings, or all.
func parseFigureRecordings(v string) (int, error) {
	switch strings.ToLower(strings.TrimSpace(v)) {
	case "all":
		return report.AllFigureRecordings, nil
	case "fit":
		return 0, nil // report.DefaultFigureTrialArrays
	}
	n, err := strconv.Atoi(strings.TrimSpace(v))
	if err != nil || n < 0 {
		return 0, fmt.Errorf("--figures %q: give the number of recordings whose figures the page draws (0 or more), all, or fit", v)
	}
	if n == 0 {
		return report.NoFigureRecordings, nil
	}
	return n, nil
}

// writeReport builds the page for dir and writes it atomically to out.
func writeReport(dir, out, title string, figureRecordings int, overwrite bool) (*reportSummary, error) {
	if err := atomicfile.CheckTarget(out, overwrite); err != nil {
		return nil, err
	}
	var bar *progress
	// The page is written as it is made (report.Write) into a temporary
	// file that is renamed into place only when complete.
	var p *report.Page
	var n countingWriter
	err := atomicfile.Write(out, overwrite, func(f *os.File) error {
		bw := bufio.NewWriterSize(io.MultiWriter(f, &n), 1<<20)
		var err error
		p, err = report.Write(bw, dir, report.BuildOptions{Title: title, FigureRecordings: figureRecordings, Progress: func(done, total int) {
			if bar == nil {
				bar = newProgress("report", int64(total))
			}
			bar.Add(1)
		}})
		if err != nil {
			return err
		}
		return bw.Flush()
	})
	if bar != nil {
		bar.Finish()
	}
	if err != nil {
		return nil, err
	}
	s := &reportSummary{Report: out, Bytes: int(n), Recordings: len(p.Recordings), Notes: append([]string{}, p.Notes...)}
	for _, f := range p.StudyFigures {
		if f.LeftOut != "" {
			s.Notes = append(s.Notes, f.LeftOut)
		}
	}
	for _, r := range p.Recordings {
		s.Figures += len(r.Figures)
		s.Statuses = append(s.Statuses, r.File+": "+r.Status)
		if r.Status == "could not read" {
			s.Unreadable++
		}
		if r.PlotCommand != "" {
			s.FiguresLeftOut++
		}
	}
	return s, nil
}

func runReport(cmd *cobra.Command, args []string) error {
	if st, err := os.Stat(args[0]); err != nil || !st.IsDir() {
		return withExit(2, fmt.Errorf("%s: not a folder (give the folder holding the recordings)", args[0]))
	}
	figs, err := parseFigureRecordings(reportFlags.figures)
	if err != nil {
		return withExit(2, err)
	}
	s, err := writeReport(args[0], reportFlags.out, reportFlags.title, figs, reportFlags.overwrite)
	if err != nil {
		return withExit(2, err)
	}
	w := cmd.OutOrStdout()
	code := 0
	if s.Unreadable > 0 {
		code = 2 // the page is written, with those recordings marked
	}
	if reportFlags.json {
		if err := printJSON(w, s); err != nil {
			return err
		}
		return silentExit(code)
	}
	fmt.Fprintf(w, "wrote %s (%d recordings, %d figures, %.1f MB)\n", s.Report, s.Recordings, s.Figures, float64(s.Bytes)/1e6)
	if s.FiguresLeftOut > 0 {
		fmt.Fprintf(w, "  %d recording(s) without figures in the page (--figures); each section gives the muarc plot command that draws them\n", s.FiguresLeftOut)
	}
	for _, st := range s.Statuses {
		fmt.Fprintf(w, "  %s\n", st)
	}
	for _, n := range s.Notes {
		fmt.Fprintf(w, "note: %s\n", n)
	}
	return silentExit(code)
}

// countingWriter counts the bytes written through it.
type countingWriter int64

func (c *countingWriter) Write(b []byte) (int, error) {
	*c += countingWriter(len(b))
	return len(b), nil
}
