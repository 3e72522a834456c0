package report

import (
	"image"
	"math"
	"strconv"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Colour bar geometry, in points.
const (
	barGap      = 10  // from the data area to the bar
	barWidth    = 10  // the bar itself
	barTick     = 3   // tick marks right of the bar
	barLabelPad = 2   // from a tick mark to its label
	barTitleGap = 6   // from the widest tick label to the rotated "dB"
	barLabelFit = 1.6 // tick labels are spaced at least this many label heights
)

// dbTicks returns the colour bar tick values for a dynamic range of dr dB:
// 0, -step, -2 step, ... down to -dr, with the smallest step from a list of
// round numbers that gives at most maxTicks ticks.
func dbTicks(dr float64, maxTicks int) []float64 {
	maxTicks = max(maxTicks, 2)
	steps := []float64{1, 2, 5, 10, 20, 25, 50, 100, 200, 500, 1000}
	step := steps[len(steps)-1]
	for _, s := range steps {
		if math.Floor(dr/s)+1 <= float64(maxTicks) {
			step = s
			break
		}
	}
	var ticks []float64
	for v := 0.0; v >= -dr-1e-9; v -= step {
		ticks = append(ticks, v)
	}
	return ticks
}

// dbLabel formats a colour bar tick value.
func dbLabel(v float64) string {
	if v == 0 {
		return "0"
	}
	return strconv.FormatFloat(v, 'g', 6, 64)
}

// colorBarWidth returns the width the colour bar needs right of the data area,
// for a dynamic range of dr dB.
func colorBarWidth(dr float64) vg.Length {
	ts, ls := textStyle(tickSize), textStyle(labelSize)
	var lw vg.Length
	for _, v := range dbTicks(dr, 1000) {
		lw = max(lw, ts.Width(dbLabel(v)))
	}
	return vg.Points(barGap+barWidth+barTick+barLabelPad+barTitleGap+marginRight) +
		lw + ls.Height("dB")
}

// drawColorBar draws a vertical grayscale bar in rect (white = 0 dB at the
// top, black = -dr dB at the bottom), with ticks and labels on its right and
// the unit "dB" beside them.
func drawColorBar(c draw.Canvas, rect vg.Rectangle, dr, dpi float64) {
	h := rect.Size().Y
	n := max(2, min(maxRasterSide, int(math.Round(h.Dots(dpi)))))
	img := image.NewGray(image.Rect(0, 0, 1, n))
	for j := range n {
		// Row 0 is the top of the bar: 0 dB, white. The pixel centre of row j
		// sits at (j + 1/2) / n of the way down.
		img.Pix[j*img.Stride] = uint8(math.Round(255 * (1 - (float64(j)+0.5)/float64(n))))
	}
	c.DrawImage(rect, img)

	line := draw.LineStyle{Color: colorBlack, Width: vg.Points(0.6)}
	c.StrokeLines(line, []vg.Point{
		rect.Min, {X: rect.Max.X, Y: rect.Min.Y}, rect.Max, {X: rect.Min.X, Y: rect.Max.Y}, rect.Min,
	})

	ts := textStyle(tickSize)
	ts.XAlign, ts.YAlign = draw.XLeft, draw.YCenter
	maxTicks := min(7, int(float64(h)/(barLabelFit*float64(ts.Height("0")))))
	var lw vg.Length
	for _, v := range dbTicks(dr, maxTicks) {
		y := rect.Max.Y - h*vg.Length(-v/dr)
		c.StrokeLine2(line, rect.Max.X, y, rect.Max.X+vg.Points(barTick), y)
		lbl := dbLabel(v)
		c.FillText(ts, vg.Point{X: rect.Max.X + vg.Points(barTick+barLabelPad), Y: y}, lbl)
		lw = max(lw, ts.Width(lbl))
	}

	// The unit reads bottom to top like the depth axis label; as there, the
	// text's baseline is placed one text height right of where it starts.
	ls := textStyle(labelSize)
	ls.Rotation = math.Pi / 2
	ls.XAlign, ls.YAlign = draw.XCenter, draw.YBottom
	x := rect.Max.X + vg.Points(barTick+barLabelPad+barTitleGap) + lw +
		ls.Height("dB") - ls.FontExtents().Descent
	c.FillText(ls, vg.Point{X: x, Y: rect.Min.Y + h/2}, "dB")
}
