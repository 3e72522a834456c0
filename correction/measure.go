package correction

import (
	"fmt"
	"math"

	"celerity/metrics"
	"celerity/recon"
)

// ImageMetrics are the image-quality numbers of one image.
type ImageMetrics struct {
	Targets []metrics.PointResult    `json:"targets,omitempty"`
	Regions []metrics.ContrastResult `json:"regions,omitempty"`
}

// Summary flattens the metrics to named numbers: mean lateral and axial
// widths (mm) and mean position error (mm) over the targets measured, and
// contrast, CNR, gCNR and speckle SNR per region pair.
func (m *ImageMetrics) Summary() map[string]float64 {
	out := map[string]float64{}
	var lw, aw, pe float64
	n := 0
	for _, t := range m.Targets {
		if !t.OK {
			continue
		}
		lw += t.LateralWidth
		aw += t.AxialWidth
		pe += math.Hypot(t.ErrX, t.ErrZ)
		n++
	}
	if n > 0 {
		out["lateral_width_mm"] = lw / float64(n) * 1e3
		out["axial_width_mm"] = aw / float64(n) * 1e3
		out["position_error_mm"] = pe / float64(n) * 1e3
	}
	for _, r := range m.Regions {
		out[r.Name+"_contrast_db"] = r.ContrastDB
		out[r.Name+"_cnr"] = r.CNR
		out[r.Name+"_gcnr"] = r.GCNR
		out[r.Name+"_speckle_snr"] = r.SpeckleSNROut
	}
	return out
}

// Field turns a complex image on a rectangular grid into an envelope field.
func Field(g *recon.Grid, img []complex64) (*metrics.Field, error) {
	if g.Kind != recon.Rect || g.Rows < 2 || g.Cols < 2 {
		return nil, fmt.Errorf("metrics need a rectangular grid of at least 2 x 2 pixels")
	}
	return &metrics.Field{X: g.X, Z: g.Z, V: recon.Envelope(img)}, nil
}

// Measure computes the metrics of img: point targets near the given
// positions (searched within search m), and contrast of the region pairs.
func Measure(g *recon.Grid, img []complex64, targets [][2]float64, search float64, pairs []metrics.RegionPair) (ImageMetrics, error) {
	f, err := Field(g, img)
	if err != nil {
		return ImageMetrics{}, err
	}
	var m ImageMetrics
	for _, t := range targets {
		m.Targets = append(m.Targets, metrics.PointTarget(f, t[0], t[1], search))
	}
	for _, p := range pairs {
		m.Regions = append(m.Regions, metrics.MeasurePair(f, p))
	}
	return m, nil
}
