package report

import (
	"bytes"
	"flag"
	"image"
	"image/png"
	"io"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"
	"testing"

	"gonum.org/v1/plot/vg"
)

var regen = flag.Bool("regen", false, "rewrite golden files")

const (
	// pixelTol is the largest per-channel difference (of 255) that counts as
	// the same pixel: anti-aliased glyph edges move by more than this when
	// font rasterisation changes, flat areas and image pixels do not.
	pixelTol = 24
	// maxDiffFraction is the share of pixels allowed to differ by more than
	// pixelTol: enough for text rendered a sub-pixel apart, far less than any
	// change of layout, colour or data would cause.
	maxDiffFraction = 0.01
)

// checkGolden compares the PNG got with testdata/name, or rewrites that file
// when the test runs with -regen.
func checkGolden(t *testing.T, name string, got []byte) {
	t.Helper()
	path := filepath.Join("testdata", name)
	if *regen {
		if err := os.WriteFile(path, got, 0o644); err != nil {
			t.Fatal(err)
		}
		return
	}
	want, err := os.ReadFile(path)
	if err != nil {
		t.Fatalf("%v (run go test ./report -run %s -regen to create it)", err, t.Name())
	}
	gi, wi := decodePNG(t, got), decodePNG(t, want)
	if gi.Bounds() != wi.Bounds() {
		t.Fatalf("%s: size %v, golden %v", name, gi.Bounds().Size(), wi.Bounds().Size())
	}
	b := gi.Bounds()
	var diff int
	for y := b.Min.Y; y < b.Max.Y; y++ {
		for x := b.Min.X; x < b.Max.X; x++ {
			if pixelDiff(gi.At(x, y), wi.At(x, y)) > pixelTol {
				diff++
			}
		}
	}
	frac := float64(diff) / float64(b.Dx()*b.Dy())
	if frac > maxDiffFraction {
		// Kept after the test (unlike t.TempDir) so that it can be looked at.
		out := filepath.Join(os.TempDir(), "celerity-report-got-"+name)
		_ = os.WriteFile(out, got, 0o644)
		t.Errorf("%s: %.2f %% of pixels differ by more than %d (limit %.2f %%); output written to %s",
			name, 100*frac, pixelTol, 100*maxDiffFraction, out)
	}
}

// pixelDiff is the largest channel difference of two colours, in 0..255.
func pixelDiff(a, b interface{ RGBA() (r, g, b, a uint32) }) int {
	ar, ag, ab, aa := a.RGBA()
	br, bg, bb, ba := b.RGBA()
	d := 0
	for _, p := range [][2]uint32{{ar, br}, {ag, bg}, {ab, bb}, {aa, ba}} {
		d = max(d, int(math.Abs(float64(p[0])-float64(p[1])))>>8)
	}
	return d
}

// decodePNG decodes b or fails the test.
func decodePNG(t *testing.T, b []byte) image.Image {
	t.Helper()
	img, err := png.Decode(bytes.NewReader(b))
	if err != nil {
		t.Fatalf("decoding PNG: %v", err)
	}
	return img
}

// gray returns the luminance-like mean of a pixel's R, G and B, in 0..255.
func gray(img image.Image, x, y int) float64 {
	r, g, b, _ := img.At(x, y).RGBA()
	return float64(r+g+b) / 3 / 257
}

// toPixel converts a point of a canvas h points tall at dpi to image pixel
// coordinates (origin top left).
func toPixel(p vg.Point, h vg.Length, dpi float64) (x, y int) {
	return int(p.X.Dots(dpi)), int((h - p.Y).Dots(dpi))
}

// spotImage is a 40 x 30 pixel B-mode image, 0.5 mm pixels over x in
// [-10, 10] mm and depth in [5, 20] mm, with Rayleigh speckle 45 dB below a
// Gaussian bright spot (sigma 1 mm) at x = 2 mm, depth 12 mm. Seeded, so the
// same on every run.
func spotImage(title string, seed uint64) Image {
	const nx, nz, pitch = 40, 30, 0.5e-3
	rng := rand.New(rand.NewPCG(seed, 2))
	img := Image{XM: make([]float64, nx), ZM: make([]float64, nz), DB: make([]float64, nx*nz), Title: title}
	for i := range img.XM {
		img.XM[i] = -10e-3 + (float64(i)+0.5)*pitch
	}
	for i := range img.ZM {
		img.ZM[i] = 5e-3 + (float64(i)+0.5)*pitch
	}
	env := make([]float64, nx*nz)
	peak := 0.0
	for iz, z := range img.ZM {
		for ix, x := range img.XM {
			r2 := (x-2e-3)*(x-2e-3) + (z-12e-3)*(z-12e-3)
			a := math.Exp(-r2/(2*1e-3*1e-3)) + 0.0056*math.Sqrt(-2*math.Log(1-rng.Float64()))
			env[iz*nx+ix] = a
			peak = max(peak, a)
		}
	}
	for i, a := range env {
		img.DB[i] = 20 * math.Log10(a/peak)
	}
	return img
}

// TestNothingAtEdges checks that no figure draws on its outermost pixels:
// a label that ran off the figure would show there.
func TestNothingAtEdges(t *testing.T) {
	t.Parallel()
	c, focus := sweep()
	long := spotImage("a title long enough to need shortening above a small panel", 1)
	tests := []struct {
		name string
		draw func(w io.Writer) error
	}{
		{"bmode", func(w io.Writer) error {
			return BModePNG(w, spotImage("t", 1), BModeOptions{Marks: []Mark{{XM: 9.9e-3, ZM: 5.1e-3, Label: "corner"}, {XM: -9.9e-3, ZM: 19.9e-3, Label: "other corner"}}})
		}},
		{"side by side", func(w io.Writer) error {
			return SideBySidePNG(w, []Image{long, long, long, long}, BModeOptions{WidthCM: 14})
		}},
		{"line", func(w io.Writer) error {
			return LinePNG(w, LinePlot{Title: "t", XLabel: "x", YLabel: "y", Series: []Series{{Name: "s", X: c, Y: focus}}, VLines: []VLine{{X: 1620, Label: "edge"}}})
		}},
		{"hist", func(w io.Writer) error {
			return HistPNG(w, Hist{Title: "t", XLabel: "x", Values: focus})
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			var buf bytes.Buffer
			if err := tc.draw(&buf); err != nil {
				t.Fatal(err)
			}
			img := decodePNG(t, buf.Bytes())
			b := img.Bounds()
			for x := b.Min.X; x < b.Max.X; x++ {
				for _, y := range []int{b.Min.Y, b.Max.Y - 1} {
					if g := gray(img, x, y); g < 250 {
						t.Fatalf("pixel (%d, %d) on the edge is drawn (gray %.0f)", x, y, g)
					}
				}
			}
			for y := b.Min.Y; y < b.Max.Y; y++ {
				for _, x := range []int{b.Min.X, b.Max.X - 1} {
					if g := gray(img, x, y); g < 250 {
						t.Fatalf("pixel (%d, %d) on the edge is drawn (gray %.0f)", x, y, g)
					}
				}
			}
		})
	}
}
