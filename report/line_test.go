package report

import (
	"bytes"
	"errors"
	"io"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
)

// sweep is a small speed sweep: a focus curve peaking at 1512 m/s sampled
// every 10 m/s from 1420 to 1620 m/s, with one missing sample.
func sweep() (c, focus []float64) {
	for v := 1420.0; v <= 1620; v += 10 {
		c = append(c, v)
		focus = append(focus, math.Exp(-(v-1512)*(v-1512)/(2*40*40)))
	}
	focus[4] = math.NaN()
	return c, focus
}

func TestLineGolden(t *testing.T) {
	t.Parallel()
	c, focus := sweep()
	lp := LinePlot{
		Title: "Speed sweep", XLabel: "assumed speed (m/s)", YLabel: "focus metric",
		Series: []Series{
			{Name: "speckle brightness", X: c, Y: focus, Points: true},
			{Name: "model", X: []float64{1420, 1620}, Y: []float64{0.2, 0.6}, Dashed: true},
		},
		Bands:   []Band{{Lo: 1526, Hi: 1498, Label: "95 % interval"}},
		VLines:  []VLine{{X: 1540, Label: "true speed"}},
		WidthCM: 12, HeightCM: 8, DPI: 96,
	}
	var buf bytes.Buffer
	if err := LinePNG(&buf, lp); err != nil {
		t.Fatal(err)
	}
	checkGolden(t, "line_band_vline.png", buf.Bytes())
}

// TestXSpan: the span widens the axis to hold it, never narrows it below
// the data, and is ignored when empty, reversed or not finite.
func TestXSpan(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		min, max float64
		span     [2]float64
		want     [2]float64
	}{
		{1, 2, [2]float64{0.5, 3.5}, [2]float64{0.5, 3.5}},
		{0, 5, [2]float64{0.5, 3.5}, [2]float64{0, 5}},
		{1, 2, [2]float64{}, [2]float64{1, 2}},
		{1, 2, [2]float64{3, 0}, [2]float64{1, 2}},
		{1, 2, [2]float64{math.NaN(), 4}, [2]float64{1, 2}},
	} {
		a := plot.New().X
		a.Min, a.Max = c.min, c.max
		spanRange(&a, c.span)
		if a.Min != c.want[0] || a.Max != c.want[1] {
			t.Errorf("data %g..%g, span %v: axis %g..%g, want %v", c.min, c.max, c.span, a.Min, a.Max, c.want)
		}
	}
	// a strip plot of two categories draws
	lp := LinePlot{Series: []Series{{Name: "a", X: []float64{1, math.NaN(), 1.04}, Y: []float64{1500, math.NaN(), 1510}, Points: true}},
		XSpan: [2]float64{0.5, 2.5}, WidthCM: 8, HeightCM: 6, DPI: 72}
	if err := LinePNG(io.Discard, lp); err != nil {
		t.Fatal(err)
	}
}

func TestLineErrors(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name     string
		p        LinePlot
		isLength bool
		substr   string
	}{
		{"mismatched series", LinePlot{Series: []Series{{Name: "ok"}, {Name: "bad", X: []float64{1, 2}, Y: []float64{1}}}}, true, `series 1 ("bad"): len(X) = 2, len(Y) = 1`},
		{"Y without X", LinePlot{Series: []Series{{Y: []float64{1}}}}, true, "len(X) = 0"},
		{"bad width", LinePlot{WidthCM: -1}, false, "WidthCM"},
		{"bad height", LinePlot{HeightCM: math.Inf(1)}, false, "HeightCM"},
		{"bad DPI", LinePlot{DPI: 1e4}, false, "DPI"},
		{"too many pixels", LinePlot{WidthCM: 100, HeightCM: 100, DPI: 600}, false, "pixels"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			err := LinePNG(io.Discard, tc.p)
			if err == nil {
				t.Fatal("no error")
			}
			if errors.Is(err, ErrLength) != tc.isLength {
				t.Errorf("errors.Is(err, ErrLength) = %v, want %v (%v)", !tc.isLength, tc.isLength, err)
			}
			if !strings.Contains(err.Error(), tc.substr) {
				t.Errorf("error %q does not mention %q", err, tc.substr)
			}
		})
	}
}

func TestLineDegenerate(t *testing.T) {
	t.Parallel()
	nan := math.NaN()
	manyNames := make([]Series, 12)
	for i := range manyNames {
		manyNames[i] = Series{Name: strings.Repeat("series name ", i+1), X: []float64{0, 1}, Y: []float64{float64(i), float64(i + 1)}}
	}
	tests := []struct {
		name string
		p    LinePlot
	}{
		{"zero value", LinePlot{}},
		{"empty series", LinePlot{Title: "t", Series: []Series{{Name: "a"}}}},
		{"all NaN", LinePlot{Series: []Series{{Name: "a", X: []float64{nan, 1}, Y: []float64{1, nan}, Points: true}}}},
		{"single point", LinePlot{Series: []Series{{X: []float64{3}, Y: []float64{4}}}}},
		{"isolated points between NaNs", LinePlot{Series: []Series{{X: []float64{1, 2, 3, 4, 5}, Y: []float64{1, nan, 3, nan, 5}}}}},
		{"constant", LinePlot{Series: []Series{{X: []float64{1, 1, 1}, Y: []float64{2, 2, 2}}}}},
		{"infinities", LinePlot{Series: []Series{{X: []float64{1, 2, 3}, Y: []float64{math.Inf(1), 2, math.Inf(-1)}}}}},
		{"only a band and a line", LinePlot{Bands: []Band{{Lo: 1, Hi: 2, Label: "b"}}, VLines: []VLine{{X: 3, Label: "v"}}}},
		{"NaN band and line", LinePlot{Bands: []Band{{Lo: nan, Hi: 2}}, VLines: []VLine{{X: math.Inf(1)}}, Series: []Series{{X: []float64{0, 1}, Y: []float64{0, 1}}}}},
		{"zero-width band", LinePlot{Bands: []Band{{Lo: 0.5, Hi: 0.5}}, Series: []Series{{X: []float64{0, 1}, Y: []float64{0, 1}}}}},
		{"tiny values", LinePlot{Series: []Series{{X: []float64{0, 1e-9, 2e-9}, Y: []float64{1e-12, 3e-12, 2e-12}}}}},
		{"huge values", LinePlot{Series: []Series{{X: []float64{0, 1e9}, Y: []float64{-1e12, 1e12}}}}},
		{"many legend entries", LinePlot{Series: manyNames}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			var buf bytes.Buffer
			if err := LinePNG(&buf, tc.p); err != nil {
				t.Fatal(err)
			}
			decodePNG(t, buf.Bytes())
		})
	}
}

func TestLineSize(t *testing.T) {
	t.Parallel()
	// The PNG is WidthCM x HeightCM at DPI: 16 cm at 120 dpi is
	// 16 / 2.54 * 120 = 755.9 pixels, rounded.
	var buf bytes.Buffer
	if err := LinePNG(&buf, LinePlot{}); err != nil {
		t.Fatal(err)
	}
	b := decodePNG(t, buf.Bytes()).Bounds()
	if b.Dx() != 756 || b.Dy() != 472 {
		t.Errorf("size %v, want 756 x 472", b.Size())
	}
}

func TestLineBandShading(t *testing.T) {
	t.Parallel()
	// Inside a band the background is tinted; outside it is white. Sampled at
	// three quarters of the height, where neither the series (y = 0, the middle
	// of the sanitised range -1..1) nor a grid line passes.
	lp := LinePlot{
		Series: []Series{{X: []float64{0, 10}, Y: []float64{0, 0}}},
		Bands:  []Band{{Lo: 6, Hi: 8}},
	}
	c, f, err := renderLine(lp)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := writePNG(&buf, c); err != nil {
		t.Fatal(err)
	}
	img := decodePNG(t, buf.Bytes())
	at := func(fx float64) float64 {
		// x = 0..10 spans the data area less the 2 % margin on each side.
		p := f.data.Min
		p.X += f.data.Size().X * vg.Length((fx/10+xMargin)/(1+2*xMargin))
		p.Y += f.data.Size().Y * 0.75
		x, y := toPixel(p, f.h, f.dpi)
		return gray(img, x, y)
	}
	if g := at(7); g > 240 {
		t.Errorf("inside the band: gray %.0f, want tinted (< 240)", g)
	}
	if g := at(3.3); g < 250 {
		t.Errorf("outside the band: gray %.0f, want white", g)
	}
}
