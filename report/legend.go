package report

import (
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
)

// Legend geometry, in points.
const (
	legendThumb    = 22  // thumbnail width
	legendThumbGap = 4   // thumbnail to text
	legendEntryGap = 16  // between entries in a row
	legendRowScale = 1.5 // row height, in text heights
	legendTopGap   = 4   // between the axes and the first row
)

// legendEntry is one item of a legend below a plot.
type legendEntry struct {
	label  string
	thumbs []plot.Thumbnailer
}

// legendRows lays entries out in rows no wider than width and returns the
// entries of each row; an entry too wide for any row gets a row of its own.
func legendRows(entries []legendEntry, width vg.Length) [][]legendEntry {
	sty := textStyle(tickSize)
	var rows [][]legendEntry
	var row []legendEntry
	var used vg.Length
	for _, e := range entries {
		ew := entryWidth(sty.Width(e.label))
		if len(row) > 0 && used+vg.Points(legendEntryGap)+ew > width {
			rows = append(rows, row)
			row, used = nil, 0
		}
		if len(row) > 0 {
			used += vg.Points(legendEntryGap)
		}
		row = append(row, e)
		used += ew
	}
	if len(row) > 0 {
		rows = append(rows, row)
	}
	return rows
}

// entryWidth is the width of an entry whose text is tw wide.
func entryWidth(tw vg.Length) vg.Length {
	return vg.Points(legendThumb+legendThumbGap) + tw
}

// legendRowHeight is the height of one legend row.
func legendRowHeight() vg.Length {
	return vg.Length(legendRowScale) * textStyle(tickSize).Height("Ag")
}

// legendHeight returns the height a legend of entries takes below a plot
// whose legend rows may be width wide; zero for no entries.
func legendHeight(entries []legendEntry, width vg.Length) vg.Length {
	if len(entries) == 0 {
		return 0
	}
	return vg.Points(legendTopGap) + vg.Length(len(legendRows(entries, width)))*legendRowHeight()
}

// drawLegend draws entries in rows centred on the horizontal span of area,
// from the top of area downwards.
func drawLegend(c draw.Canvas, entries []legendEntry, area vg.Rectangle) {
	sty := textStyle(tickSize)
	sty.XAlign, sty.YAlign = draw.XLeft, draw.YCenter
	width := area.Size().X
	rh := legendRowHeight()
	y := area.Max.Y - vg.Points(legendTopGap) - rh/2
	for _, row := range legendRows(entries, width) {
		var rw vg.Length
		for i, e := range row {
			if i > 0 {
				rw += vg.Points(legendEntryGap)
			}
			rw += entryWidth(sty.Width(e.label))
		}
		x := area.Min.X + max(0, (width-rw)/2)
		for _, e := range row {
			s, label := fitText(sty, e.label, width-entryWidth(0), smallSize-1)
			icon := draw.Canvas{Canvas: c.Canvas, Rectangle: vg.Rectangle{
				Min: vg.Point{X: x, Y: y - rh/3},
				Max: vg.Point{X: x + vg.Points(legendThumb), Y: y + rh/3},
			}}
			for _, t := range e.thumbs {
				t.Thumbnail(&icon)
			}
			tx := x + vg.Points(legendThumb+legendThumbGap)
			c.FillText(s, vg.Point{X: tx, Y: y}, label)
			x = tx + s.Width(label) + vg.Points(legendEntryGap)
		}
		y -= rh
	}
}
