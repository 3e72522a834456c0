package report

import (
	"bytes"
	"errors"
	"io"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg"
)

func TestBModeGolden(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name string
		draw func(w io.Writer) error
	}{
		{"bmode_spot.png", func(w io.Writer) error {
			return BModePNG(w, spotImage("Bright spot", 1), BModeOptions{
				WidthCM: 10, DPI: 96,
				Marks: []Mark{{XM: 2e-3, ZM: 12e-3, Label: "target"}},
			})
		}},
		{"bmode_side_by_side.png", func(w io.Writer) error {
			return SideBySidePNG(w, []Image{spotImage("Before", 1), spotImage("After", 2)}, BModeOptions{
				DynamicRangeDB: 50, WidthCM: 14, DPI: 96,
			})
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			var buf bytes.Buffer
			if err := tc.draw(&buf); err != nil {
				t.Fatal(err)
			}
			checkGolden(t, tc.name, buf.Bytes())
		})
	}
}

// halfImage returns a 20 x 20 image, 1 mm pixels, whose pixels are lo dB where
// low(ix, iz) is true and 0 dB elsewhere.
func halfImage(lo float64, low func(ix, iz int) bool) Image {
	const n = 20
	img := Image{XM: make([]float64, n), ZM: make([]float64, n), DB: make([]float64, n*n)}
	for i := range n {
		img.XM[i] = (float64(i) - 9.5) * 1e-3
		img.ZM[i] = (float64(i) + 0.5) * 1e-3
	}
	for iz := range n {
		for ix := range n {
			if low(ix, iz) {
				img.DB[iz*n+ix] = lo
			}
		}
	}
	return img
}

// samplePanel returns the gray level of the drawn B-mode image at fractions
// (fx, fy) of panel i's image area, fy measured from the top.
func samplePanel(t *testing.T, imgs []Image, opt BModeOptions, i int, fx, fy float64) float64 {
	t.Helper()
	c, lay, err := renderBMode(imgs, opt)
	if err != nil {
		t.Fatal(err)
	}
	var buf bytes.Buffer
	if err := writePNG(&buf, c); err != nil {
		t.Fatal(err)
	}
	img := decodePNG(t, buf.Bytes())
	d := lay.data[i]
	x0, y0 := toPixel(d.Max, lay.h, lay.dpi) // top right
	x1, y1 := toPixel(d.Min, lay.h, lay.dpi) // bottom left
	x := x1 + int(fx*float64(x0-x1))
	y := y0 + int(fy*float64(y1-y0))
	return gray(img, x, y)
}

func TestBModeGrayLevels(t *testing.T) {
	t.Parallel()
	// Black is at most dark and white at least bright; a few levels of
	// slack cover the smoothing of the resampled image near its edges.
	const dark, bright = 8, 247
	leftLow := halfImage(-60, func(ix, _ int) bool { return ix < 10 })
	topLow := halfImage(-60, func(_, iz int) bool { return iz < 10 })
	tests := []struct {
		name   string
		imgs   []Image
		opt    BModeOptions
		panel  int
		fx, fy float64
		want   float64 // expected gray level, 0..255
		tol    float64
	}{
		// Low dB shows dark, 0 dB white.
		{"left half -60 dB, left", []Image{leftLow}, BModeOptions{}, 0, 0.25, 0.5, 0, dark},
		{"left half -60 dB, right", []Image{leftLow}, BModeOptions{}, 0, 0.75, 0.5, 255, 255 - bright},
		// Depth increases downward: the shallow half (iz < 10) is on top.
		{"shallow half -60 dB, top", []Image{topLow}, BModeOptions{}, 0, 0.5, 0.25, 0, dark},
		{"shallow half -60 dB, bottom", []Image{topLow}, BModeOptions{}, 0, 0.5, 0.75, 255, 255 - bright},
		// A constant image: -30 dB of 60 is mid gray, 255 * 30/60 = 127.5.
		{"constant -30 dB", []Image{halfImage(-30, func(int, int) bool { return true })}, BModeOptions{}, 0, 0.5, 0.5, 127.5, 2},
		// The dynamic range sets the scale: -30 dB of 40 is 255 * 10/40.
		{"constant -30 dB of 40", []Image{halfImage(-30, func(int, int) bool { return true })}, BModeOptions{DynamicRangeDB: 40}, 0, 0.5, 0.5, 63.75, 2},
		// NaN pixels are drawn as the floor.
		{"NaN is black", []Image{halfImage(math.NaN(), func(int, int) bool { return true })}, BModeOptions{}, 0, 0.5, 0.5, 0, dark},
		// Side by side panels share one dB scale: -15 dB of 60 is 255 * 45/60.
		{"second panel", []Image{
			halfImage(-45, func(int, int) bool { return true }),
			halfImage(-15, func(int, int) bool { return true }),
		}, BModeOptions{}, 1, 0.5, 0.5, 191.25, 2},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			got := samplePanel(t, tc.imgs, tc.opt, tc.panel, tc.fx, tc.fy)
			if math.Abs(got-tc.want) > tc.tol {
				t.Errorf("gray level %.1f, want %.1f ± %.1f", got, tc.want, tc.tol)
			}
		})
	}
}

func TestBModeEqualScaling(t *testing.T) {
	t.Parallel()
	// aspectTol allows the image area to be off by a fraction of a point
	// on a side of several centimetres.
	const aspectTol = 1e-3
	tests := []struct {
		name    string
		nx, nz  int
		opt     BModeOptions
		nPanels int
	}{
		{"square", 20, 20, BModeOptions{}, 1},
		{"deep", 20, 60, BModeOptions{}, 1},
		{"wide", 80, 10, BModeOptions{}, 1},
		{"given width", 30, 20, BModeOptions{WidthCM: 12}, 1},
		{"two panels", 30, 40, BModeOptions{}, 2},
		{"three panels given width", 30, 40, BModeOptions{WidthCM: 20}, 3},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			img := Image{XM: make([]float64, tc.nx), ZM: make([]float64, tc.nz), DB: make([]float64, tc.nx*tc.nz)}
			for i := range img.XM {
				img.XM[i] = float64(i) * 0.3e-3
			}
			for i := range img.ZM {
				img.ZM[i] = 2e-3 + float64(i)*0.3e-3
			}
			imgs := make([]Image, tc.nPanels)
			for i := range imgs {
				imgs[i] = img
			}
			_, lay, err := renderBMode(imgs, tc.opt)
			if err != nil {
				t.Fatal(err)
			}
			want := float64(tc.nz) / float64(tc.nx)
			for i, d := range lay.data {
				got := float64(d.Size().Y / d.Size().X)
				if math.Abs(got/want-1) > aspectTol {
					t.Errorf("panel %d: height/width %.5f, want %.5f", i, got, want)
				}
				d0 := lay.data[0]
				if math.Abs(float64(d.Size().X-d0.Size().X)) > 0.01 || math.Abs(float64(d.Size().Y-d0.Size().Y)) > 0.01 ||
					math.Abs(float64(d.Min.Y-d0.Min.Y)) > 0.01 {
					t.Errorf("panel %d: image area %v, panel 0 %v", i, d, lay.data[0])
				}
				if i > 0 && d.Min.X <= lay.data[i-1].Max.X {
					t.Errorf("panel %d overlaps panel %d", i, i-1)
				}
			}
			if tc.opt.WidthCM != 0 {
				// The layout loop stops within half a point (0.018 cm).
				if got := float64(lay.w / vg.Centimeter); math.Abs(got-tc.opt.WidthCM) > 0.02 {
					t.Errorf("width %.2f cm, want about %g", got, tc.opt.WidthCM)
				}
			}
			if lay.bar.Min.X <= lay.data[len(lay.data)-1].Max.X || lay.bar.Max.X >= lay.w {
				t.Errorf("colour bar %v not between the last image %v and the edge %v", lay.bar, lay.data[len(lay.data)-1], lay.w)
			}
		})
	}
}

func TestBModeErrors(t *testing.T) {
	t.Parallel()
	good := halfImage(-60, func(ix, _ int) bool { return ix < 10 })
	short := good
	short.DB = good.DB[:len(good.DB)-1]
	notIncreasing := good
	notIncreasing.XM = append([]float64(nil), good.XM...)
	notIncreasing.XM[3] = notIncreasing.XM[2]
	notUniform := good
	notUniform.ZM = append([]float64(nil), good.ZM...)
	notUniform.ZM[len(notUniform.ZM)-1] += 0.5e-3
	nanCoord := good
	nanCoord.ZM = append([]float64(nil), good.ZM...)
	nanCoord.ZM[0] = math.NaN()
	tests := []struct {
		name    string
		imgs    []Image
		opt     BModeOptions
		isImage bool   // wraps ErrImage
		substr  string // in the message
	}{
		{"mismatched DB", []Image{short}, BModeOptions{}, true, "len(DB) = 399"},
		{"mismatched DB, second panel", []Image{good, short}, BModeOptions{}, true, "image 1"},
		{"empty", []Image{{}}, BModeOptions{}, true, "empty grid"},
		{"empty with pixels", []Image{{DB: []float64{0}}}, BModeOptions{}, true, "empty grid"},
		{"no images", nil, BModeOptions{}, true, "no images"},
		{"not increasing", []Image{notIncreasing}, BModeOptions{}, true, "XM is not increasing"},
		{"not uniform", []Image{notUniform}, BModeOptions{}, true, "ZM is not uniformly spaced"},
		{"NaN coordinate", []Image{nanCoord}, BModeOptions{}, true, "ZM[0] is not finite"},
		{"negative range", []Image{good}, BModeOptions{DynamicRangeDB: -60}, false, "DynamicRangeDB"},
		{"NaN range", []Image{good}, BModeOptions{DynamicRangeDB: math.NaN()}, false, "DynamicRangeDB"},
		{"tiny width", []Image{good, good, good}, BModeOptions{WidthCM: 3}, false, "WidthCM"},
		{"huge width", []Image{good}, BModeOptions{WidthCM: 1e6}, false, "WidthCM"},
		{"bad DPI", []Image{good}, BModeOptions{DPI: 5}, false, "DPI"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			err := SideBySidePNG(io.Discard, tc.imgs, tc.opt)
			if err == nil {
				t.Fatal("no error")
			}
			if errors.Is(err, ErrImage) != tc.isImage {
				t.Errorf("errors.Is(err, ErrImage) = %v, want %v (%v)", !tc.isImage, tc.isImage, err)
			}
			if !strings.Contains(err.Error(), tc.substr) {
				t.Errorf("error %q does not mention %q", err, tc.substr)
			}
		})
	}
}

func TestBModeDegenerate(t *testing.T) {
	t.Parallel()
	one := func(v float64) Image { return Image{XM: []float64{0}, ZM: []float64{0.01}, DB: []float64{v}} }
	long := spotImage(strings.Repeat("a very long title that cannot fit ", 5), 3)
	tests := []struct {
		name string
		imgs []Image
		opt  BModeOptions
	}{
		{"single pixel", []Image{one(-10)}, BModeOptions{}},
		{"single row", []Image{{XM: []float64{0, 1e-3, 2e-3}, ZM: []float64{0.01}, DB: []float64{0, -20, -40}}}, BModeOptions{}},
		{"single column", []Image{{XM: []float64{0}, ZM: []float64{0.01, 0.011}, DB: []float64{0, -20}}}, BModeOptions{}},
		{"all NaN", []Image{halfImage(math.NaN(), func(int, int) bool { return true })}, BModeOptions{}},
		{"infinities", []Image{{XM: []float64{0, 1e-3}, ZM: []float64{0.01, 0.011}, DB: []float64{math.Inf(-1), math.Inf(1), 5, -1e9}}}, BModeOptions{}},
		{"marks outside and NaN", []Image{spotImage("", 1)}, BModeOptions{Marks: []Mark{{XM: 1, ZM: 1}, {XM: math.NaN()}, {XM: 9.9e-3, ZM: 5.1e-3, Label: "corner"}}}},
		{"long titles", []Image{long, long, long}, BModeOptions{}},
		{"different grids", []Image{spotImage("a", 1), halfImage(-10, func(int, int) bool { return true })}, BModeOptions{}},
		{"tiny range", []Image{spotImage("", 1)}, BModeOptions{DynamicRangeDB: 0.5}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			var buf bytes.Buffer
			if err := SideBySidePNG(&buf, tc.imgs, tc.opt); err != nil {
				t.Fatal(err)
			}
			if b := decodePNG(t, buf.Bytes()).Bounds(); b.Empty() {
				t.Errorf("empty PNG %v", b)
			}
		})
	}
}
