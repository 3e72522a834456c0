package report

import (
	"errors"
	"fmt"
	"io"
	"math"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// Image is a B-mode image in dB (0 dB = max) on a rectangular grid.
// DB[iz*len(XM)+ix] is the pixel at lateral position XM[ix] and depth ZM[iz];
// XM and ZM are pixel centres in m, increasing and uniformly spaced. NaN
// pixels are drawn black, like values at or below the floor.
type Image struct {
	XM, ZM []float64
	DB     []float64
	Title  string
}

// BModeOptions sets how B-mode images are drawn. The zero value is usable.
type BModeOptions struct {
	// DynamicRangeDB is the displayed range below 0 dB: -DynamicRangeDB is
	// black, 0 dB is white. Zero means 60.
	DynamicRangeDB float64
	// WidthCM is the width of the whole figure, colour bar included; the
	// height follows from the image's aspect ratio. Zero fits the figure in
	// about 16 cm x 14 cm.
	WidthCM float64
	// Marks are drawn as small crosses with labels, e.g. the true positions of
	// point targets. In a side-by-side figure they are drawn on every panel.
	Marks []Mark
	// DPI is the output resolution; zero means DefaultDPI.
	DPI float64
}

// Mark is a point of interest on a B-mode image, in m.
type Mark struct {
	XM, ZM float64
	Label  string
}

// ErrImage is wrapped by errors about malformed Image values.
var ErrImage = errors.New("report: bad image")

const (
	// defaultDynamicRangeDB is the displayed range when none is given; 60 dB
	// is the customary B-mode display range.
	defaultDynamicRangeDB = 60
	// maxDynamicRangeDB bounds the displayed range to something a display
	// can show.
	maxDynamicRangeDB = 300
	// uniformTol is the relative deviation of a grid step from the mean step
	// beyond which a grid is rejected as not uniform; it leaves room for grids
	// built by accumulating float steps.
	uniformTol = 1e-3
	// singlePixelM is the pixel size assumed along an axis with a single pixel
	// when the other axis cannot supply one: 0.1 mm, a typical B-mode pixel.
	singlePixelM = 1e-4
	// panelGap separates side-by-side panels, beyond their own margins.
	panelGap = 12
	// maxDataHeightCM bounds the image height when the figure size is left
	// to the package, so that a deep, narrow image stays on one screen.
	maxDataHeightCM = 12
	// maxPanelHeightCM is that bound for side-by-side figures.
	maxPanelHeightCM = 10
	// minDataWidthCM is the narrowest image panel that is still legible.
	minDataWidthCM = 1
)

// grid is a validated image with its extent in mm, pixel edges included.
type grid struct {
	nx, nz     int
	db         []float64
	x0mm, x1mm float64
	z0mm, z1mm float64
	title      string
}

// step returns the uniform spacing of the increasing coordinates v, or an
// error naming field. A single coordinate has step 0.
func step(field string, v []float64) (float64, error) {
	for i, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return 0, fmt.Errorf("%s[%d] is not finite (%g)", field, i, x)
		}
		if i > 0 && x <= v[i-1] {
			return 0, fmt.Errorf("%s is not increasing at index %d (%g after %g)", field, i, x, v[i-1])
		}
	}
	if len(v) < 2 {
		return 0, nil
	}
	d := (v[len(v)-1] - v[0]) / float64(len(v)-1)
	for i := 1; i < len(v); i++ {
		if math.Abs(v[i]-v[i-1]-d) > uniformTol*d {
			return 0, fmt.Errorf("%s is not uniformly spaced at index %d (step %g, mean step %g)", field, i, v[i]-v[i-1], d)
		}
	}
	return d, nil
}

// newGrid validates img and returns it as a grid. name identifies the image in
// errors.
func newGrid(name string, img Image) (*grid, error) {
	nx, nz := len(img.XM), len(img.ZM)
	if nx == 0 || nz == 0 {
		return nil, fmt.Errorf("%w: %s: empty grid (len(XM) = %d, len(ZM) = %d)", ErrImage, name, nx, nz)
	}
	if len(img.DB) != nx*nz {
		return nil, fmt.Errorf("%w: %s: len(DB) = %d, want len(XM)*len(ZM) = %d*%d = %d",
			ErrImage, name, len(img.DB), nx, nz, nx*nz)
	}
	dx, err := step("XM", img.XM)
	if err != nil {
		return nil, fmt.Errorf("%w: %s: %v", ErrImage, name, err)
	}
	dz, err := step("ZM", img.ZM)
	if err != nil {
		return nil, fmt.Errorf("%w: %s: %v", ErrImage, name, err)
	}
	switch {
	case dx == 0 && dz == 0:
		dx, dz = singlePixelM, singlePixelM
	case dx == 0:
		dx = dz
	case dz == 0:
		dz = dx
	}
	return &grid{
		nx: nx, nz: nz, db: img.DB,
		x0mm: (img.XM[0] - dx/2) * 1e3, x1mm: (img.XM[nx-1] + dx/2) * 1e3,
		z0mm: (img.ZM[0] - dz/2) * 1e3, z1mm: (img.ZM[nz-1] + dz/2) * 1e3,
		title: img.Title,
	}, nil
}

// resolveDR returns the dynamic range to display.
func resolveDR(dr float64) (float64, error) {
	if dr == 0 {
		return defaultDynamicRangeDB, nil
	}
	if !(dr > 0 && dr <= maxDynamicRangeDB) {
		return 0, fmt.Errorf("report: DynamicRangeDB must be in (0, %d], got %g", maxDynamicRangeDB, dr)
	}
	return dr, nil
}

// bmodeLayout is where the parts of a B-mode figure go, in canvas coordinates
// (points, origin at the bottom left).
type bmodeLayout struct {
	w, h   vg.Length
	dpi    float64
	region []vg.Rectangle // each panel's plot, axes and title included
	data   []vg.Rectangle // each panel's image area
	bar    vg.Rectangle   // the colour bar
}

// BModePNG draws one B-mode image as a PNG: x (mm) horizontal, depth (mm)
// increasing downward, equal mm scaling on both axes, grayscale from black at
// -DynamicRangeDB to white at 0 dB, and a dB colour bar on the right.
//
// It returns an error wrapping ErrImage for an empty grid, len(DB) !=
// len(XM)*len(ZM), or coordinates that are not finite, increasing and
// uniform.
func BModePNG(w io.Writer, img Image, opt BModeOptions) error {
	return SideBySidePNG(w, []Image{img}, opt)
}

// SideBySidePNG draws several B-mode images in one PNG, left to right (for
// before/after comparisons): each with its title above, all on the same mm
// axes (the union of their extents) and the same dB range, with one shared
// colour bar. Only the first panel carries the depth axis label.
//
// Errors are as for BModePNG, naming the image by index; no images is an
// error too.
func SideBySidePNG(w io.Writer, imgs []Image, opt BModeOptions) error {
	c, _, err := renderBMode(imgs, opt)
	if err != nil {
		return err
	}
	return writePNG(w, c)
}

// renderBMode draws imgs side by side and returns the canvas and its layout.
func renderBMode(imgs []Image, opt BModeOptions) (*vgimg.Canvas, *bmodeLayout, error) {
	if len(imgs) == 0 {
		return nil, nil, fmt.Errorf("%w: no images", ErrImage)
	}
	dr, err := resolveDR(opt.DynamicRangeDB)
	if err != nil {
		return nil, nil, err
	}
	dpi, err := resolveDPI(opt.DPI)
	if err != nil {
		return nil, nil, err
	}
	grids := make([]*grid, len(imgs))
	for i, img := range imgs {
		name := "image"
		if len(imgs) > 1 {
			name = fmt.Sprintf("image %d", i)
		}
		if img.Title != "" {
			name += fmt.Sprintf(" (%q)", img.Title)
		}
		if grids[i], err = newGrid(name, img); err != nil {
			return nil, nil, err
		}
	}

	// Shared axes: the union of the extents.
	x0, x1, z0, z1 := grids[0].x0mm, grids[0].x1mm, grids[0].z0mm, grids[0].z1mm
	anyTitle := false
	for _, g := range grids {
		x0, x1 = min(x0, g.x0mm), max(x1, g.x1mm)
		z0, z1 = min(z0, g.z0mm), max(z1, g.z1mm)
		anyTitle = anyTitle || g.title != ""
	}
	aspect := (z1 - z0) / (x1 - x0)

	plots := make([]*plot.Plot, len(grids))
	for i, g := range grids {
		p := plot.New()
		styleAxes(p)
		if anyTitle {
			// A blank title keeps every panel's image area at the same height.
			p.Title.Text = " "
		}
		p.X.Label.Text = "x (mm)"
		if i == 0 {
			p.Y.Label.Text = "depth (mm)"
		}
		p.Y.Scale = plot.InvertedScale{Normalizer: plot.LinearScale{}}
		p.X.Padding, p.Y.Padding = 0, 0
		p.X.Tick.Marker, p.Y.Tick.Marker = niceTicks{max: 7}, niceTicks{max: 8}
		p.Add(bmodeRaster{g: g, dr: dr}, markers{marks: opt.Marks}, frame{width: vg.Points(0.8)})
		p.X.Min, p.X.Max, p.Y.Min, p.Y.Max = x0, x1, z0, z1
		plots[i] = p
	}

	// Size the image areas: equal mm scaling means dh = dw * aspect. The
	// figure width is the target (WidthCM, or the default width unless the
	// image height cap binds); the axes' share of it is first estimated, then
	// corrected from the measured layout.
	n := vg.Length(len(plots))
	var overX vg.Length // horizontal space taken by axes, summed over panels
	const probe = 10 * vg.Centimeter
	for _, p := range plots {
		rw, _ := regionFor(p, probe, probe*vg.Length(aspect))
		overX += rw - probe
	}
	fixed := overX + (n-1)*vg.Points(panelGap) + colorBarWidth(dr) + vg.Points(marginLeft)
	target := vg.Length(defaultWidthCM) * vg.Centimeter
	maxH := vg.Length(math.Inf(1))
	if opt.WidthCM != 0 {
		wcm, err := resolveCM("WidthCM", opt.WidthCM, defaultWidthCM)
		if err != nil {
			return nil, nil, err
		}
		target = vg.Length(wcm) * vg.Centimeter
	} else {
		maxH = vg.Length(maxDataHeightCM) * vg.Centimeter
		if len(plots) > 1 {
			maxH = vg.Length(maxPanelHeightCM) * vg.Centimeter
		}
	}
	dw := (target - fixed) / n
	var lay *bmodeLayout
	for range 4 {
		if dw < minDataWidthCM*vg.Centimeter {
			return nil, nil, fmt.Errorf("report: WidthCM %g leaves %.2g cm per image; give at least %.3g cm",
				opt.WidthCM, dw/vg.Centimeter, (target-n*dw+n*minDataWidthCM*vg.Centimeter)/vg.Centimeter)
		}
		dh := dw * vg.Length(aspect)
		capped := dh > maxH
		if capped {
			dh = maxH
			dw = dh / vg.Length(aspect)
		}
		if dh > maxSideCM*vg.Centimeter {
			return nil, nil, fmt.Errorf("report: image aspect ratio (depth/width = %.3g) gives a figure %.0f cm tall; give a smaller WidthCM",
				aspect, dh/vg.Centimeter)
		}
		lay = placeBMode(plots, dw, dh, dr, dpi)
		miss := lay.w - target
		if capped || math.Abs(float64(miss)) < 0.5 {
			break
		}
		dw -= miss / n
	}

	c, err := newCanvas(lay.w, lay.h, dpi)
	if err != nil {
		return nil, nil, err
	}
	dc := draw.New(c)
	for i, p := range plots {
		rc := sub(dc, lay.region[i])
		p.Draw(rc)
		if g := grids[i]; g.title != "" {
			drawPanelTitle(rc, lay.data[i], g.title)
		}
	}
	drawColorBar(dc, lay.bar, dr, dpi)
	return c, lay, nil
}

// placeBMode lays out B-mode panels whose image areas are dw x dh, side by
// side, with the colour bar at the right. It sets the plots' tick densities to
// suit that size.
func placeBMode(plots []*plot.Plot, dw, dh vg.Length, dr, dpi float64) *bmodeLayout {
	// x labels need room for "-20", depth labels for one line of text.
	for _, p := range plots {
		p.X.Tick.Marker = niceTicks{max: ticksFor(dw, vg.Points(34), 7)}
		p.Y.Tick.Marker = niceTicks{max: ticksFor(dh, vg.Points(22), 8)}
	}
	lay := &bmodeLayout{dpi: dpi}
	x := vg.Points(marginLeft)
	for i, p := range plots {
		rw, rh := regionFor(p, dw, dh)
		if i > 0 {
			x += vg.Points(panelGap)
		}
		r := vg.Rectangle{
			Min: vg.Point{X: x, Y: vg.Points(marginBottom)},
			Max: vg.Point{X: x + rw, Y: vg.Points(marginBottom) + rh},
		}
		lay.region = append(lay.region, r)
		lay.data = append(lay.data, p.DataCanvas(draw.Canvas{Rectangle: r}).Rectangle)
		lay.h = max(lay.h, r.Max.Y+vg.Points(marginTop))
		x += rw
	}
	last := lay.data[len(lay.data)-1]
	bx := max(last.Max.X+vg.Points(barGap), x+vg.Points(3))
	lay.bar = vg.Rectangle{
		Min: vg.Point{X: bx, Y: last.Min.Y},
		Max: vg.Point{X: bx + vg.Points(barWidth), Y: last.Max.Y},
	}
	lay.w = bx + colorBarWidth(dr) - vg.Points(barGap)
	return lay
}

// drawPanelTitle writes a panel's title centred over its image area, shrunk
// to fit its region. (The plot's own title is left blank so that it only
// reserves the space: the library centres titles over the whole region, axes
// included, which puts them off-centre over the image.)
func drawPanelTitle(c draw.Canvas, data vg.Rectangle, title string) {
	sty := boldStyle(titleSize)
	sty.XAlign, sty.YAlign = draw.XCenter, draw.YTop
	// Titles may reach a little past their image, into the gap to the next.
	sty, title = fitText(sty, title, data.Size().X+vg.Points(panelGap), titleSize-2)
	cx := (data.Min.X + data.Max.X) / 2
	half := sty.Width(title) / 2
	// Keep the title inside the region when the image sits off-centre.
	cx = max(cx, c.Min.X+half)
	cx = min(cx, c.Max.X-half)
	descent := sty.FontExtents().Descent
	c.FillText(sty, vg.Point{X: cx, Y: c.Max.Y + descent}, title)
}
