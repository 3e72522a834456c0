package report

import (
	"bytes"
	"encoding/base64"
	"errors"
	"fmt"
	"html/template"
	"image/png"
	"io"
	"strconv"
	"strings"
)

// KV is a labelled value, e.g. {"speed of sound", "1538 m/s (95 % interval 1531 to 1545 m/s)"}.
type KV struct{ Key, Value string }

// Figure is a PNG image with its caption. Alt describes the image for readers
// who cannot see it; when empty, the caption serves.
type Figure struct {
	Caption string
	PNG     []byte
	Alt     string
}

// Table is a table of text cells with an optional header row and notes shown
// below it. Cells that parse as numbers are right-aligned.
type Table struct {
	Caption string
	Header  []string
	Rows    [][]string
	Notes   []string
}

// Section is a titled part of a report; its parts are shown in field order.
type Section struct {
	Title      string
	Paragraphs []string
	KVs        []KV
	Tables     []Table
	Figures    []Figure
}

// Report is the content of an HTML report. Every field may be left empty.
type Report struct {
	Title    string
	Subtitle string
	// Caution is shown in a marked box at the top and repeated in the
	// footer. Empty means DefaultCaution.
	Caution string
	// Summary holds the headline numbers, shown prominently near the top.
	Summary []KV
	// Inputs says what was read (folder, probe, sequence, sizes), Settings
	// how it was run.
	Inputs   []KV
	Settings []KV
	Sections []Section
	// Footer is a line at the bottom, e.g. the tool version and a date. The
	// report shows what it is given and reads no clock, so that the same
	// report gives the same bytes.
	Footer string
}

// DefaultCaution is the caution shown when a Report leaves Caution empty.
const DefaultCaution = "celerity is a research and quality-assurance tool, not a medical device, " +
	"and is not for diagnosis or treatment decisions; simulated data only approximate real tissue. " +
	"Follow your institution, local regulations and licensed practitioners."

// defaultTitle names a report that has no title, since an HTML document needs
// one.
const defaultTitle = "celerity report"

// HTML writes r to w as a single self-contained HTML5 document: the style
// sheet is inline, figures are embedded as data:image/png;base64 URIs, and
// there are no scripts, fonts or references to anything outside the file, so
// that it can be mailed, archived and opened offline. All text is escaped and
// shown as text; a URL in a text field stays plain text, not a link.
//
// Empty parts are left out: KVs with neither key nor value, tables without
// rows, zero Figures, and sections with nothing left to show. A Figure with a
// caption or alt text but no PNG bytes, or bytes that are not a PNG, is an
// error that names it; a table row whose cell count differs from the header's
// is an error wrapping ErrLength. On error nothing is written to w.
func HTML(w io.Writer, r Report) error {
	p, err := newHTMLPage(r)
	if err != nil {
		return err
	}
	var buf bytes.Buffer
	if err := htmlTemplate.Execute(&buf, p); err != nil {
		return fmt.Errorf("report: HTML: %w", err)
	}
	if _, err := w.Write(buf.Bytes()); err != nil {
		return fmt.Errorf("report: writing HTML: %w", err)
	}
	return nil
}

// htmlPage is a Report made ready for the template: defaults filled in, empty
// parts dropped, figures encoded and tables and figures numbered.
type htmlPage struct {
	Title, Subtitle, Caution, Footer string
	Summary, Inputs, Settings        []KV
	Sections                         []htmlSection
	// Contents lists the sections with titles, when there are enough of
	// them for a table of contents to help.
	Contents []htmlSection
}

type htmlSection struct {
	ID, Title  string
	Paragraphs []string
	KVs        []KV
	Tables     []htmlTable
	Figures    []htmlFigure
}

type htmlTable struct {
	Number  int
	Caption string
	Header  []htmlCell
	Rows    [][]htmlCell
	Notes   []string
}

type htmlCell struct {
	Text string
	Num  bool
}

type htmlFigure struct {
	Number        int
	Caption, Alt  string
	Src           template.URL
	Width, Height int
}

// minContents is the number of titled sections from which a table of
// contents is shown; below it the sections are in view anyway.
const minContents = 3

// newHTMLPage checks r and converts it to an htmlPage.
func newHTMLPage(r Report) (*htmlPage, error) {
	p := &htmlPage{
		Title:    r.Title,
		Subtitle: r.Subtitle,
		Caution:  r.Caution,
		Footer:   r.Footer,
		Summary:  keepKVs(r.Summary),
		Inputs:   keepKVs(r.Inputs),
		Settings: keepKVs(r.Settings),
	}
	if blank(p.Title) {
		p.Title = defaultTitle
	}
	if blank(p.Caution) {
		p.Caution = DefaultCaution
	}
	var nTable, nFigure int
	for i, s := range r.Sections {
		name := fmt.Sprintf("section %d", i+1)
		if !blank(s.Title) {
			name = fmt.Sprintf("section %d (%q)", i+1, s.Title)
		}
		hs := htmlSection{
			ID:         fmt.Sprintf("section-%d", i+1),
			Title:      s.Title,
			Paragraphs: keepStrings(s.Paragraphs),
			KVs:        keepKVs(s.KVs),
		}
		for j, t := range s.Tables {
			if len(t.Rows) == 0 {
				continue
			}
			ht, err := newHTMLTable(t)
			if err != nil {
				return nil, fmt.Errorf("report: %s: table %d%s: %w", name, j+1, quoted(t.Caption), err)
			}
			nTable++
			ht.Number = nTable
			hs.Tables = append(hs.Tables, ht)
		}
		for j, f := range s.Figures {
			if f.PNG == nil && blank(f.Caption) && blank(f.Alt) {
				continue
			}
			hf, err := newHTMLFigure(f)
			if err != nil {
				return nil, fmt.Errorf("report: %s: figure %d%s: %w", name, j+1, quoted(f.Caption), err)
			}
			nFigure++
			hf.Number = nFigure
			hs.Figures = append(hs.Figures, hf)
		}
		if len(hs.Paragraphs)+len(hs.KVs)+len(hs.Tables)+len(hs.Figures) == 0 {
			continue
		}
		p.Sections = append(p.Sections, hs)
	}
	var titled []htmlSection
	for _, s := range p.Sections {
		if !blank(s.Title) {
			titled = append(titled, s)
		}
	}
	if len(titled) >= minContents {
		p.Contents = titled
	}
	return p, nil
}

// newHTMLTable checks the shape of t, which has rows, and marks its numeric
// cells. A header cell is marked numeric when every non-empty cell below it
// is, so that it lines up with its column.
func newHTMLTable(t Table) (htmlTable, error) {
	width := len(t.Header)
	if width == 0 {
		for _, row := range t.Rows {
			width = max(width, len(row))
		}
	}
	ht := htmlTable{Caption: t.Caption, Notes: keepStrings(t.Notes)}
	numeric := make([]bool, width)
	seen := make([]bool, width)
	for i := range numeric {
		numeric[i] = true
	}
	for i, row := range t.Rows {
		if len(t.Header) > 0 && len(row) != width {
			return htmlTable{}, fmt.Errorf("%w: row %d has %d cells, the header %d", ErrLength, i+1, len(row), width)
		}
		cells := make([]htmlCell, width)
		for j, v := range row {
			cells[j] = htmlCell{Text: v, Num: isNumber(v)}
			if !blank(v) {
				seen[j] = true
				numeric[j] = numeric[j] && cells[j].Num
			}
		}
		ht.Rows = append(ht.Rows, cells)
	}
	for j, h := range t.Header {
		ht.Header = append(ht.Header, htmlCell{Text: h, Num: seen[j] && numeric[j]})
	}
	return ht, nil
}

// newHTMLFigure checks that f holds a PNG and encodes it as a data URI.
func newHTMLFigure(f Figure) (htmlFigure, error) {
	if len(f.PNG) == 0 {
		return htmlFigure{}, errors.New("no PNG data")
	}
	cfg, err := png.DecodeConfig(bytes.NewReader(f.PNG))
	if err != nil {
		return htmlFigure{}, fmt.Errorf("not a PNG: %w", err)
	}
	alt := f.Alt
	if blank(alt) {
		alt = f.Caption
	}
	return htmlFigure{
		Caption: f.Caption,
		Alt:     alt,
		// The bytes are base64 of our own encoding, so the URI is safe as it
		// stands; html/template would otherwise refuse the data: scheme.
		Src:    template.URL("data:image/png;base64," + base64.StdEncoding.EncodeToString(f.PNG)),
		Width:  cfg.Width,
		Height: cfg.Height,
	}, nil
}

// isNumber reports whether the cell s reads as a number: a Go float literal,
// e.g. "1540", "-3.5", "1e-3", "NaN", with surrounding space and a leading
// typographic minus sign (U+2212) allowed. Values with units ("12 %") are
// text.
func isNumber(s string) bool {
	s = strings.TrimSpace(s)
	if rest, ok := strings.CutPrefix(s, "\u2212"); ok {
		s = "-" + rest
	}
	if s == "" {
		return false
	}
	_, err := strconv.ParseFloat(s, 64)
	// A literal out of float64's range is still a number.
	return err == nil || errors.Is(err, strconv.ErrRange)
}

// keepKVs returns kvs without the pairs that have neither key nor value.
func keepKVs(kvs []KV) []KV {
	var out []KV
	for _, kv := range kvs {
		if !blank(kv.Key) || !blank(kv.Value) {
			out = append(out, kv)
		}
	}
	return out
}

// keepStrings returns ss without its blank strings.
func keepStrings(ss []string) []string {
	var out []string
	for _, s := range ss {
		if !blank(s) {
			out = append(out, s)
		}
	}
	return out
}

// blank reports whether s has nothing but white space.
func blank(s string) bool { return strings.TrimSpace(s) == "" }

// quoted returns " (%q)" of s for error messages, or "" when s is blank.
func quoted(s string) string {
	if blank(s) {
		return ""
	}
	return fmt.Sprintf(" (%q)", s)
}

var htmlTemplate = template.Must(template.New("report").Parse(htmlSource))

// htmlSource is the page. The palette is dark text on white with one accent
// (a muted steel blue) for rules and headings; the caution box alone uses an
// amber tint, so that a warning never reads as decoration. Fonts are the
// reader's system fonts, so nothing is fetched.
const htmlSource = `<!DOCTYPE html>
<html lang="en">
<head>
<meta charset="utf-8">
<meta name="viewport" content="width=device-width, initial-scale=1">
<meta name="generator" content="celerity">
<title>{{.Title}}</title>
<style>
:root {
  color-scheme: light;
  --text: #1c2228;
  --muted: #56616c;
  --rule: #d8dde2;
  --zebra: #f3f5f7;
  --accent: #1f5a85;
  --warn-bg: #fdf5e1;
  --warn-edge: #b7791f;
  --warn-line: #ead7a6;
}
*, *::before, *::after { box-sizing: border-box; }
html { -webkit-text-size-adjust: 100%; text-size-adjust: 100%; }
body {
  margin: 0;
  background: #fff;
  color: var(--text);
  font: 15px/1.5 system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, "Noto Sans", "Liberation Sans", "DejaVu Sans", sans-serif;
}
.page { max-width: 1100px; margin: 0 auto; padding: 2rem 1.5rem 2.5rem; }
header.top { border-bottom: 3px solid var(--accent); padding-bottom: .8rem; margin-bottom: 1.25rem; }
h1 { font-size: 1.8rem; line-height: 1.2; margin: 0; font-weight: 650; letter-spacing: -.01em; }
.subtitle { margin: .35rem 0 0; color: var(--muted); font-size: 1.05rem; }
h2 {
  font-size: 1.3rem; line-height: 1.3; font-weight: 600; color: var(--accent);
  margin: 2.25rem 0 .8rem; padding-bottom: .3rem; border-bottom: 1px solid var(--rule);
}
h2.minor {
  font-size: .78rem; line-height: 1.5; border: 0; padding: 0; font-weight: 600; text-transform: uppercase; letter-spacing: .07em;
  color: var(--muted); margin: 0 0 .55rem;
}
p { margin: 0 0 .8rem; max-width: 75ch; }
.caution {
  margin: 0 0 1.5rem; padding: .7rem 1rem;
  background: var(--warn-bg); border: 1px solid var(--warn-line); border-left: 5px solid var(--warn-edge);
  border-radius: 3px;
}
.caution p { margin: 0; max-width: none; }
.caution-label { font-weight: 700; color: #7a4f0e; text-transform: uppercase; letter-spacing: .06em; font-size: .82rem; margin-right: .4rem; }
dl { margin: 0; }
.summary { margin: 0 0 1.75rem; }
.cards { display: grid; grid-template-columns: repeat(auto-fit, minmax(230px, 1fr)); gap: .8rem; }
.card { border: 1px solid var(--rule); border-top: 3px solid var(--accent); border-radius: 3px; padding: .7rem .95rem .8rem; }
.card dt { font-size: .85rem; color: var(--muted); }
.card dd { margin: .15rem 0 0; font-size: 1.4rem; line-height: 1.25; font-weight: 600; font-variant-numeric: tabular-nums; overflow-wrap: anywhere; }
.meta { display: grid; grid-template-columns: repeat(auto-fit, minmax(320px, 1fr)); gap: 1.25rem 2.5rem; margin: 0 0 .5rem; }
.kv { display: grid; grid-template-columns: minmax(8rem, max-content) 1fr; gap: .3rem 1.25rem; font-size: .95rem; }
.kv dt { color: var(--muted); }
.kv dd { margin: 0; overflow-wrap: anywhere; font-variant-numeric: tabular-nums; }
section > .kv { margin: 0 0 1rem; }
nav.contents { margin: 1.75rem 0 0; font-size: .95rem; }
nav.contents ol { margin: 0; padding-left: 1.4rem; }
nav.contents li { margin: .1rem 0; }
nav.contents a { color: var(--accent); text-decoration: none; }
nav.contents a:hover { text-decoration: underline; }
.table { margin: 1.1rem 0 1.6rem; overflow-x: auto; }
table { border-collapse: collapse; font-size: .93rem; font-variant-numeric: tabular-nums; min-width: 50%; }
caption { caption-side: top; text-align: left; padding: 0 0 .45rem; }
th, td { padding: .36rem .8rem; text-align: left; vertical-align: top; }
thead th { font-weight: 600; border-bottom: 2px solid var(--accent); white-space: nowrap; }
tbody tr { border-bottom: 1px solid var(--rule); }
tbody tr:nth-child(even) { background: var(--zebra); }
th.num, td.num { text-align: right; }
.notes { margin: .45rem 0 0; padding: 0; list-style: none; font-size: .85rem; color: var(--muted); }
.notes li { margin: .1rem 0; }
figure { margin: 1.25rem 0 1.9rem; }
figure img { display: block; max-width: 100%; height: auto; }
figcaption, caption { font-size: .9rem; color: var(--muted); }
figcaption { margin-top: .45rem; max-width: 75ch; }
.label { font-weight: 600; color: var(--text); margin-right: .3rem; }
footer { margin-top: 3rem; padding-top: .9rem; border-top: 1px solid var(--rule); font-size: .85rem; color: var(--muted); }
footer p { margin: 0 0 .4rem; max-width: none; }
@page { margin: 15mm; }
@media print {
  html { font-size: 11pt; }
  body { font-size: 10pt; }
  .page { max-width: none; padding: 0; }
  nav.contents { display: none; }
  h2 { break-after: avoid; page-break-after: avoid; }
  figure, .table, .card, .caution, tr { break-inside: avoid; page-break-inside: avoid; }
  .table { overflow: visible; }
  * { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
}
</style>
</head>
<body>
<div class="page">
<header class="top">
<h1>{{.Title}}</h1>
{{- with .Subtitle}}
<p class="subtitle">{{.}}</p>
{{- end}}
</header>
<aside class="caution" aria-label="Caution"><p><span class="caution-label">Caution</span> {{.Caution}}</p></aside>
<main>
{{- with .Summary}}
<section class="summary" aria-label="Summary">
<dl class="cards">
{{- range .}}
<div class="card"><dt>{{.Key}}</dt><dd>{{.Value}}</dd></div>
{{- end}}
</dl>
</section>
{{- end}}
{{- if or .Inputs .Settings}}
<div class="meta">
{{- with .Inputs}}
<section aria-label="Inputs">
<h2 class="minor">Inputs</h2>
{{template "kv" .}}
</section>
{{- end}}
{{- with .Settings}}
<section aria-label="Settings">
<h2 class="minor">Settings</h2>
{{template "kv" .}}
</section>
{{- end}}
</div>
{{- end}}
{{- with .Contents}}
<nav class="contents" aria-label="Contents">
<h2 class="minor">Contents</h2>
<ol>
{{- range .}}
<li><a href="#{{.ID}}">{{.Title}}</a></li>
{{- end}}
</ol>
</nav>
{{- end}}
{{- range .Sections}}
<section id="{{.ID}}">
{{- with .Title}}
<h2>{{.}}</h2>
{{- end}}
{{- range .Paragraphs}}
<p>{{.}}</p>
{{- end}}
{{- with .KVs}}
{{template "kv" .}}
{{- end}}
{{- range .Tables}}
<div class="table">
<table>
<caption><span class="label">Table {{.Number}}.</span> {{.Caption}}</caption>
{{- with .Header}}
<thead><tr>
{{- range .}}<th scope="col"{{if .Num}} class="num"{{end}}>{{.Text}}</th>{{end -}}
</tr></thead>
{{- end}}
<tbody>
{{- range .Rows}}
<tr>{{range .}}<td{{if .Num}} class="num"{{end}}>{{.Text}}</td>{{end}}</tr>
{{- end}}
</tbody>
</table>
{{- with .Notes}}
<ul class="notes">
{{- range .}}
<li>{{.}}</li>
{{- end}}
</ul>
{{- end}}
</div>
{{- end}}
{{- range .Figures}}
<figure>
<img src="{{.Src}}" alt="{{.Alt}}" width="{{.Width}}" height="{{.Height}}">
<figcaption><span class="label">Figure {{.Number}}.</span> {{.Caption}}</figcaption>
</figure>
{{- end}}
</section>
{{- end}}
</main>
<footer>
{{- with .Footer}}
<p>{{.}}</p>
{{- end}}
<p class="caution-note"><span class="label">Caution.</span> {{.Caution}}</p>
</footer>
</div>
</body>
</html>
{{define "kv"}}<dl class="kv">
{{- range .}}
<dt>{{.Key}}</dt><dd>{{.Value}}</dd>
{{- end}}
</dl>{{end}}`
