package report

import (
	"bytes"
	"context"
	"encoding/base64"
	"errors"
	"flag"
	"html"
	"image"
	"image/color"
	"image/png"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"strconv"
	"strings"
	"testing"
	"time"
)

var htmlShotDir = flag.String("html-shot-dir", "", "copy the Chromium test's HTML and screenshot into this folder, to look at")

// tinyPNG reads testdata/html_tiny.png, a 24 x 16 pixel PNG (blue left half,
// orange right half) stored as a file so that the golden HTML does not depend
// on the PNG encoder of the Go release.
func tinyPNG(t *testing.T) []byte {
	t.Helper()
	b, err := os.ReadFile(filepath.Join("testdata", "html_tiny.png"))
	if err != nil {
		t.Fatal(err)
	}
	return b
}

// solidPNG encodes a w x h PNG filled with c.
func solidPNG(t *testing.T, w, h int, c color.NRGBA) []byte {
	t.Helper()
	img := image.NewNRGBA(image.Rect(0, 0, w, h))
	for i := 0; i < len(img.Pix); i += 4 {
		img.Pix[i], img.Pix[i+1], img.Pix[i+2], img.Pix[i+3] = c.R, c.G, c.B, c.A
	}
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		t.Fatal(err)
	}
	return buf.Bytes()
}

// sampleReport is a report with every kind of part, some of them empty, and
// the given figures in its sections (the first in the first section).
func sampleReport(figs ...[]byte) Report {
	r := Report{
		Title:    "Speed of sound: phantom 042",
		Subtitle: "Plane-wave acquisition, 11 angles, linear array",
		Caution:  "Research use only: not a medical device & not for diagnosis or treatment decisions.",
		Summary: []KV{
			{"Speed of sound", "1538 m/s"},
			{"95 % interval", "1531 to 1545 m/s"},
			{"Confidence", "high: one sharp focus peak"},
			{"Aberration, RMS", "12.4 ns"},
		},
		Inputs: []KV{
			{"Folder", "phantom-042/"},
			{"Probe", "linear, 128 elements, 0.30 mm pitch, 5.2 MHz"},
			{"Sequence", "plane wave, 11 angles from \u221210\u00b0 to 10\u00b0"},
			{"Channel data", "RF float32, 11 \u00d7 128 \u00d7 2048 samples"},
			{"", ""},
		},
		Settings: []KV{
			{"Speeds swept", "1420 to 1620 m/s in 5 m/s steps"},
			{"Focus criterion", "speckle brightness"},
			{"Receive F-number", "1.5, Tukey window (0.5)"},
		},
		Sections: []Section{
			{
				Title: "Speed of sound",
				Paragraphs: []string{
					"The bulk speed of sound is the assumed speed that maximises the focus criterion over the region of interest.",
					"  ",
				},
				Tables: []Table{
					{
						Caption: "Speed of sound by depth",
						Header:  []string{"Depth (mm)", "Speed (m/s)", "Interval (m/s)", "Note"},
						Rows: [][]string{
							{"10", "1536.2", "1528 to 1544", "near field"},
							{"20", "1538.9", "1532 to 1546", ""},
							{"30", "1539.4", "1531 to 1548", "fewer scatterers"},
							{"40", "\u22121", "", "no estimate"},
						},
						Notes: []string{"Intervals are 95 % bootstrap intervals."},
					},
					{Caption: "an empty table", Header: []string{"a", "b"}},
				},
			},
			{Title: "An empty section", Paragraphs: []string{""}, Tables: []Table{{}}, Figures: []Figure{{}}},
			{
				Title: "Image quality before and after",
				KVs:   []KV{{"Region", "x \u221210 to 10 mm, depth 5 to 40 mm"}},
				Tables: []Table{{
					Header: []string{"Metric", "Before", "After", "Change"},
					Rows: [][]string{
						{"Lateral resolution (mm)", "0.61", "0.48", "\u22120.13"},
						{"gCNR", "0.82", "0.91", "+0.09"},
						{"Coherence factor", "0.34", "0.41", "+0.07"},
					},
				}},
			},
			{Title: "Aberration", Paragraphs: []string{"Residual arrival-time errors across the array after the bulk correction."}},
		},
		Footer: "celerity 0.1.0, 2025-01-01",
	}
	captions := []string{"Focus criterion against the assumed speed of sound", "Before and after", "Arrival-time error profile"}
	sec := []int{0, 2, 3}
	for i, b := range figs {
		s := &r.Sections[sec[i%len(sec)]]
		s.Figures = append(s.Figures, Figure{Caption: captions[i%len(captions)], PNG: b})
	}
	return r
}

// render runs HTML on r and returns its output as a string.
func render(t *testing.T, r Report) string {
	t.Helper()
	var buf bytes.Buffer
	if err := HTML(&buf, r); err != nil {
		t.Fatal(err)
	}
	return buf.String()
}

// between returns the text of s from the first occurrence of start to the
// following end, or fails the test.
func between(t *testing.T, s, start, end string) string {
	t.Helper()
	_, after, ok := strings.Cut(s, start)
	if !ok {
		t.Fatalf("no %q in the output", start)
	}
	in, _, ok := strings.Cut(after, end)
	if !ok {
		t.Fatalf("no %q after %q in the output", end, start)
	}
	return in
}

func TestHTMLCaution(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name, caution, want string
	}{
		{"given", "Not for clinical use <ever> & nowhere.", "Not for clinical use &lt;ever&gt; &amp; nowhere."},
		{"default", "", html.EscapeString(DefaultCaution)},
		{"blank", " \n ", html.EscapeString(DefaultCaution)},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			r := sampleReport(tinyPNG(t))
			r.Caution = tc.caution
			out := render(t, r)
			top := between(t, out, `<aside class="caution"`, "</aside>")
			if !strings.Contains(top, tc.want) {
				t.Errorf("caution box %q does not contain %q", top, tc.want)
			}
			if i, j := strings.Index(out, "<aside"), strings.Index(out, "<main>"); i > j {
				t.Errorf("caution box at byte %d, after the start of the main content at %d", i, j)
			}
			foot := between(t, out, "<footer>", "</footer>")
			if !strings.Contains(foot, tc.want) {
				t.Errorf("footer %q does not contain %q", foot, tc.want)
			}
			if !strings.Contains(foot, "celerity 0.1.0, 2025-01-01") {
				t.Errorf("footer %q lacks the footer text", foot)
			}
		})
	}
}

func TestHTMLEscaping(t *testing.T) {
	t.Parallel()
	const evil = `<script>alert("x")</script> & <b>bold</b>`
	const escaped = `&lt;script&gt;alert(&#34;x&#34;)&lt;/script&gt; &amp; &lt;b&gt;bold&lt;/b&gt;`
	r := Report{
		Title:    evil,
		Subtitle: evil,
		Caution:  evil,
		Summary:  []KV{{evil, evil}},
		Inputs:   []KV{{evil, evil}},
		Sections: []Section{{
			Title:      evil,
			Paragraphs: []string{evil},
			Tables:     []Table{{Caption: evil, Header: []string{evil}, Rows: [][]string{{evil}}, Notes: []string{evil}}},
			Figures:    []Figure{{Caption: evil, Alt: evil, PNG: tinyPNG(t)}},
		}},
		Footer: evil,
	}
	out := render(t, r)
	for _, bad := range []string{"<script", "</script", "<b>", `"x"`} {
		if strings.Contains(out, bad) {
			t.Errorf("output contains %q unescaped", bad)
		}
	}
	// Title twice (title element, h1), subtitle, caution twice, summary and
	// input keys and values, section title, paragraph, table caption, header,
	// cell and note, figure caption and alt attribute, footer.
	const wantText = 2 + 1 + 2 + 2 + 2 + 1 + 1 + 4 + 2 + 1
	if n := strings.Count(out, escaped); n != wantText {
		t.Errorf("escaped text occurs %d times, want %d", n, wantText)
	}
	if !strings.Contains(out, `<title>`+escaped+`</title>`) {
		t.Errorf("title element not escaped as expected")
	}
	alt := between(t, out, `alt="`, `"`)
	if html.UnescapeString(alt) != evil {
		t.Errorf("alt attribute %q does not unescape to %q", alt, evil)
	}
}

// attrRE matches the attributes that can point at a resource.
var attrRE = regexp.MustCompile(`(?i)\s(src|href|srcset|action|poster|data)\s*=\s*"([^"]*)"`)

func TestHTMLSelfContained(t *testing.T) {
	t.Parallel()
	out := render(t, sampleReport(tinyPNG(t), tinyPNG(t), tinyPNG(t)))
	lower := strings.ToLower(out)
	for _, bad := range []string{"http://", "https://", "<script", "<link", "<iframe", "<object", "<embed", "@import", "url(", "@font-face"} {
		if strings.Contains(lower, bad) {
			t.Errorf("output contains %q", bad)
		}
	}
	for _, m := range attrRE.FindAllStringSubmatch(out, -1) {
		v := html.UnescapeString(m[2])
		if !strings.HasPrefix(v, "data:image/png;base64,") && !strings.HasPrefix(v, "#") {
			t.Errorf("%s=%q points outside the file", m[1], v)
		}
	}
	for _, want := range []string{"<!DOCTYPE html>", `<html lang="en">`, `<meta charset="utf-8">`, `<meta name="viewport" content="width=device-width, initial-scale=1">`, "<style>", "@media print", "max-width: 1100px", "max-width: 100%"} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q", want)
		}
	}
}

// imgSrcRE captures the src attribute of every img element.
var imgSrcRE = regexp.MustCompile(`<img[^>]*\ssrc="([^"]*)"`)

func TestHTMLFigureRoundTrip(t *testing.T) {
	t.Parallel()
	figs := [][]byte{
		tinyPNG(t),
		solidPNG(t, 300, 200, color.NRGBA{R: 0xc0, G: 0x1f, B: 0x7a, A: 0xff}),
		solidPNG(t, 7, 3, color.NRGBA{R: 0x10, G: 0xfe, B: 0x2b, A: 0x80}),
		tinyPNG(t),
	}
	out := render(t, sampleReport(figs...))
	// sampleReport places figures in sections 0, 2, 3, 0: the page shows
	// them in section order.
	want := [][]byte{figs[0], figs[3], figs[1], figs[2]}
	ms := imgSrcRE.FindAllStringSubmatch(out, -1)
	if len(ms) != len(want) {
		t.Fatalf("%d img elements, want %d", len(ms), len(want))
	}
	for i, m := range ms {
		uri := html.UnescapeString(m[1])
		b64, ok := strings.CutPrefix(uri, "data:image/png;base64,")
		if !ok {
			t.Fatalf("figure %d: src %.40q is not a base64 PNG data URI", i+1, uri)
		}
		got, err := base64.StdEncoding.DecodeString(b64)
		if err != nil {
			t.Fatalf("figure %d: %v", i+1, err)
		}
		if !bytes.Equal(got, want[i]) {
			t.Errorf("figure %d: data URI decodes to %d bytes that differ from the %d bytes given", i+1, len(got), len(want[i]))
		}
	}
	if !strings.Contains(out, `width="300" height="200"`) {
		t.Errorf("img lacks its pixel size")
	}
}

func TestHTMLDeterministic(t *testing.T) {
	t.Parallel()
	figs := [][]byte{tinyPNG(t), solidPNG(t, 40, 30, color.NRGBA{R: 9, G: 99, B: 199, A: 255})}
	a := render(t, sampleReport(figs...))
	for range 3 {
		if b := render(t, sampleReport(figs...)); a != b {
			t.Fatal("two renderings of the same report differ")
		}
	}
}

func TestHTMLSkipsEmpty(t *testing.T) {
	t.Parallel()
	out := render(t, sampleReport(tinyPNG(t)))
	for _, absent := range []string{"An empty section", "an empty table", `<dt></dt>`, "<p>  </p>"} {
		if strings.Contains(out, absent) {
			t.Errorf("output contains %q, which should have been skipped", absent)
		}
	}
	// Tables and figures are numbered over the whole report, skipping the
	// empty ones.
	for _, want := range []string{"Table 1.", "Table 2.", "Figure 1."} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q", want)
		}
	}
	if strings.Contains(out, "Table 3.") || strings.Contains(out, "Figure 2.") {
		t.Error("empty tables or figures were numbered")
	}
	// Three titled sections are left, enough for a table of contents that
	// links to them.
	for _, want := range []string{`<a href="#section-1">Speed of sound</a>`, `<section id="section-3">`, `<a href="#section-4">Aberration</a>`} {
		if !strings.Contains(out, want) {
			t.Errorf("output lacks %q", want)
		}
	}

	out = render(t, Report{})
	for _, absent := range []string{`class="summary"`, `class="meta"`, `class="contents"`, "<section", "<table", "<img", "<h2"} {
		if strings.Contains(out, absent) {
			t.Errorf("empty report contains %q", absent)
		}
	}
	for _, want := range []string{"<title>" + defaultTitle + "</title>", html.EscapeString(DefaultCaution)} {
		if !strings.Contains(out, want) {
			t.Errorf("empty report lacks %q", want)
		}
	}
}

func TestHTMLNumericCells(t *testing.T) {
	t.Parallel()
	out := render(t, sampleReport(tinyPNG(t)))
	tests := []struct{ html string }{
		{`<th scope="col" class="num">Depth (mm)</th>`},
		{`<th scope="col" class="num">Speed (m/s)</th>`},
		{`<th scope="col">Interval (m/s)</th>`}, // "1528 to 1544" is text
		{`<th scope="col">Note</th>`},
		{`<td class="num">1536.2</td>`},
		{`<td class="num">` + "\u2212" + `1</td>`},
		{`<td>1528 to 1544</td>`},
		{`<td>near field</td>`},
		{`<td class="num">&#43;0.09</td>`},
		{`<th scope="col">Metric</th>`},
	}
	for _, tc := range tests {
		if !strings.Contains(out, tc.html) {
			t.Errorf("output lacks %s", tc.html)
		}
	}
	for _, tc := range []struct {
		cell string
		num  bool
	}{
		{"1540", true}, {" -3.5 ", true}, {"1e-3", true}, {"+2", true}, {"\u22120.13", true},
		{"NaN", true}, {"1e999", true}, {"", false}, {"12 %", false}, {"1,540", false},
		{"1540 m/s", false}, {"--1", false}, {"high", false},
	} {
		if got := isNumber(tc.cell); got != tc.num {
			t.Errorf("isNumber(%q) = %v, want %v", tc.cell, got, tc.num)
		}
	}
}

func TestHTMLErrors(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name     string
		fig      Figure
		table    Table
		want     string
		isLength bool
	}{
		{name: "nil PNG", fig: Figure{Caption: "Speed sweep"}, want: `figure 1 ("Speed sweep"): no PNG data`},
		{name: "nil PNG with alt only", fig: Figure{Alt: "a plot"}, want: "figure 1: no PNG data"},
		{name: "empty PNG", fig: Figure{Caption: "Empty", PNG: []byte{}}, want: `figure 1 ("Empty"): no PNG data`},
		{name: "not a PNG", fig: Figure{Caption: "JPEG by mistake", PNG: []byte("\xff\xd8\xff\xe0 not a png")}, want: `figure 1 ("JPEG by mistake"): not a PNG`},
		{name: "long row", table: Table{Caption: "Metrics", Header: []string{"a", "b"}, Rows: [][]string{{"1", "2"}, {"1", "2", "3"}}}, want: `table 1 ("Metrics"): report: length mismatch: row 2 has 3 cells, the header 2`, isLength: true},
		{name: "short row", table: Table{Header: []string{"a", "b"}, Rows: [][]string{{"1"}}}, want: "table 1: report: length mismatch: row 1 has 1 cells", isLength: true},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			s := Section{Title: "Results"}
			if tc.fig.Caption != "" || tc.fig.Alt != "" || tc.fig.PNG != nil {
				s.Figures = []Figure{tc.fig}
			}
			if len(tc.table.Rows) > 0 {
				s.Tables = []Table{tc.table}
			}
			var buf bytes.Buffer
			err := HTML(&buf, Report{Sections: []Section{{Title: "Summary", Paragraphs: []string{"ok"}}, s}})
			if err == nil {
				t.Fatal("no error")
			}
			if !strings.Contains(err.Error(), `section 2 ("Results"): `+tc.want) {
				t.Errorf("error %q does not contain %q", err, tc.want)
			}
			if errors.Is(err, ErrLength) != tc.isLength {
				t.Errorf("errors.Is(err, ErrLength) = %v, want %v", !tc.isLength, tc.isLength)
			}
			if buf.Len() != 0 {
				t.Errorf("%d bytes written despite the error", buf.Len())
			}
		})
	}
	// Rows may be ragged when there is no header: they are padded.
	out := render(t, Report{Sections: []Section{{Tables: []Table{{Rows: [][]string{{"a"}, {"b", "2"}}}}}}})
	if !strings.Contains(out, "<tr><td>a</td><td></td></tr>") {
		t.Error("short row without a header is not padded")
	}
}

// tagRE matches start and end tags; the output has no comments, and text and
// attribute values are escaped, so every '<' starts a tag.
var tagRE = regexp.MustCompile(`<(/?)([a-zA-Z][a-zA-Z0-9]*)[^>]*>`)

// voidElements have no end tag.
var voidElements = map[string]bool{"meta": true, "img": true, "br": true, "hr": true, "link": true, "input": true}

// TestHTMLWellFormed checks that elements nest: every end tag closes the
// innermost open element and nothing is left open.
func TestHTMLWellFormed(t *testing.T) {
	t.Parallel()
	out := render(t, sampleReport(tinyPNG(t), tinyPNG(t)))
	if !strings.HasPrefix(out, "<!DOCTYPE html>\n") {
		t.Error("no doctype on the first line")
	}
	var stack []string
	for _, m := range tagRE.FindAllStringSubmatch(out, -1) {
		name := strings.ToLower(m[2])
		switch {
		case voidElements[name]:
		case m[1] == "":
			stack = append(stack, name)
		case len(stack) == 0 || stack[len(stack)-1] != name:
			t.Fatalf("</%s> closes %v", name, stack)
		default:
			stack = stack[:len(stack)-1]
		}
	}
	if len(stack) != 0 {
		t.Errorf("left open: %v", stack)
	}
}

// TestHTMLGolden compares the output for sampleReport with
// testdata/report.golden.html byte for byte; run with -regen after an
// intended change and look at the file in a browser.
func TestHTMLGolden(t *testing.T) {
	t.Parallel()
	got := render(t, sampleReport(tinyPNG(t)))
	path := filepath.Join("testdata", "report.golden.html")
	if *regen {
		if err := os.WriteFile(path, []byte(got), 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./report -run %s -regen to create it)", err, t.Name())
	}
	if got == string(want) {
		return
	}
	gl, wl := strings.Split(got, "\n"), strings.Split(string(want), "\n")
	for i := range max(len(gl), len(wl)) {
		var g, w string
		if i < len(gl) {
			g = gl[i]
		}
		if i < len(wl) {
			w = wl[i]
		}
		if g != w {
			out := filepath.Join(os.TempDir(), "celerity-report-got-report.html")
			_ = os.WriteFile(out, []byte(got), 0o644)
			t.Fatalf("line %d differs from %s:\n got: %s\nwant: %s\noutput written to %s", i+1, path, g, w, out)
		}
	}
}

// Rendering check in a headless browser.
const (
	// chromiumTimeout bounds one browser run; a screenshot of a local file
	// takes a few seconds.
	chromiumTimeout = 60 * time.Second
	// shotW and shotH are the browser window: a laptop-sized width, tall
	// enough to show the first section's figure.
	shotW, shotH = 1280, 2000
	// colorTol is the per-channel difference (of 255) within which a pixel
	// counts as a given flat colour; image scaling blends colours only at
	// the edges of a flat area.
	colorTol = 6
	// minInk is the share of non-white pixels below which the page counts
	// as blank: text, rules, the caution box and the figures cover far more.
	minInk = 0.03
	// contentPx is the width available to a figure: the 1100 px page less
	// its 1.5rem (24 px) padding on each side.
	contentPx = 1100 - 2*24
	// sizeTolPx allows for rounding of scaled image edges.
	sizeTolPx = 3
)

// figColor is the flat colour of the test figure: a magenta used nowhere in
// the style sheet or the plots.
var figColor = color.NRGBA{R: 0xc0, G: 0x1f, B: 0x7a, A: 0xff}

// TestHTMLChromium renders a report in headless Chromium and checks the
// screenshot: the page is not blank, the caution box is drawn near the top,
// and a figure wider than the page is scaled down to the content width,
// keeping its aspect ratio, and centred with the page.
func TestHTMLChromium(t *testing.T) {
	t.Parallel()
	if testing.Short() {
		t.Skip("skipping the headless-browser check in -short mode")
	}
	bin, err := exec.LookPath("chromium")
	if err != nil {
		t.Skip("chromium not found on PATH; install it (Debian: apt-get install chromium) to run the rendering check")
	}

	// A flat figure, 1600 x 240 pixels, wider than the page; then a real
	// line plot and before/after B-mode images, to look at.
	const figW, figH = 1600, 240
	flat := solidPNG(t, figW, figH, figColor)
	var line, bmode bytes.Buffer
	c, focus := sweep()
	if err := LinePNG(&line, LinePlot{
		Title: "Speed sweep", XLabel: "assumed speed (m/s)", YLabel: "focus metric",
		Series: []Series{{Name: "speckle brightness", X: c, Y: focus, Points: true}},
		Bands:  []Band{{Lo: 1498, Hi: 1526, Label: "95 % interval"}},
		VLines: []VLine{{X: 1512, Label: "estimate"}},
	}); err != nil {
		t.Fatal(err)
	}
	if err := SideBySidePNG(&bmode, []Image{spotImage("Before (1540 m/s)", 1), spotImage("After (1512 m/s)", 2)}, BModeOptions{}); err != nil {
		t.Fatal(err)
	}
	r := sampleReport(flat, bmode.Bytes(), line.Bytes())
	r.Sections[0].Figures[0].Caption = "A flat test figure, 1600 pixels wide, shrunk to the page width"
	r.Sections[3].Figures[0].Caption = "Focus criterion against the assumed speed of sound (a stand-in figure)"

	dir := t.TempDir()
	page := filepath.Join(dir, "report.html")
	shot := filepath.Join(dir, "shot.png")
	var buf bytes.Buffer
	if err := HTML(&buf, r); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(page, buf.Bytes(), 0o644); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), chromiumTimeout)
	defer cancel()
	cmd := exec.CommandContext(ctx, bin,
		"--headless", "--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage",
		"--disable-background-networking", "--disable-component-update", "--disable-sync",
		"--no-first-run", "--no-default-browser-check", "--hide-scrollbars",
		"--force-device-scale-factor=1",
		"--user-data-dir="+filepath.Join(dir, "profile"),
		"--window-size="+strconv.Itoa(shotW)+","+strconv.Itoa(shotH),
		"--screenshot="+shot,
		"file://"+page,
	)
	// Keep the browser's caches and settings in the temporary folder.
	cmd.Env = append(os.Environ(), "HOME="+dir, "XDG_CONFIG_HOME="+dir, "XDG_CACHE_HOME="+dir)
	cmd.WaitDelay = 5 * time.Second
	if msg, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("chromium: %v\n%s", err, msg)
	}
	b, err := os.ReadFile(shot)
	if err != nil {
		t.Fatalf("no screenshot: %v", err)
	}
	if *htmlShotDir != "" {
		_ = os.WriteFile(filepath.Join(*htmlShotDir, "report.html"), buf.Bytes(), 0o644)
		_ = os.WriteFile(filepath.Join(*htmlShotDir, "shot.png"), b, 0o644)
	}
	img := decodePNG(t, b)
	bounds := img.Bounds()
	if bounds.Dx() != shotW || bounds.Dy() != shotH {
		t.Fatalf("screenshot is %v, want %d x %d", bounds.Size(), shotW, shotH)
	}

	warnBG := color.NRGBA{R: 0xfd, G: 0xf5, B: 0xe1, A: 0xff} // --warn-bg in the style sheet
	var ink, caution int
	fig := image.Rectangle{Min: bounds.Max, Max: bounds.Min}
	for y := bounds.Min.Y; y < bounds.Max.Y; y++ {
		for x := bounds.Min.X; x < bounds.Max.X; x++ {
			px := img.At(x, y)
			if gray(img, x, y) < 245 {
				ink++
			}
			if near(px, figColor) {
				fig = fig.Union(image.Rect(x, y, x+1, y+1))
			}
			if y < 400 && near(px, warnBG) {
				caution++
			}
		}
	}
	if frac := float64(ink) / float64(shotW*shotH); frac < minInk {
		t.Errorf("page looks blank: %.2f %% of pixels are not white (want at least %.0f %%)", 100*frac, 100*minInk)
	}
	// The caution box spans the content width and is at least a line tall.
	if caution < contentPx*20 {
		t.Errorf("caution box: %d pixels of its background in the top 400 rows, want at least %d", caution, contentPx*20)
	}
	if fig.Empty() {
		t.Fatal("the flat figure's colour appears nowhere in the screenshot")
	}
	wantH := figH * contentPx / figW
	if abs(fig.Dx()-contentPx) > sizeTolPx || abs(fig.Dy()-wantH) > sizeTolPx {
		t.Errorf("figure drawn %d x %d px, want %d x %d (scaled to the content width)", fig.Dx(), fig.Dy(), contentPx, wantH)
	}
	if mid := (fig.Min.X + fig.Max.X) / 2; abs(mid-shotW/2) > sizeTolPx {
		t.Errorf("figure centred at x = %d, want %d", mid, shotW/2)
	}
	var inFig int
	for y := fig.Min.Y; y < fig.Max.Y; y++ {
		for x := fig.Min.X; x < fig.Max.X; x++ {
			if near(img.At(x, y), figColor) {
				inFig++
			}
		}
	}
	if frac := float64(inFig) / float64(fig.Dx()*fig.Dy()); frac < 0.98 {
		t.Errorf("only %.1f %% of the figure's area has its colour", 100*frac)
	}
}

// near reports whether c is within colorTol of want in every channel.
func near(c color.Color, want color.NRGBA) bool {
	return pixelDiff(c, want) <= colorTol
}

func abs(v int) int { return max(v, -v) }
