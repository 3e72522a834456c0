package report

import (
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// Series is one line on a line plot. Points whose X or Y is NaN or infinite
// are skipped and break the line there.
type Series struct {
	Name   string // legend text; empty leaves the series out of the legend
	X, Y   []float64
	Points bool // draw a marker at every point
	Dashed bool
}

// Band is a shaded vertical interval over the whole height of a plot, e.g. a
// 95 % interval. Lo and Hi may come in either order; a band with a NaN or
// infinite bound is skipped.
type Band struct {
	Lo, Hi float64
	Label  string
}

// VLine is a vertical reference line, e.g. the true value. A NaN or infinite
// X is skipped.
type VLine struct {
	X     float64
	Label string
}

// LinePlot is a line plot: series over shaded bands and reference lines, with
// a legend below the axes for every item that has a name or label.
type LinePlot struct {
	Title, XLabel, YLabel string
	Series                []Series
	Bands                 []Band
	VLines                []VLine
	// XSpan, when XSpan[0] < XSpan[1] (both finite), is a range the x axis
	// spans at least, e.g. [0.5, n + 0.5] for n categories at x = 1..n;
	// the axis still covers all the data. The zero value follows the data.
	XSpan [2]float64
	// WidthCM and HeightCM are the figure size; zero means 16 x 10 cm.
	WidthCM, HeightCM float64
	// DPI is the output resolution; zero means DefaultDPI.
	DPI float64
}

// ErrLength is wrapped by errors about slices whose lengths disagree.
var ErrLength = errors.New("report: length mismatch")

// Line plot styling, in points.
const (
	lineWidth  = 1.6
	glyphSize  = 2.6 // marker radius
	refWidth   = 1.3
	bandAlpha  = 0.22
	noDataSize = 11
	// xMargin and yMargin widen the axes beyond the data, as a fraction of
	// the data range, so that markers at the ends are not cut by the frame.
	xMargin = 0.02
	yMargin = 0.05
)

var (
	dashes    = []vg.Length{vg.Points(6), vg.Points(3)}
	refDashes = []vg.Length{vg.Points(6), vg.Points(2.5), vg.Points(1.5), vg.Points(2.5)}
	// bandColors shade bands: a neutral slate first, so that a band does not
	// read as belonging to one of the series, then two soft hues.
	bandColors = []color.NRGBA{
		{R: 0x5a, G: 0x7d, B: 0xb5, A: 0xff},
		{R: 0xe0, G: 0x9a, B: 0x3c, A: 0xff},
		{R: 0x5e, G: 0xa8, B: 0x6f, A: 0xff},
	}
)

// finite reports whether v is neither NaN nor infinite.
func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// runs splits the points of x, y into maximal runs of finite points.
func runs(x, y []float64) []plotter.XYs {
	var out []plotter.XYs
	var cur plotter.XYs
	for i := range x {
		if !finite(x[i]) || !finite(y[i]) {
			if len(cur) > 0 {
				out = append(out, cur)
				cur = nil
			}
			continue
		}
		cur = append(cur, plotter.XY{X: x[i], Y: y[i]})
	}
	if len(cur) > 0 {
		out = append(out, cur)
	}
	return out
}

// LinePNG draws p as a PNG. It returns an error wrapping ErrLength when a
// series has len(X) != len(Y). Empty or all-NaN input gives empty axes
// marked "no data".
func LinePNG(w io.Writer, p LinePlot) error {
	c, _, err := renderLine(p)
	if err != nil {
		return err
	}
	return writePNG(w, c)
}

// figure is a rendered plot with the rectangle of its data area, in points.
type figure struct {
	w, h vg.Length
	dpi  float64
	data vg.Rectangle
}

// renderLine draws p and returns the canvas and where its data area fell.
func renderLine(lp LinePlot) (*vgimg.Canvas, *figure, error) {
	for i, s := range lp.Series {
		if len(s.X) != len(s.Y) {
			return nil, nil, fmt.Errorf("%w: series %d (%q): len(X) = %d, len(Y) = %d",
				ErrLength, i, s.Name, len(s.X), len(s.Y))
		}
	}
	wcm, err := resolveCM("WidthCM", lp.WidthCM, defaultWidthCM)
	if err != nil {
		return nil, nil, err
	}
	hcm, err := resolveCM("HeightCM", lp.HeightCM, defaultHeightCM)
	if err != nil {
		return nil, nil, err
	}
	dpi, err := resolveDPI(lp.DPI)
	if err != nil {
		return nil, nil, err
	}

	p := plot.New()
	styleAxes(p)
	p.Title.Text = lp.Title
	p.X.Label.Text = lp.XLabel
	p.Y.Label.Text = lp.YLabel
	// Legend order: series, then reference lines, then bands.
	var legend, seriesLegend, refLegend, bandLegend []legendEntry
	empty := true

	for i, b := range lp.Bands {
		if !finite(b.Lo) || !finite(b.Hi) {
			continue
		}
		bp := band{lo: min(b.Lo, b.Hi), hi: max(b.Lo, b.Hi), color: tint(pick(bandColors, i), bandAlpha)}
		p.Add(bp)
		empty = false
		if b.Label != "" {
			bandLegend = append(bandLegend, legendEntry{b.Label, []plot.Thumbnailer{bp}})
		}
	}
	grid := plotter.NewGrid()
	grid.Vertical = draw.LineStyle{Color: gridColor, Width: vg.Points(0.5)}
	grid.Horizontal = grid.Vertical
	p.Add(grid)
	for i, v := range lp.VLines {
		if !finite(v.X) {
			continue
		}
		vl := vline{x: v.X, style: draw.LineStyle{
			Color: pick(refColors, i), Width: vg.Points(refWidth), Dashes: refDashes,
		}}
		p.Add(vl)
		empty = false
		if v.Label != "" {
			refLegend = append(refLegend, legendEntry{v.Label, []plot.Thumbnailer{vl}})
		}
	}
	for i, s := range lp.Series {
		col := pick(seriesColors, i)
		ls := draw.LineStyle{Color: col, Width: vg.Points(lineWidth)}
		if s.Dashed {
			ls.Dashes = dashes
		}
		gs := draw.GlyphStyle{Color: col, Radius: vg.Points(glyphSize), Shape: draw.CircleGlyph{}}
		var thumbs []plot.Thumbnailer
		for _, r := range runs(s.X, s.Y) {
			empty = false
			if len(r) > 1 {
				l := &plotter.Line{XYs: r, LineStyle: ls}
				p.Add(l)
			}
			if s.Points || len(r) == 1 {
				// An isolated point would be invisible as a line.
				p.Add(&plotter.Scatter{XYs: r, GlyphStyle: gs})
			}
		}
		thumbs = append(thumbs, &plotter.Line{LineStyle: ls})
		if s.Points {
			thumbs = append(thumbs, &plotter.Scatter{GlyphStyle: gs})
		}
		if s.Name != "" {
			seriesLegend = append(seriesLegend, legendEntry{s.Name, thumbs})
		}
	}
	if empty {
		p.Add(noData{})
	}
	// A closed frame with a little air between the data and the frame reads
	// better than axes floating apart at the corner.
	p.X.Padding, p.Y.Padding = 0, 0
	padRange(&p.X, xMargin)
	padRange(&p.Y, yMargin)
	if !empty {
		spanRange(&p.X, lp.XSpan)
	}
	p.Add(frame{width: vg.Points(0.8)})
	legend = append(append(seriesLegend, refLegend...), bandLegend...)

	f, err := layoutSingle(p, legend, wcm, hcm, dpi,
		func(dw, dh vg.Length) {
			p.X.Tick.Marker = niceTicks{max: ticksFor(dw, vg.Points(56), 9)}
			p.Y.Tick.Marker = niceTicks{max: ticksFor(dh, vg.Points(26), 8)}
		})
	if err != nil {
		return nil, nil, err
	}
	c, err := drawSingle(p, legend, f)
	return c, f, err
}

// layoutSingle sizes a one-plot figure of wcm x hcm with legend entries below
// the axes. setTicks is called with the data area's size, first estimated and
// then measured, to set tick densities.
func layoutSingle(p *plot.Plot, legend []legendEntry, wcm, hcm, dpi float64, setTicks func(dw, dh vg.Length)) (*figure, error) {
	f := &figure{w: vg.Length(wcm) * vg.Centimeter, h: vg.Length(hcm) * vg.Centimeter, dpi: dpi}
	fitLabels(p, f.w-vg.Points(marginLeft+marginRight), f.h-vg.Points(marginTop+marginBottom))
	region := func() vg.Rectangle {
		lh := legendHeight(legend, f.w-vg.Points(marginLeft+marginRight))
		return vg.Rectangle{
			Min: vg.Point{X: vg.Points(marginLeft), Y: vg.Points(marginBottom) + lh},
			Max: vg.Point{X: f.w - vg.Points(marginRight), Y: f.h - vg.Points(marginTop)},
		}
	}
	r := region()
	setTicks(r.Size().X-vg.Points(60), r.Size().Y-vg.Points(60))
	for range 2 {
		f.data = p.DataCanvas(draw.Canvas{Rectangle: r}).Rectangle
		setTicks(f.data.Size().X, f.data.Size().Y)
	}
	f.data = p.DataCanvas(draw.Canvas{Rectangle: r}).Rectangle
	if f.data.Size().X < vg.Centimeter || f.data.Size().Y < vg.Centimeter {
		return nil, fmt.Errorf("report: figure of %g x %g cm leaves no room for the plot; make it larger", wcm, hcm)
	}
	return f, nil
}

// drawSingle draws a laid-out one-plot figure with its legend.
func drawSingle(p *plot.Plot, legend []legendEntry, f *figure) (*vgimg.Canvas, error) {
	c, err := newCanvas(f.w, f.h, f.dpi)
	if err != nil {
		return nil, err
	}
	dc := draw.New(c)
	lh := legendHeight(legend, f.w-vg.Points(marginLeft+marginRight))
	p.Draw(sub(dc, vg.Rectangle{
		Min: vg.Point{X: vg.Points(marginLeft), Y: vg.Points(marginBottom) + lh},
		Max: vg.Point{X: f.w - vg.Points(marginRight), Y: f.h - vg.Points(marginTop)},
	}))
	if len(legend) > 0 {
		// Rows are centred under the data area, but may use the full width.
		area := vg.Rectangle{
			Min: vg.Point{X: vg.Points(marginLeft), Y: vg.Points(marginBottom)},
			Max: vg.Point{X: f.w - vg.Points(marginRight), Y: vg.Points(marginBottom) + lh},
		}
		drawLegend(dc, legend, area)
	}
	return c, nil
}

// band is a plot.Plotter for a Band.
type band struct {
	lo, hi float64
	color  color.Color
}

// Plot implements plot.Plotter.
func (b band) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	x0, x1 := max(trX(b.lo), c.Min.X), min(trX(b.hi), c.Max.X)
	if x1 < x0 {
		return
	}
	if x1-x0 < vg.Points(1) { // keep a zero-width band visible
		m := (x0 + x1) / 2
		x0, x1 = m-vg.Points(0.5), m+vg.Points(0.5)
	}
	c.FillPolygon(b.color, []vg.Point{
		{X: x0, Y: c.Min.Y}, {X: x1, Y: c.Min.Y}, {X: x1, Y: c.Max.Y}, {X: x0, Y: c.Max.Y},
	})
}

// DataRange implements plot.DataRanger: the band widens the x range only.
func (b band) DataRange() (xmin, xmax, ymin, ymax float64) {
	return b.lo, b.hi, math.Inf(1), math.Inf(-1)
}

// Thumbnail implements plot.Thumbnailer.
func (b band) Thumbnail(c *draw.Canvas) {
	c.FillPolygon(b.color, []vg.Point{
		c.Min, {X: c.Max.X, Y: c.Min.Y}, c.Max, {X: c.Min.X, Y: c.Max.Y},
	})
}

// vline is a plot.Plotter for a VLine.
type vline struct {
	x     float64
	style draw.LineStyle
}

// Plot implements plot.Plotter.
func (v vline) Plot(c draw.Canvas, p *plot.Plot) {
	trX, _ := p.Transforms(&c)
	x := trX(v.x)
	if !c.ContainsX(x) {
		return
	}
	c.StrokeLine2(v.style, x, c.Min.Y, x, c.Max.Y)
}

// DataRange implements plot.DataRanger: the line widens the x range only.
func (v vline) DataRange() (xmin, xmax, ymin, ymax float64) {
	return v.x, v.x, math.Inf(1), math.Inf(-1)
}

// Thumbnail implements plot.Thumbnailer.
func (v vline) Thumbnail(c *draw.Canvas) {
	y := c.Center().Y
	c.StrokeLine2(v.style, c.Min.X, y, c.Max.X, y)
}

// padRange widens a's range by frac of its span on each side; an empty or
// zero-width range is left for the plot to sanitise.
func padRange(a *plot.Axis, frac float64) {
	span := a.Max - a.Min
	if !(span > 0) || math.IsInf(span, 0) {
		return
	}
	a.Min -= frac * span
	a.Max += frac * span
}

// spanRange widens a's range to hold span, when span[0] < span[1] and both
// are finite.
func spanRange(a *plot.Axis, span [2]float64) {
	if !(span[0] < span[1]) || !finite(span[0]) || !finite(span[1]) {
		return
	}
	a.Min = math.Min(a.Min, span[0])
	a.Max = math.Max(a.Max, span[1])
}

// noData is a plot.Plotter that writes "no data" in the middle of the data
// area.
type noData struct{}

// Plot implements plot.Plotter.
func (noData) Plot(c draw.Canvas, _ *plot.Plot) {
	s := textStyle(noDataSize)
	s.Color = color.Gray{Y: 0x80}
	s.XAlign, s.YAlign = draw.XCenter, draw.YCenter
	c.FillText(s, c.Center(), "no data")
}
