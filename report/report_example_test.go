package report_test

import (
	"bytes"
	"fmt"
	"image/png"
	"log"
	"math"

	"celerity/report"
)

// A B-mode image of a single point target, 20 mm wide and 15 mm deep, with the
// target's true position marked.
func ExampleBModePNG() {
	const nx, nz, pitch = 80, 60, 0.25e-3
	img := report.Image{Title: "Point target", XM: make([]float64, nx), ZM: make([]float64, nz), DB: make([]float64, nx*nz)}
	for i := range img.XM {
		img.XM[i] = -10e-3 + (float64(i)+0.5)*pitch
	}
	for i := range img.ZM {
		img.ZM[i] = 5e-3 + (float64(i)+0.5)*pitch
	}
	for iz, z := range img.ZM {
		for ix, x := range img.XM {
			r2 := x*x + (z-12e-3)*(z-12e-3)
			img.DB[iz*nx+ix] = max(-80, 20*math.Log10(math.Exp(-r2/(2*0.5e-3*0.5e-3))))
		}
	}
	var buf bytes.Buffer // a file, an HTTP response or an HTML report in practice
	err := report.BModePNG(&buf, img, report.BModeOptions{
		DynamicRangeDB: 50,
		Marks:          []report.Mark{{XM: 0, ZM: 12e-3, Label: "true position"}},
	})
	if err != nil {
		log.Fatal(err)
	}
	cfg, err := png.DecodeConfig(&buf)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("%d x %d pixels\n", cfg.Width, cfg.Height)
	// Output:
	// 756 x 541 pixels
}

// A focus metric against the assumed speed of sound, with the estimate's
// interval shaded and the true speed marked.
func ExampleLinePNG() {
	var c, metric []float64
	for v := 1450.0; v <= 1630; v += 10 {
		c = append(c, v)
		metric = append(metric, math.Exp(-(v-1538)*(v-1538)/(2*35*35)))
	}
	var buf bytes.Buffer
	err := report.LinePNG(&buf, report.LinePlot{
		Title:  "Speed sweep",
		XLabel: "assumed speed (m/s)",
		YLabel: "focus metric",
		Series: []report.Series{{Name: "speckle brightness", X: c, Y: metric, Points: true}},
		Bands:  []report.Band{{Lo: 1531, Hi: 1545, Label: "95 % interval"}},
		VLines: []report.VLine{{X: 1540, Label: "true speed"}},
	})
	if err != nil {
		log.Fatal(err)
	}
	cfg, err := png.DecodeConfig(&buf)
	if err != nil {
		log.Fatal(err)
	}
	fmt.Printf("%d x %d pixels\n", cfg.Width, cfg.Height)
	// Output:
	// 756 x 472 pixels
}
