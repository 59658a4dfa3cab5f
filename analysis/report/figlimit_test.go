package report

import (
	"bytes"
	"fmt"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"muarc/analysis/plot"
	"muarc/analysis/study"
	"muarc/archive"
)

// copiesFolder is the test study with its recording copied to n files
// (sub/rec00.h5 ...), in the order the page lists them.
func copiesFolder(t *testing.T, n int) (dir string, names []string) {
	t.Helper()
	dir = studyFolder(t)
	src, err := os.ReadFile(filepath.Join(dir, "sub", "reca.h5"))
	if err != nil {
		t.Fatal(err)
	}
	os.Remove(filepath.Join(dir, "sub", "reca.h5"))
	for i := range n {
		name := fmt.Sprintf("rec%02d", i)
		if err := os.WriteFile(filepath.Join(dir, "sub", name+".h5"), src, 0o644); err != nil {
			t.Fatal(err)
		}
		names = append(names, name)
	}
	return dir, names
}

var sectionStart = regexp.MustCompile(`<section id="rec-(\d+)" class="recording">`)

// sections splits a page into its recording sections.
func sections(page string) []string {
	loc := sectionStart.FindAllStringIndex(page, -1)
	var out []string
	for i, l := range loc {
		end := strings.Index(page[l[0]:], "</section>")
		if i+1 < len(loc) && l[0]+end > loc[i+1][0] {
			end = loc[i+1][0] - l[0]
		}
		out = append(out, page[l[0]:l[0]+end])
	}
	return out
}

// TestFigureRecordingsLimit: with --figures 2 on a study of 7 recordings
// the page holds every recording's verdict, validation table and derived
// figures table, the figures of the first two only, and for each of the
// other five the sentence that its figures are not in the page with the
// exact muarc plot command; the note at the top counts them. The numbers
// follow from the option's rule (a property of our page, not a reference
// value).
func TestFigureRecordingsLimit(t *testing.T) {
	const n, drawn = 7, 2
	dir, names := copiesFolder(t, n)
	opt := BuildOptions{Title: "Test study", Now: time.Date(2026, 3, 14, 10, 0, 0, 0, time.UTC), FigureRecordings: drawn}
	var buf bytes.Buffer
	p, err := Write(&buf, dir, opt)
	if err != nil {
		t.Fatal(err)
	}
	page := buf.String()
	secs := sections(page)
	if len(secs) != n {
		t.Fatalf("%d sections, want %d", len(secs), n)
	}
	for i, s := range secs {
		for _, want := range []string{"sub/" + names[i] + ".h5", `<span class="status `, "<caption>Validation:", "<caption>Derived figures per decomposition", "<td>ramp_"} {
			if !strings.Contains(s, want) {
				t.Errorf("section %d lacks %q", i, want)
			}
		}
		if v := p.Recordings[i].Status; v == "" || !strings.Contains(s, ">"+v+"</span>") {
			t.Errorf("section %d: verdict %q not shown", i, v)
		}
		figs := strings.Count(s, "<figure>")
		cmd := PlotCommand(dir, "sub/"+names[i]+".h5")
		note := "This page does not draw the figures of this recording (see the note at the top). To draw them: <code>" + cmd + "</code>"
		if i < drawn {
			// The test study: 2 trials x 2 arrays -> 4 overviews, 2
			// scatters, 2 MUAP grids (TestBuildStudyReport).
			if figs != 8 || strings.Contains(s, "does not draw the figures") {
				t.Errorf("section %d: %d figures (want 8) or a left-out note", i, figs)
			}
			if p.Recordings[i].PlotCommand != "" || len(p.Recordings[i].Figures) != 8 {
				t.Errorf("outline %d: command %q, %d figures", i, p.Recordings[i].PlotCommand, len(p.Recordings[i].Figures))
			}
			continue
		}
		if figs != 0 || !strings.Contains(s, note) {
			t.Errorf("section %d: %d figures, or no note %q:\n%.2000s", i, figs, note, s)
		}
		if p.Recordings[i].PlotCommand != cmd || len(p.Recordings[i].Figures) != 0 {
			t.Errorf("outline %d: command %q, %d figures", i, p.Recordings[i].PlotCommand, len(p.Recordings[i].Figures))
		}
	}
	if got := strings.Count(page, "This page does not draw the figures"); got != n-drawn {
		t.Errorf("%d left-out notes, want %d", got, n-drawn)
	}
	top := page[:strings.Index(page, `<h2 id="index">`)]
	want := fmt.Sprintf("Figures are drawn for the first %d of the %d recordings", drawn, n)
	if !strings.Contains(top, want) || !strings.Contains(top, fmt.Sprintf("The other %d recording sections (from sub/%s.h5 on", n-drawn, names[drawn])) {
		t.Errorf("the top of the page does not count the recordings without figures:\n%s", top)
	}
	// Chromium lays out the drawn figures and every section's tables
	// (two per recording, with the index and the study summary beside).
	html := filepath.Join(t.TempDir(), "page.html")
	if err := os.WriteFile(html, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	checkInChromium(t, html, drawn*8, 2*n+2)
	if cmd := PlotCommand(dir, "sub/rec02.h5"); cmd != "muarc plot "+filepath.Join(dir, "sub", "rec02.h5")+" -o figures/sub/rec02" {
		t.Errorf("plot command %q", cmd)
	}
}

// TestFigureRecordingsDefaultAndNone: a study within the default count
// gets every figure and no note; --figures 0 draws none and names the
// command in every section.
func TestFigureRecordingsDefaultAndNone(t *testing.T) {
	const n = 3
	dir, _ := copiesFolder(t, n)
	for _, c := range []struct {
		limit, figures, notes int
	}{{0, 8 * n, 0}, {AllFigureRecordings, 8 * n, 0}, {NoFigureRecordings, 0, n}, {n + 5, 8 * n, 0}} {
		var buf bytes.Buffer
		if _, err := Write(&buf, dir, BuildOptions{FigureRecordings: c.limit}); err != nil {
			t.Fatal(err)
		}
		page := buf.String()
		secs := sections(page)
		figs := 0
		for _, s := range secs {
			figs += strings.Count(s, "<figure>")
		}
		notes := strings.Count(page, "This page does not draw the figures")
		top := strings.Contains(page, "figures are drawn in this page") || strings.Contains(page, "Figures are drawn for the first")
		if len(secs) != n || figs != c.figures || notes != c.notes || top != (c.notes > 0) {
			t.Errorf("FigureRecordings %d: %d sections, %d figures, %d notes, top note %v; want %d, %d, %d", c.limit, len(secs), figs, notes, top, n, c.figures, c.notes)
		}
	}
	// The default counts trial x array pairs (the index rows) from the
	// first recording: 5,000 recordings of one trial and two arrays give
	// 100, of three trials 33; a first recording above the budget is
	// drawn all the same; an unindexed one counts as one pair.
	same := func(n, c int) []int {
		p := make([]int, n)
		for i := range p {
			p[i] = c
		}
		return p
	}
	for _, c := range []struct {
		pairs []int
		want  int
	}{
		{same(5000, 2), DefaultFigureTrialArrays / 2},
		{same(5000, 6), DefaultFigureTrialArrays / 6},
		{same(3, 6), 3},
		{append([]int{DefaultFigureTrialArrays + 1}, same(10, 1)...), 1},
		{same(DefaultFigureTrialArrays+7, 0), DefaultFigureTrialArrays},
	} {
		if got := figureLimit(BuildOptions{}, c.pairs); got != c.want {
			t.Errorf("default limit on %d recordings of %d pairs (first %d): %d, want %d", len(c.pairs), c.pairs[len(c.pairs)-1], c.pairs[0], got, c.want)
		}
	}
	if got := figureLimit(BuildOptions{FigureRecordings: 7}, same(5000, 6)); got != 7 {
		t.Errorf("--figures 7: %d", got)
	}
}

// TestPlotCommandQuotes: paths a shell would split or read as an option
// are quoted or made relative to ./ (POSIX shell quoting, from memory).
func TestPlotCommandQuotes(t *testing.T) {
	for _, c := range []struct{ dir, rel, want string }{
		{"study", "a/b.h5", "muarc plot study/a/b.h5 -o figures/a/b"},
		{"my study", "s 1/it's.hdf5", `muarc plot 'my study/s 1/it'\''s.hdf5' -o 'figures/s 1/it'\''s'`},
		{"-x", "r.h5", "muarc plot ./-x/r.h5 -o figures/r"},
	} {
		if got := PlotCommand(c.dir, c.rel); got != c.want {
			t.Errorf("PlotCommand(%q, %q) = %s, want %s", c.dir, c.rel, got, c.want)
		}
	}
}

// TestStudyFigureSubjectLimit: a muscle's study figure comes in parts of
// plot.StudySubjectsPerFigure subjects; the page draws the parts of its
// first MaxStudyFigureSubjects subjects and, in place of the others, a
// sentence naming how many subjects and parts and the commands that draw
// and list them; a muscle with few subjects is drawn whole, in the order
// of the rows.
func TestStudyFigureSubjectLimit(t *testing.T) {
	res := &study.Result{Sources: []study.Source{{File: "x.h5"}}}
	add := func(muscle string, subjects int) {
		for s := range subjects {
			for _, rel := range study.Relations {
				res.Rows = append(res.Rows, study.SubjectRow{Subject: fmt.Sprintf("S%03d", s), Muscle: muscle, LevelPct: 30, Relation: rel,
					Points: [][2]float64{{5, 10}, {10, 12}, {15, 13}}, Fit: study.FitLine([]float64{5, 10, 15}, []float64{10, 12, 13})})
			}
		}
	}
	per := plot.StudySubjectsPerFigure
	add("soleus", MaxStudyFigureSubjects+per+5) // 30 drawn, then 2 parts left out
	add("tibialis anterior", 3)
	figs := studyFigures(res, "my study")
	drawn := MaxStudyFigureSubjects / per
	if len(figs) != drawn+2 {
		t.Fatalf("%d figures, want %d drawn soleus parts, a note and tibialis anterior", len(figs), drawn)
	}
	var page bytes.Buffer
	for i := range figs {
		if err := writeFigure(&page, &figs[i]); err != nil {
			t.Fatal(err)
		}
	}
	for k := range drawn {
		want := fmt.Sprintf("soleus (subjects S%03d to S%03d, part %d of %d):", k*per, k*per+per-1, k+1, drawn+2)
		if figs[k].draw == nil || figs[k].LeftOut != "" || !strings.HasPrefix(figs[k].Caption, want) {
			t.Errorf("soleus part %d: %+v, want caption %q", k+1, figs[k], want)
		}
	}
	note := figs[drawn]
	want := fmt.Sprintf("The study figures of soleus for its other %d subjects (from subject S%03d on, 2 more parts of up to %d subjects) are not drawn in this page, which shows the first %d subjects", per+5, MaxStudyFigureSubjects, per, MaxStudyFigureSubjects)
	if note.draw != nil || !strings.Contains(note.LeftOut, want) || !strings.Contains(note.LeftOut, "muarc stats 'my study' --write draws every part") || !strings.Contains(note.LeftOut, "muarc stats 'my study' lists each subject's line") {
		t.Errorf("soleus note: %+v", note)
	}
	if f := figs[drawn+1]; f.draw == nil || f.LeftOut != "" || !strings.HasPrefix(f.Caption, "tibialis anterior:") {
		t.Errorf("tibialis anterior: %+v", f)
	}
	if got := page.String(); strings.Count(got, "<svg") != drawn+1 || !strings.Contains(got, `<p class="note left-out">`+want) {
		t.Errorf("page part:\n%.600s", got)
	}
}

// trialArrays finds each recording's index rows by its path: copies of
// one recording hold the same number of trial x array pairs, the rows of
// archive.Index over the folder divided among them.
func TestTrialArraysFromIndexRows(t *testing.T) {
	dir, _ := copiesFolder(t, 3)
	files, _, err := archive.FindRecordings(dir)
	if err != nil {
		t.Fatal(err)
	}
	rows, err := archive.Index(dir, archive.AnyLevel())
	if err != nil {
		t.Fatal(err)
	}
	pairs := trialArrays(files, rows)
	if len(files) != 3 || len(rows)%3 != 0 || len(rows) < 3 {
		t.Fatalf("%d files, %d rows", len(files), len(rows))
	}
	for i, p := range pairs {
		if p != len(rows)/3 {
			t.Errorf("%s: %d pairs, want %d", files[i], p, len(rows)/3)
		}
	}
}
