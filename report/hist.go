package report

import (
	"fmt"
	"image/color"
	"io"
	"math"
	"slices"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// Hist is a histogram for cohort summaries, drawn with a strip of ticks
// beneath the bars at the individual values (a rug), so that small cohorts
// show each member. NaN and infinite values are skipped and counted in the
// caption.
type Hist struct {
	Title, XLabel string
	Values        []float64
	// Bins is the number of equal-width bins over the range of the values;
	// zero chooses ceil(log2 n) + 1 (Sturges 1926), at most maxAutoBins.
	Bins int
	// WidthCM and HeightCM are the figure size; zero means 16 x 10 cm.
	WidthCM, HeightCM float64
	// DPI is the output resolution; zero means DefaultDPI.
	DPI float64
}

const (
	// maxAutoBins caps the automatic bin count; more bins than this are
	// noise for a cohort summary.
	maxAutoBins = 30
	// maxBins caps a requested bin count.
	maxBins = 10000
	// rugFraction is the height of the strip below the bars, as a fraction
	// of the tallest bar.
	rugFraction = 0.08
	// headroom is the space above the tallest bar, as a fraction of it, that
	// keeps the caption clear of the bars.
	headroom = 0.18
)

// histColor fills the bars.
var histColor = color.NRGBA{R: 0x7d, G: 0x9c, B: 0xc9, A: 0xff}

// HistPNG draws h as a PNG. Empty or all-NaN input gives empty axes marked
// "no data". A negative bin count is an error.
func HistPNG(w io.Writer, h Hist) error {
	c, _, err := renderHist(h)
	if err != nil {
		return err
	}
	return writePNG(w, c)
}

// binEdges returns nbins+1 equal-width bin edges covering vs (sorted,
// finite, non-empty). A single distinct value gets one bin of width 2 % of
// its magnitude (1 when it is zero) centred on it.
func binEdges(vs []float64, nbins int) []float64 {
	lo, hi := vs[0], vs[len(vs)-1]
	if hi == lo {
		half := math.Abs(lo) * 0.01
		if half == 0 {
			half = 0.5
		}
		return []float64{lo - half, lo + half}
	}
	e := make([]float64, nbins+1)
	for i := range e {
		e[i] = lo + (hi-lo)*float64(i)/float64(nbins)
	}
	e[nbins] = hi
	return e
}

// counts returns how many of vs (sorted) fall in each bin of edges; the last
// bin includes its upper edge.
func counts(vs, edges []float64) []int {
	n := make([]int, len(edges)-1)
	w := (edges[len(edges)-1] - edges[0]) / float64(len(n))
	for _, v := range vs {
		i := int((v - edges[0]) / w)
		n[max(0, min(len(n)-1, i))]++
	}
	return n
}

// renderHist draws h and returns the canvas and where its data area fell.
func renderHist(h Hist) (*vgimg.Canvas, *figure, error) {
	if h.Bins < 0 || h.Bins > maxBins {
		return nil, nil, fmt.Errorf("report: Bins must be in [0, %d], got %d", maxBins, h.Bins)
	}
	wcm, err := resolveCM("WidthCM", h.WidthCM, defaultWidthCM)
	if err != nil {
		return nil, nil, err
	}
	hcm, err := resolveCM("HeightCM", h.HeightCM, defaultHeightCM)
	if err != nil {
		return nil, nil, err
	}
	dpi, err := resolveDPI(h.DPI)
	if err != nil {
		return nil, nil, err
	}
	var vs []float64
	for _, v := range h.Values {
		if finite(v) {
			vs = append(vs, v)
		}
	}
	slices.Sort(vs)
	skipped := len(h.Values) - len(vs)

	p := plot.New()
	styleAxes(p)
	p.Title.Text = h.Title
	p.X.Label.Text = h.XLabel
	p.Y.Label.Text = "count"
	if len(vs) == 0 {
		p.Add(noData{})
	} else {
		nb := h.Bins
		if nb == 0 {
			nb = min(maxAutoBins, int(math.Ceil(math.Log2(float64(len(vs)))))+1)
		}
		edges := binEdges(vs, nb)
		cs := counts(vs, edges)
		top := float64(slices.Max(cs))
		p.Add(bars{edges: edges, counts: cs}, rug{values: vs, lo: -rugFraction * top * 0.85, hi: -rugFraction * top * 0.15})
		p.Y.Min, p.Y.Max = -rugFraction*top, top*(1+headroom)
		p.X.Min, p.X.Max = edges[0], edges[len(edges)-1]
		padRange(&p.X, xMargin)
	}
	p.X.Padding, p.Y.Padding = 0, 0
	p.Add(frame{width: vg.Points(0.8)})
	caption := fmt.Sprintf("n = %d", len(vs))
	if skipped > 0 {
		caption += fmt.Sprintf(" (%d non-finite skipped)", skipped)
	}
	p.Add(cornerText{text: caption})

	f, err := layoutSingle(p, nil, wcm, hcm, dpi, func(dw, dh vg.Length) {
		p.X.Tick.Marker = niceTicks{max: ticksFor(dw, vg.Points(56), 9)}
		p.Y.Tick.Marker = countTicks{max: ticksFor(dh, vg.Points(26), 8)}
	})
	if err != nil {
		return nil, nil, err
	}
	c, err := drawSingle(p, nil, f)
	return c, f, err
}

// countTicks labels only non-negative whole numbers, so that the strip below
// zero carries no ticks.
type countTicks struct{ max int }

// Ticks implements plot.Ticker.
func (t countTicks) Ticks(lo, hi float64) []plot.Tick {
	hi = math.Max(hi, 1)
	var out []plot.Tick
	for _, tk := range (niceTicks{max: t.max}).Ticks(0, hi) {
		if tk.Value >= 0 && tk.Value == math.Trunc(tk.Value) {
			out = append(out, tk)
		}
	}
	return out
}

// bars is a plot.Plotter for histogram bars standing on y = 0.
type bars struct {
	edges  []float64
	counts []int
}

// Plot implements plot.Plotter.
func (b bars) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	y0 := trY(0)
	edge := draw.LineStyle{Color: color.White, Width: vg.Points(0.8)}
	base := draw.LineStyle{Color: color.Gray{Y: 0x60}, Width: vg.Points(0.6)}
	for i, n := range b.counts {
		if n == 0 {
			continue
		}
		x0, x1, y1 := trX(b.edges[i]), trX(b.edges[i+1]), trY(float64(n))
		pts := []vg.Point{{X: x0, Y: y0}, {X: x1, Y: y0}, {X: x1, Y: y1}, {X: x0, Y: y1}}
		c.FillPolygon(histColor, pts)
		// White edges separate neighbouring bars without a heavy outline.
		c.StrokeLines(edge, []vg.Point{{X: x0, Y: y0}, {X: x0, Y: y1}, {X: x1, Y: y1}, {X: x1, Y: y0}})
	}
	c.StrokeLine2(base, c.Min.X, y0, c.Max.X, y0)
}

// rug is a plot.Plotter that draws a short vertical tick at each value,
// between data y values lo and hi.
type rug struct {
	values []float64
	lo, hi float64
}

// Plot implements plot.Plotter.
func (r rug) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	sty := draw.LineStyle{Color: color.NRGBA{R: 0x1b, G: 0x3a, B: 0x6b, A: 0xb0}, Width: vg.Points(0.9)}
	y0, y1 := trY(r.lo), trY(r.hi)
	for _, v := range r.values {
		x := trX(v)
		c.StrokeLine2(sty, x, y0, x, y1)
	}
}

// cornerText is a plot.Plotter that writes a short caption in the top right
// corner of the data area.
type cornerText struct{ text string }

// Plot implements plot.Plotter.
func (t cornerText) Plot(c draw.Canvas, _ *plot.Plot) {
	s := textStyle(tickSize)
	s.Color = color.Gray{Y: 0x40}
	s.XAlign, s.YAlign = draw.XRight, draw.YTop
	c.FillText(s, vg.Point{X: c.Max.X - vg.Points(4), Y: c.Max.Y - vg.Points(3)}, t.text)
}
