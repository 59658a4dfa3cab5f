// Package report renders a study's one-page HTML report: an index of the
// recordings, the validation summary of each, its derived unit figures and
// its figures inline as SVG (for the first BuildOptions.FigureRecordings
// recordings; the others' sections name the command that draws them), and
// the data dictionary. The page is
// self-contained: styles are inline, figures are inline SVG, there are no
// scripts and no links to load, so it renders the same with no network.
package report

import (
	"bytes"
	"fmt"
	"html/template"
	"io"
	"regexp"
)

// Page is everything the report shows.
type Page struct {
	Title string
	// Generated is when the report was made (RFC 3339); Software what made
	// it; Folder the study folder as given.
	Generated, Software, Folder string
	// Notes are page-level remarks (what was left out, and why).
	Notes      []string
	Index      Table
	Recordings []Section
	// Study is the study-level rate-versus-threshold analysis
	// (analysis/study): its summary table and its figures per muscle.
	Study        Table
	StudyFigures []Figure
	// Derived explains the figures the report derives (see analysis).
	Derived    Table
	Dictionary Table
}

// Table is a captioned table of text cells.
type Table struct {
	Caption string
	Columns []string
	Rows    [][]string
	// Empty is shown instead of the table when it has no rows.
	Empty string
}

// Section is one recording.
type Section struct {
	// File is the path relative to the study folder.
	File string
	// Status is a short verdict: "valid", "valid with warnings", "invalid"
	// or "could not read"; Class its style ("ok", "warn", "bad").
	Status, Class string
	Summary       string
	Validation    Table
	Stats         Table
	Notes         []string
	Figures       []Figure
	// PlotCommand, when not empty, is the command that draws this
	// recording's figures, which the page does not hold
	// (BuildOptions.FigureRecordings); the section says so.
	PlotCommand string
}

// Figure is one inline SVG drawing with its caption.
type Figure struct {
	Caption string
	// SVG is the drawing as produced by analysis/plot (an XML prolog is
	// stripped when inlined).
	SVG []byte
	// LeftOut, when not empty, says in words why the figure is not drawn
	// and what gives its content; the page shows it in its place.
	LeftOut string
	// draw, when set, writes the drawing instead of SVG: the study
	// figures are drawn straight into the page.
	draw func(io.Writer) error
}

var prolog = regexp.MustCompile(`^\s*(<\?xml[^>]*\?>\s*)?(<!--.*?-->\s*)*`)

// inline returns svg as trusted HTML without its XML prolog and comments,
// its path data written shorter (compactSVG). The SVG comes from our own
// plot package, never from a file being reported on.
func inline(svg []byte) template.HTML {
	return template.HTML(compactSVG(prolog.ReplaceAll(svg, nil)))
}

// Render writes the page as one HTML document.
func Render(w io.Writer, p *Page) error {
	var buf bytes.Buffer
	if err := renderHead(&buf, p); err != nil {
		return err
	}
	for i := range p.Recordings {
		if err := renderSection(&buf, i, &p.Recordings[i]); err != nil {
			return err
		}
	}
	if err := renderTail(&buf, p); err != nil {
		return err
	}
	_, err := w.Write(buf.Bytes())
	return err
}

// The page is written in three parts, so that Write can send each
// recording's section out as soon as it is made: the head (through the
// list of recordings, which needs only their file names), one section per
// recording, and the tail.

func renderHead(w io.Writer, p *Page) error {
	if err := execute(w, "head", p); err != nil {
		return err
	}
	for i := range p.StudyFigures {
		if err := writeFigure(w, &p.StudyFigures[i]); err != nil {
			return err
		}
	}
	return execute(w, "nav", p)
}

// writeFigure writes one figure of the page, its drawing streamed through
// an inlineWriter.
func writeFigure(w io.Writer, f *Figure) error {
	if f.LeftOut != "" {
		return execute(w, "figure-left-out", f)
	}
	if _, err := io.WriteString(w, "<figure>"); err != nil {
		return err
	}
	iw := &inlineWriter{w: w}
	var err error
	if f.draw != nil {
		err = f.draw(iw)
	} else {
		_, err = iw.Write(f.SVG)
	}
	if err == nil {
		err = iw.Close()
	}
	if err != nil {
		return fmt.Errorf("report: figure %q: %w", f.Caption, err)
	}
	return execute(w, "figcaption", f)
}

// inlineWriter passes an SVG document on as inline would (without its
// prolog, path data shortened), a line at a time: the canvas writes one
// element per line and path data never spans lines.
type inlineWriter struct {
	w       io.Writer
	pending []byte // an incomplete line, or the document before "<svg"
	started bool   // the prolog has been dropped
}

func (iw *inlineWriter) Write(b []byte) (int, error) {
	data := b
	if len(iw.pending) > 0 {
		data = append(iw.pending, b...)
	}
	if !iw.started {
		i := bytes.Index(data, []byte("<svg"))
		if i < 0 {
			iw.pending = append(iw.pending[:0], data...)
			return len(b), nil
		}
		if _, err := iw.w.Write(prolog.ReplaceAll(data[:i], nil)); err != nil {
			return 0, err
		}
		data, iw.started = data[i:], true
	}
	for {
		j := bytes.IndexByte(data, '\n')
		if j < 0 {
			break
		}
		if _, err := iw.w.Write(compactSVG(data[:j+1])); err != nil {
			return 0, err
		}
		data = data[j+1:]
	}
	iw.pending = append(iw.pending[:0:0], data...)
	return len(b), nil
}

// Close writes what is left.
func (iw *inlineWriter) Close() error {
	rest := iw.pending
	if !iw.started {
		rest = prolog.ReplaceAll(rest, nil)
	}
	_, err := iw.w.Write(compactSVG(rest))
	iw.pending, iw.started = nil, true
	return err
}

func renderSection(w io.Writer, i int, s *Section) error {
	return execute(w, "section", sectionView{I: i, R: s})
}

func renderTail(w io.Writer, p *Page) error { return execute(w, "tail", p) }

func execute(w io.Writer, name string, data any) error {
	if err := pageTemplate.ExecuteTemplate(w, name, data); err != nil {
		return fmt.Errorf("report: %w", err)
	}
	return nil
}

// sectionView is a section with its place in the page (its anchor).
type sectionView struct {
	I int
	R *Section
}

var pageTemplate = template.Must(template.New("page").Funcs(template.FuncMap{"inline": inline}).Parse(`{{define "head"}}<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<title>{{.Title}}</title>
<style>
body{font-family:"Liberation Sans",Arial,Helvetica,sans-serif;margin:1.5em auto;max-width:78em;padding:0 1em;color:#1a1a1a;line-height:1.4}
h1{font-size:1.6em;margin-bottom:.2em}h2{font-size:1.3em;border-bottom:2px solid #c8d3e6;padding-bottom:.2em;margin-top:2em}
h3{font-size:1.1em;margin-top:1.4em}
.meta{color:#555;font-size:.9em}
table{border-collapse:collapse;margin:.6em 0 1em;font-size:.85em}
caption{text-align:left;font-weight:bold;padding:.3em 0}
th,td{border:1px solid #ccd;padding:.25em .5em;text-align:left;vertical-align:top}
th{background:#eef2f8}
tr:nth-child(even) td{background:#fafbfd}
.status{display:inline-block;padding:.1em .6em;border-radius:.8em;font-weight:bold;font-size:.85em}
.ok{background:#dff3e0;color:#1d5e22}.warn{background:#fff2cc;color:#7a5a00}.bad{background:#fbdcdc;color:#8a1c1c}
figure{margin:1em 0;border:1px solid #dde;padding:.5em;background:#fff}
figure svg{max-width:100%;height:auto;display:block}
figcaption{font-size:.85em;color:#444;margin-top:.3em}
nav ul{columns:3;font-size:.9em}
.note{font-size:.85em;color:#555}
</style>
</head>
<body>
<h1>{{.Title}}</h1>
<p class="meta">Study folder {{.Folder}} · made {{.Generated}} by {{.Software}} · one page, no network needed.</p>
{{range .Notes}}<p class="note">{{.}}</p>
{{end}}
<p class="note">This report shows what the files hold. Before a study is shared, the
ethics board, the consent given and local data-protection law decide what may leave the
lab; muarc helps to de-identify, it does not certify that a file is anonymous.</p>
<h2 id="index">Recordings</h2>
{{template "table" .Index}}
{{if or .Study.Rows .StudyFigures}}<h2 id="study">Rate against recruitment threshold, across subjects</h2>
{{template "table" .Study}}
{{end}}{{end}}{{define "figure-left-out"}}<p class="note left-out">{{.LeftOut}}</p>
{{end}}{{define "figcaption"}}<figcaption>{{.Caption}}</figcaption></figure>
{{end}}{{define "nav"}}
{{if .Recordings}}<nav><ul>{{range $i, $r := .Recordings}}<li><a href="#rec-{{$i}}">{{$r.File}}</a></li>{{end}}</ul></nav>{{end}}
{{end}}{{define "section"}}
<section id="rec-{{.I}}" class="recording">
<h2>{{.R.File}} <span class="status {{.R.Class}}">{{.R.Status}}</span></h2>
{{if .R.Summary}}<p>{{.R.Summary}}</p>{{end}}
{{template "table" .R.Validation}}
{{template "table" .R.Stats}}
{{range .R.Notes}}<p class="note">{{.}}</p>
{{end}}
{{range .R.Figures}}<figure>{{inline .SVG}}<figcaption>{{.Caption}}</figcaption></figure>
{{end}}{{with .R.PlotCommand}}<p class="note left-out">This page does not draw the figures of this recording (see the note at the top). To draw them: <code>{{.}}</code></p>
{{end}}
</section>
{{end}}{{define "tail"}}
<h2 id="derived">Derived figures</h2>
{{template "table" .Derived}}
<h2 id="dictionary">Data dictionary</h2>
{{template "table" .Dictionary}}
</body>
</html>
{{end}}{{define "table"}}{{if .Rows}}<table>{{if .Caption}}<caption>{{.Caption}}</caption>{{end}}
<thead><tr>{{range .Columns}}<th>{{.}}</th>{{end}}</tr></thead>
<tbody>{{range .Rows}}<tr>{{range .}}<td>{{.}}</td>{{end}}</tr>
{{end}}</tbody></table>{{else if .Empty}}<p class="note">{{if .Caption}}{{.Caption}}: {{end}}{{.Empty}}</p>{{end}}{{end}}
`))
