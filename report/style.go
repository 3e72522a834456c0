package report

import (
	"fmt"
	"image/color"
	"io"
	"math"

	stdfont "golang.org/x/image/font"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// DefaultDPI is the resolution of the PNGs when an options field leaves it at
// zero: a 16 cm figure is then 756 pixels wide, sharp on a screen and in a
// printed report alike.
const DefaultDPI = 120

const (
	// defaultWidthCM is the figure width when none is given.
	defaultWidthCM = 16
	// defaultHeightCM is the line plot and histogram height when none is given.
	defaultHeightCM = 10
	// maxSideCM bounds any requested figure side, so that a typo cannot ask
	// for a gigapixel image.
	maxSideCM = 100
	// minDPI and maxDPI bound the requested resolution for the same reason.
	minDPI, maxDPI = 30, 600
)

// Figure margins in points: room for tick labels that overhang the plot
// edges and a little air around the title.
const (
	marginLeft   = 4
	marginBottom = 4
	marginTop    = 6
	marginRight  = 4
)

// Text sizes in points, chosen to stay readable when a 16 cm figure is shown
// at its natural size.
const (
	titleSize = 11
	labelSize = 10
	tickSize  = 9
	smallSize = 8
)

// sansFont is the typeface of all text; a sans-serif face reads better than the
// library's serif default at small sizes.
var sansFont = font.Font{Typeface: "Liberation", Variant: "Sans"}

// textStyle returns a plain text style of the given size in the package font.
func textStyle(size vg.Length) text.Style {
	return text.Style{
		Color:   color.Black,
		Font:    font.From(sansFont, size),
		Handler: plot.DefaultTextHandler,
	}
}

// boldStyle is textStyle in bold.
func boldStyle(size vg.Length) text.Style {
	s := textStyle(size)
	s.Font.Weight = stdfont.WeightBold
	return s
}

// seriesColors is the line palette: six hues that stay apart in hue and
// lightness, so that they remain distinguishable in grayscale print and for
// the common forms of colour blindness when combined with the dash patterns.
var seriesColors = []color.NRGBA{
	{R: 0x1b, G: 0x4f, B: 0x9c, A: 0xff}, // deep blue
	{R: 0xe0, G: 0x6c, B: 0x00, A: 0xff}, // orange
	{R: 0x2a, G: 0x8a, B: 0x4a, A: 0xff}, // green
	{R: 0x8e, G: 0x3b, B: 0x9e, A: 0xff}, // purple
	{R: 0xc0, G: 0x2b, B: 0x2b, A: 0xff}, // red
	{R: 0x5c, G: 0x5c, B: 0x5c, A: 0xff}, // gray
}

// refColors colour vertical reference lines, kept darker than the series so
// that a reference reads as a reference.
var refColors = []color.NRGBA{
	{R: 0x20, G: 0x20, B: 0x20, A: 0xff},
	{R: 0x9c, G: 0x1c, B: 0x4c, A: 0xff},
	{R: 0x0b, G: 0x6e, B: 0x6e, A: 0xff},
}

// markColor draws target markers on B-mode images: a saturated orange reads on
// black and on white alike.
var markColor = color.NRGBA{R: 0xff, G: 0x8c, B: 0x1a, A: 0xff}

// colorBlack is plain black, for outlines.
var colorBlack color.Color = color.Black

// gridColor is the colour of the background grid of line plots.
var gridColor = color.Gray{Y: 0xe4}

// pick returns the i-th colour of a palette, cycling.
func pick(pal []color.NRGBA, i int) color.NRGBA { return pal[i%len(pal)] }

// tint returns c with its opacity scaled to alpha (0..1).
func tint(c color.NRGBA, alpha float64) color.NRGBA {
	c.A = uint8(math.Round(255 * alpha))
	return c
}

// styleAxes applies the package's fonts and tick style to a plot.
func styleAxes(p *plot.Plot) {
	p.Title.TextStyle = boldStyle(titleSize)
	p.Title.TextStyle.XAlign = draw.XCenter
	p.Title.TextStyle.YAlign = draw.YTop
	p.Title.Padding = vg.Points(6)
	for _, a := range []*plot.Axis{&p.X, &p.Y} {
		rot := a.Label.TextStyle.Rotation
		xa, ya := a.Label.TextStyle.XAlign, a.Label.TextStyle.YAlign
		a.Label.TextStyle = textStyle(labelSize)
		a.Label.TextStyle.Rotation, a.Label.TextStyle.XAlign, a.Label.TextStyle.YAlign = rot, xa, ya
		a.Label.Padding = vg.Points(3)
		xa, ya = a.Tick.Label.XAlign, a.Tick.Label.YAlign
		a.Tick.Label = textStyle(tickSize)
		a.Tick.Label.XAlign, a.Tick.Label.YAlign = xa, ya
		a.Tick.Length = vg.Points(4)
		a.Tick.Width = vg.Points(0.6)
		a.Width = vg.Points(0.8)
	}
}

// resolveDPI returns dpi rounded to a whole number, or DefaultDPI when dpi is
// zero, and checks its range.
func resolveDPI(dpi float64) (float64, error) {
	if dpi == 0 {
		return DefaultDPI, nil
	}
	if !(dpi >= minDPI && dpi <= maxDPI) {
		return 0, fmt.Errorf("report: DPI must be in [%d, %d], got %g", minDPI, maxDPI, dpi)
	}
	// The image canvas takes whole dots per inch.
	return math.Round(dpi), nil
}

// resolveCM returns v, or def when v is zero, and checks that it is a usable
// figure size in centimetres. name is the field, for the error message.
func resolveCM(name string, v, def float64) (float64, error) {
	if v == 0 {
		return def, nil
	}
	if !(v >= 2 && v <= maxSideCM) {
		return 0, fmt.Errorf("report: %s must be in [2, %d] cm, got %g", name, maxSideCM, v)
	}
	return v, nil
}

// maxPixels bounds the pixel count of one figure (about 200 MB as RGBA),
// far above any report figure, so that sizes and resolutions that are each
// allowed cannot together exhaust memory.
const maxPixels = 50_000_000

// newCanvas returns a white image canvas of w x h at dpi, or an error when it
// would exceed maxPixels.
func newCanvas(w, h vg.Length, dpi float64) (*vgimg.Canvas, error) {
	if px := w.Dots(dpi) * h.Dots(dpi); px > maxPixels {
		return nil, fmt.Errorf("report: figure of %.1f x %.1f cm at %g dpi has %.3g pixels, over the limit of %d; make it smaller or lower the DPI",
			w/vg.Centimeter, h/vg.Centimeter, dpi, px, maxPixels)
	}
	return vgimg.NewWith(
		vgimg.UseWH(w, h),
		vgimg.UseDPI(int(math.Round(dpi))),
		vgimg.UseBackgroundColor(color.White),
	), nil
}

// writePNG encodes the canvas as PNG to w.
func writePNG(w io.Writer, c *vgimg.Canvas) error {
	if _, err := (vgimg.PngCanvas{Canvas: c}).WriteTo(w); err != nil {
		return fmt.Errorf("report: writing PNG: %w", err)
	}
	return nil
}

// fitLabels shortens a plot's title and axis labels, if need be, to fit a
// region of w x h.
func fitLabels(p *plot.Plot, w, h vg.Length) {
	p.Title.TextStyle, p.Title.Text = fitText(p.Title.TextStyle, p.Title.Text, w, titleSize-2)
	p.X.Label.TextStyle, p.X.Label.Text = fitText(p.X.Label.TextStyle, p.X.Label.Text, w, smallSize)
	p.Y.Label.TextStyle, p.Y.Label.Text = fitText(p.Y.Label.TextStyle, p.Y.Label.Text, h, smallSize)
}

// fitText returns sty with its font shrunk (down to minSize points) and txt
// shortened with an ellipsis until txt fits in width maxW, so that a long
// title never runs into a neighbouring panel.
func fitText(sty text.Style, txt string, maxW, minSize vg.Length) (text.Style, string) {
	if maxW <= 0 || sty.Width(txt) <= maxW {
		return sty, txt
	}
	for sty.Font.Size-0.5 >= minSize && sty.Width(txt) > maxW {
		sty.Font.Size -= 0.5
	}
	if sty.Width(txt) <= maxW {
		return sty, txt
	}
	r := []rune(txt)
	for len(r) > 1 && sty.Width(string(r)+"…") > maxW {
		r = r[:len(r)-1]
	}
	return sty, string(r) + "…"
}

// measure is a draw.Canvas with no backend, only a rectangle. The plot layout
// code reads rectangles and font metrics only, so it can be asked where the
// data area of a plot would fall before anything is drawn.
func measure(w, h vg.Length) draw.Canvas {
	return draw.Canvas{Rectangle: vg.Rectangle{Max: vg.Point{X: w, Y: h}}}
}

// regionFor returns the size of the region in which p, drawn with p.Draw,
// gets a data area of exactly dw x dh. The axes' share of the region depends
// weakly on its size (tick labels near an edge are pushed inwards in
// proportion), so the size is found by fixed-point iteration, which settles to
// a hundredth of a point in a few steps.
func regionFor(p *plot.Plot, dw, dh vg.Length) (w, h vg.Length) {
	w, h = dw+vg.Points(60), dh+vg.Points(60)
	for range 20 {
		dc := p.DataCanvas(measure(w, h))
		ew := dc.Max.X - dc.Min.X - dw
		eh := dc.Max.Y - dc.Min.Y - dh
		w -= ew
		h -= eh
		if math.Abs(float64(ew)) < 0.01 && math.Abs(float64(eh)) < 0.01 {
			break
		}
	}
	return w, h
}

// sub returns the sub-canvas of c with rectangle r.
func sub(c draw.Canvas, r vg.Rectangle) draw.Canvas {
	return draw.Canvas{Canvas: c.Canvas, Rectangle: r}
}
