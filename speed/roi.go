package speed

import (
	"fmt"
	"math"

	"celerity/acq"
	"celerity/recon"
)

// Region is a rectangle of the image plane in m, at the reference speed: the
// depths are those of the echoes imaged at RefSpeedMPS, and the region moves
// with the echoes when another speed is assumed.
type Region struct{ X0, X1, Z0, Z1 float64 }

func (r Region) String() string {
	return fmt.Sprintf("x %.1f..%.1f mm, z %.1f..%.1f mm", r.X0*1e3, r.X1*1e3, r.Z0*1e3, r.Z1*1e3)
}

func (r Region) valid() bool {
	return r.X1 > r.X0 && r.Z1 > r.Z0 && r.Z0 > 0 && !math.IsInf(r.X0+r.X1+r.Z0+r.Z1, 0) && !math.IsNaN(r.X0+r.X1+r.Z0+r.Z1)
}

// AutoRegion chooses a region for speed estimation at reference speed c:
// laterally the central 60 % of a linear array (where the receive aperture
// is complete), in depth from the end of the near field (at least 5 mm, deep
// enough for 16 elements at F-number fnum, and at least 0.4 times the array
// length: shallower, focus criteria on compounded plane waves drift high by
// up to 1 % in validation) to the last depth whose echo
// power stands 10 dB above the record's noise floor (and 90 % of the record).
// The floor is the quietest stretch of the smoothed mean channel power after
// the first fifth of the record. reasons says what limited the depth.
func AutoRegion(a *acq.Acquisition, ch *recon.Channels, c, fnum float64) (Region, []string, error) {
	p := &a.Probe
	var notes []string
	aperture := p.Aperture()
	lam := c / p.CenterFrequencyHz
	zNear := math.Max(math.Max(5e-3, 2*fnum*16*p.MeanPitch()), 0.4*aperture)
	zNear = math.Max(zNear, c*a.StartTimeS/2+10*lam)
	tEnd := a.StartTimeS + a.Duration()
	zFar := 0.9 * c * tEnd / 2
	if zSNR := NoiseDepth(ch, c); zSNR < zFar {
		zFar = zSNR
		notes = append(notes, fmt.Sprintf("depths beyond %.1f mm excluded: echoes within 10 dB of the noise floor", zSNR*1e3))
	}
	if zFar-zNear < 4*lam {
		return Region{}, notes, fmt.Errorf("no usable depth range: near field ends at %.1f mm, echoes reach the noise floor at %.1f mm", zNear*1e3, zFar*1e3)
	}
	half := 0.3 * aperture
	if p.Geometry != acq.Linear || aperture < 0.02 {
		// phased and convex arrays: a central wedge, approximated by a rectangle
		half = math.Max(0.3*aperture, (zNear+zFar)/2*math.Tan(15*math.Pi/180))
	}
	return Region{X0: -half, X1: half, Z0: zNear, Z1: zFar}, notes, nil
}

// NoiseDepth returns the depth (at speed c) beyond which the echoes stay
// within 10 dB of the record's noise floor: the mean baseband power of all
// channels against time, smoothed over about 2 mm of depth, compared with
// its quietest stretch after the first fifth of the record. Without a
// noise-dominated stretch it returns the end of the record.
func NoiseDepth(ch *recon.Channels, c float64) float64 {
	pw := make([]float64, ch.NS)
	for e := 0; e < ch.NE; e++ {
		for j := 0; j < ch.NN; j++ {
			for n, v := range ch.Row(e, j) {
				pw[n] += float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
			}
		}
	}
	win := max(1, int(math.Round(2e-3/c*ch.FS)))
	sm := movingMean(pw, win)
	start := len(sm) / 5
	floor := math.Inf(1)
	for n := start; n < len(sm); n++ {
		floor = math.Min(floor, sm[n])
	}
	last := len(sm) - 1
	if floor > 0 && !math.IsInf(floor, 0) {
		for last > start && sm[last] < 10*floor {
			last--
		}
	}
	return c * (ch.T0 + float64(last)/ch.FS) / 2
}

func movingMean(v []float64, w int) []float64 {
	out := make([]float64, len(v))
	var s float64
	for i := range v {
		s += v[i]
		if i >= w {
			s -= v[i-w]
		}
		n := min(i+1, w)
		out[i] = s / float64(n)
	}
	// centre the window
	shift := w / 2
	res := make([]float64, len(v))
	for i := range res {
		k := min(i+shift, len(v)-1)
		res[i] = out[k]
	}
	return res
}

// roiPixels lays out pixels over r at spacing (dx, dz) and groups them in
// tiles of about tile x tile. It returns x, z at the reference speed and the
// tile index of every pixel.
func roiPixels(r Region, dx, dz, tile float64) (xs, zs []float64, tiles []int, nTiles int) {
	nx := max(1, int(math.Floor((r.X1-r.X0)/dx))+1)
	nz := max(1, int(math.Floor((r.Z1-r.Z0)/dz))+1)
	tx := max(1, int(math.Round((r.X1-r.X0)/tile)))
	tz := max(1, int(math.Round((r.Z1-r.Z0)/tile)))
	for iz := range nz {
		z := r.Z0 + float64(iz)*dz
		kz := min(tz-1, int(float64(iz)/float64(nz)*float64(tz)))
		for ix := range nx {
			x := r.X0 + float64(ix)*dx
			kx := min(tx-1, int(float64(ix)/float64(nx)*float64(tx)))
			xs = append(xs, x)
			zs = append(zs, z)
			tiles = append(tiles, kz*tx+kx)
		}
	}
	return xs, zs, tiles, tx * tz
}
