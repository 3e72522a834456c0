package report

import (
	"image"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// maxRasterSide bounds the side, in device pixels, of a rendered image raster.
const maxRasterSide = 8192

// tap is one weighted source sample of a resampled output sample.
type tap struct {
	i int
	w float64
}

// resampleTaps returns, for each of m output samples covering the same extent
// as n input samples (pixel centres at (k + 1/2) / n of the extent), the input
// samples and weights that make it. Enlarging (m >= n) interpolates linearly
// between pixel centres and holds the edge values over the outer half pixels;
// shrinking (m < n) averages the input pixels each output pixel covers,
// weighted by the overlap, so that speckle does not alias into a pattern.
func resampleTaps(n, m int) [][]tap {
	taps := make([][]tap, m)
	scale := float64(n) / float64(m)
	if m >= n {
		for j := range taps {
			u := (float64(j)+0.5)*scale - 0.5
			u = math.Max(0, math.Min(float64(n-1), u))
			i0 := int(math.Floor(u))
			f := u - float64(i0)
			if i0 >= n-1 || f == 0 {
				taps[j] = []tap{{i0, 1}}
				continue
			}
			taps[j] = []tap{{i0, 1 - f}, {i0 + 1, f}}
		}
		return taps
	}
	for j := range taps {
		lo, hi := float64(j)*scale, float64(j+1)*scale
		var t []tap
		for i := int(lo); i < n && float64(i) < hi; i++ {
			w := math.Min(hi, float64(i+1)) - math.Max(lo, float64(i))
			if w > 0 {
				t = append(t, tap{i, w / scale})
			}
		}
		taps[j] = t
	}
	return taps
}

// grayRaster renders a dB image of nx columns and nz rows (row 0 shallowest)
// as an mx x mz grayscale raster with row 0 at the top. Values are clamped to
// [-dr, 0] dB first, so that NaN, -Inf and anything below the floor are black
// and anything above 0 dB is white:
//
//	gray = 255 * (clamp(dB, -dr, 0) + dr) / dr
func grayRaster(db []float64, nx, nz, mx, mz int, dr float64) *image.Gray {
	clamped := make([]float64, len(db))
	for i, v := range db {
		switch {
		case math.IsNaN(v) || v < -dr:
			v = -dr
		case v > 0:
			v = 0
		}
		clamped[i] = v
	}
	// Resample along x for every source row, then along z.
	tx := resampleTaps(nx, mx)
	rows := make([]float64, nz*mx)
	for iz := range nz {
		src := clamped[iz*nx : (iz+1)*nx]
		dst := rows[iz*mx : (iz+1)*mx]
		for j, t := range tx {
			var s float64
			for _, k := range t {
				s += k.w * src[k.i]
			}
			dst[j] = s
		}
	}
	tz := resampleTaps(nz, mz)
	out := image.NewGray(image.Rect(0, 0, mx, mz))
	for j, t := range tz {
		line := out.Pix[j*out.Stride : j*out.Stride+mx]
		for ix := range mx {
			var s float64
			for _, k := range t {
				s += k.w * rows[k.i*mx+ix]
			}
			g := math.Round(255 * (s + dr) / dr)
			line[ix] = uint8(math.Max(0, math.Min(255, g)))
		}
	}
	return out
}

// dpier is implemented by raster canvases.
type dpier interface{ DPI() float64 }

// bmodeRaster is a plot.Plotter that draws a dB image in grayscale on a plot
// whose x axis is lateral position and whose y axis is depth, both in mm, the
// y axis inverted so that depth increases downward. The image is resampled to
// the device pixels it covers, so that its look does not depend on how its
// grid compares with the output resolution.
type bmodeRaster struct {
	g  *grid
	dr float64
}

// Plot implements plot.Plotter.
func (r bmodeRaster) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	x0, x1 := trX(r.g.x0mm), trX(r.g.x1mm)
	ya, yb := trY(r.g.z0mm), trY(r.g.z1mm)
	rect := vg.Rectangle{
		Min: vg.Point{X: min(x0, x1), Y: min(ya, yb)},
		Max: vg.Point{X: max(x0, x1), Y: max(ya, yb)},
	}
	dpi := 72.0
	if d, ok := c.Canvas.(dpier); ok {
		dpi = d.DPI()
	}
	side := func(l vg.Length) int {
		return max(1, min(maxRasterSide, int(math.Round(l.Dots(dpi)))))
	}
	mx, mz := side(rect.Size().X), side(rect.Size().Y)
	c.DrawImage(rect, grayRaster(r.g.db, r.g.nx, r.g.nz, mx, mz, r.dr))
}

// DataRange implements plot.DataRanger: the image extent, pixel edges
// included.
func (r bmodeRaster) DataRange() (xmin, xmax, ymin, ymax float64) {
	return r.g.x0mm, r.g.x1mm, r.g.z0mm, r.g.z1mm
}

// frame is a plot.Plotter that outlines the data area, so that an image whose
// edge is white still has a visible edge.
type frame struct{ width vg.Length }

// Plot implements plot.Plotter.
func (f frame) Plot(c draw.Canvas, _ *plot.Plot) {
	sty := draw.LineStyle{Color: colorBlack, Width: f.width}
	r := c.Rectangle
	c.StrokeLines(sty, []vg.Point{
		r.Min, {X: r.Max.X, Y: r.Min.Y}, r.Max, {X: r.Min.X, Y: r.Max.Y}, r.Min,
	})
}

// markers is a plot.Plotter that draws Marks as small crosses with labels on
// a B-mode plot (x and depth in mm). Marks outside the axes are not drawn.
type markers struct{ marks []Mark }

// Plot implements plot.Plotter.
func (m markers) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	// The cross's arms stop short of its centre, so that the target it marks
	// stays visible.
	const armIn, armOut = 1.8, 5.0 // points from the centre along each axis
	cross := draw.LineStyle{Color: markColor, Width: vg.Points(1.3)}
	halo := draw.LineStyle{Color: colorBlack, Width: vg.Points(2.6)}
	lsty := boldStyle(smallSize)
	lsty.Color = markColor
	for _, mk := range m.marks {
		xmm, zmm := mk.XM*1e3, mk.ZM*1e3
		if math.IsNaN(xmm) || math.IsNaN(zmm) ||
			xmm < p.X.Min || xmm > p.X.Max || zmm < p.Y.Min || zmm > p.Y.Max {
			continue
		}
		pt := vg.Point{X: trX(xmm), Y: trY(zmm)}
		a, b := vg.Points(armIn), vg.Points(armOut)
		lines := [][]vg.Point{
			{{X: pt.X - b, Y: pt.Y - b}, {X: pt.X - a, Y: pt.Y - a}},
			{{X: pt.X + a, Y: pt.Y + a}, {X: pt.X + b, Y: pt.Y + b}},
			{{X: pt.X - b, Y: pt.Y + b}, {X: pt.X - a, Y: pt.Y + a}},
			{{X: pt.X + a, Y: pt.Y - a}, {X: pt.X + b, Y: pt.Y - b}},
		}
		// A dark outline under the cross keeps it visible on white.
		lines = c.ClipLinesXY(lines...)
		c.StrokeLines(halo, lines...)
		c.StrokeLines(cross, lines...)
		if mk.Label == "" {
			continue
		}
		// The label goes right of the cross, or left of it where it would
		// leave the data area, and is kept inside vertically.
		s := lsty
		s.XAlign, s.YAlign = draw.XLeft, draw.YCenter
		at := vg.Point{X: pt.X + b + vg.Points(2), Y: pt.Y}
		if at.X+s.Width(mk.Label) > c.Max.X {
			at.X = pt.X - b - vg.Points(2)
			s.XAlign = draw.XRight
		}
		half := s.Height(mk.Label) / 2
		at.Y = max(c.Min.Y+half, min(c.Max.Y-half, at.Y))
		haloText(c, s, at, mk.Label)
	}
}

// haloText draws txt with a thin dark outline, readable on any gray.
func haloText(c draw.Canvas, s draw.TextStyle, at vg.Point, txt string) {
	h := s
	h.Color = colorBlack
	d := vg.Points(0.7)
	for _, o := range [][2]vg.Length{{-d, 0}, {d, 0}, {0, -d}, {0, d}, {-d, -d}, {d, d}, {-d, d}, {d, -d}} {
		c.FillText(h, vg.Point{X: at.X + o[0], Y: at.Y + o[1]}, txt)
	}
	c.FillText(s, at, txt)
}
