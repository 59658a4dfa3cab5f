package main

import (
	"bufio"
	"fmt"
	"io"
	"os"

	"github.com/spf13/cobra"

	"muarc/analysis/report"
	"muarc/internal/atomicfile"
)

var reportFlags struct {
	out, title      string
	json, overwrite bool
}

var reportCmd = &cobra.Command{
	Use:   "report DIR -o report.html",
	Short: "Write one self-contained HTML page about a study folder",
	Long: `report reads every recording under DIR (*.h5, *.hdf5, recursively; names
starting with "." are skipped) and writes one HTML page: the index (one row
per recording, trial and array), per recording its validation summary (the
findings of muarc validate grouped by check), its derived figures per
decomposition (as muarc stats: plateau, rate regressions on recruitment
threshold) and its figures inline as SVG (as muarc plot: per array the
decomposition edited by hand, else the last one; the overview of every trial,
the rate-versus-threshold scatter, the MUAP grid of the highest target
level), how the figures are computed, and the data dictionary.

The page has no scripts and loads nothing from anywhere: it opens in a
browser with no network and can be mailed or archived as it is. It shows
what the files hold: before a study is shared, the ethics board, the consent
given and local data-protection law decide what may leave the lab.

Exit status: 0 written, 2 the folder could not be read or the page not
written (or bad usage), or a recording could not be read: the page is then
still written, with it marked. Recordings that fail validation are shown as
such in the page.`,
	Args: cobra.ExactArgs(1),
	RunE: runReport,
}

func init() {
	f := reportCmd.Flags()
	f.StringVarP(&reportFlags.out, "output", "o", "", "the HTML file to write (required)")
	f.StringVar(&reportFlags.title, "title", "", "page title (default: \"Study report: \" and the folder name)")
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
	Unreadable int      `json:"unreadable"`
	Notes      []string `json:"notes"`
}

// writeReport builds the page for dir and writes it atomically to out.
func writeReport(dir, out, title string, overwrite bool) (*reportSummary, error) {
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
		p, err = report.Write(bw, dir, report.BuildOptions{Title: title, Progress: func(done, total int) {
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
	s := &reportSummary{Report: out, Bytes: int(n), Recordings: len(p.Recordings), Notes: p.Notes}
	if s.Notes == nil {
		s.Notes = []string{}
	}
	for _, r := range p.Recordings {
		s.Figures += len(r.Figures)
		s.Statuses = append(s.Statuses, r.File+": "+r.Status)
		if r.Status == "could not read" {
			s.Unreadable++
		}
	}
	return s, nil
}

func runReport(cmd *cobra.Command, args []string) error {
	if st, err := os.Stat(args[0]); err != nil || !st.IsDir() {
		return withExit(2, fmt.Errorf("%s: not a folder (give the folder holding the recordings)", args[0]))
	}
	s, err := writeReport(args[0], reportFlags.out, reportFlags.title, reportFlags.overwrite)
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
