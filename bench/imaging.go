package bench

import (
	"math"

	"celerity/acq"
	"celerity/correction"
	"celerity/internal/dsp"
	"celerity/metrics"
	"celerity/recon"
)

// Image-recovery scoring thresholds: below them the uncorrected image has
// (almost) nothing to recover and a recovered fraction would be a ratio of
// small differences, so it is not scored.
const (
	// minLateralLoss is the least widening of the targets, before against
	// ideal, as a fraction of the ideal width.
	minLateralLoss = 0.05
	// minGCNRLoss is the least loss of gCNR, ideal minus before.
	minGCNRLoss = 0.02
	// targetSearchM is the half-size of the square searched around each
	// target's expected position.
	targetSearchM = 1.5e-3
)

// imaging forms and measures the images of one case: before (the scanner's
// assumed speed, no correction), ideal (the true medium and screen) and one
// after image per estimate, on one grid.
type imaging struct {
	a     *acq.Acquisition
	ch    *recon.Channels
	truth *acq.Truth
	grid  *recon.Grid
	pairs []metrics.RegionPair
	rc    recon.Config

	before, ideal correction.ImageMetrics
}

// imageScores are one after image's numbers against before and ideal.
type imageScores struct {
	LateralBeforeMM, LateralAfterMM, LateralIdealMM, LateralRecovered float64
	GCNRBefore, GCNRAfter, GCNRIdeal, GCNRRecovered                   float64
}

func nanScores() imageScores {
	n := math.NaN()
	return imageScores{n, n, n, n, n, n, n, n}
}

// newImaging prepares the grid and measures before and ideal; it returns
// nil when the truth has neither targets nor inclusions (nothing to
// measure).
func newImaging(a *acq.Acquisition, ch *recon.Channels, truth *acq.Truth) (*imaging, error) {
	if len(truth.TargetsM) == 0 && len(truth.Inclusions) == 0 {
		return nil, nil
	}
	im := &imaging{a: a, ch: ch, truth: truth, rc: recon.Config{FNumber: 1.5, Window: dsp.Window{Kind: dsp.Hann}}}
	if len(truth.Inclusions) > 0 {
		var cs [][2]float64
		var rs []float64
		for _, in := range truth.Inclusions {
			cs = append(cs, in.CenterM)
			rs = append(rs, in.RadiusM)
		}
		im.pairs = metrics.PairsFromInclusions(cs, rs)
	}
	g, err := im.makeGrid()
	if err != nil {
		return nil, err
	}
	im.grid = &g
	els := a.Probe.Elements()
	if im.before, err = im.measure(recon.NewHomogeneous(a.AssumedSpeedMPS, els), a.AssumedSpeedMPS); err != nil {
		return nil, err
	}
	var ideal recon.DelayModel
	if len(truth.Layers) > 0 {
		if ideal, err = recon.NewLayered(truth.Layers, els); err != nil {
			return nil, err
		}
	} else {
		ideal = recon.NewHomogeneous(truth.SpeedMPS, els)
	}
	if truth.Screen != nil && len(truth.Screen.DelaysS) == len(els) {
		if ideal, err = recon.NewCorrectedField(ideal, truth.Screen.DelaysS, recon.FieldOf(&a.Probe)); err != nil {
			return nil, err
		}
	}
	if im.ideal, err = im.measure(ideal, 0); err != nil {
		return nil, err
	}
	return im, nil
}

// makeGrid covers what is measured (targets with room for their widths,
// region pairs) in depth from 0.85 to 1.15 times its true extent, so that
// images formed at speeds within about 15 % of the truth still hold it,
// across the array, with pixels of a third of a wavelength laterally and a
// quarter axially (at the scanner's assumed speed).
func (im *imaging) makeGrid() (recon.Grid, error) {
	a := im.a
	lam := a.AssumedSpeedMPS / a.Probe.CenterFrequencyHz
	zlo, zhi := math.Inf(1), math.Inf(-1)
	for _, t := range im.truth.TargetsM {
		zlo = math.Min(zlo, t[1]-3e-3)
		zhi = math.Max(zhi, t[1]+3e-3)
	}
	for _, p := range im.pairs {
		for _, r := range []metrics.Region{p.Inside, p.Outside} {
			if b, ok := r.(interface {
				Bounds() (x0, x1, z0, z1 float64)
			}); ok {
				_, _, z0, z1 := b.Bounds()
				zlo = math.Min(zlo, z0-1e-3)
				zhi = math.Max(zhi, z1+1e-3)
			}
		}
	}
	zrec := a.AssumedSpeedMPS * (a.StartTimeS + a.Duration()) / 2
	zlo = math.Max(math.Max(zlo*0.85, 1e-3), a.AssumedSpeedMPS*a.StartTimeS/2)
	zhi = math.Min(zhi*1.15, zrec)
	if !(zhi > zlo+lam) {
		zlo, zhi = math.Max(1e-3, a.AssumedSpeedMPS*a.StartTimeS/2), zrec
	}
	half := a.Probe.Aperture() / 2
	return recon.NewRect(-half, half, lam/3, zlo, zhi, lam/4)
}

// measure forms the image with model and measures it. The image shows the
// medium as if its speed were c, so a target at true depth z appears at
// z c / v(z), v(z) the true time-average speed down to z; c = 0 means the
// model is the true one (positions as they are).
func (im *imaging) measure(model recon.DelayModel, c float64) (correction.ImageMetrics, error) {
	bf, err := recon.NewBeamformer(im.a, im.grid, model, im.rc)
	if err != nil {
		return correction.ImageMetrics{}, err
	}
	img, err := bf.Form(nil, im.ch)
	if err != nil {
		return correction.ImageMetrics{}, err
	}
	scale := func(z float64) float64 {
		if c == 0 {
			return 1
		}
		return c / im.truth.MeanSpeed(z)
	}
	var tg [][2]float64
	for _, t := range im.truth.TargetsM {
		tg = append(tg, [2]float64{t[0], t[1] * scale(t[1])})
	}
	var ps []metrics.RegionPair
	for i, p := range im.pairs {
		ps = append(ps, correction.ScalePair(p, scale(im.truth.Inclusions[i].CenterM[1])))
	}
	return correction.Measure(im.grid, img, tg, targetSearchM, ps)
}

// score forms the after image of an estimate (homogeneous at speed c, plus
// the profile when given) and scores it against before and ideal:
//
//	lateral width W: the mean -6 dB lateral width over the targets measured
//	in all three images; recovered = (W_before - W_after) / (W_before - W_ideal),
//	scored when W_before - W_ideal >= 5 % of W_ideal;
//	gCNR G: the mean over the region pairs (inclusions against their
//	surroundings); recovered = (G_after - G_before) / (G_ideal - G_before),
//	scored when G_ideal - G_before >= 0.02.
//
// 1 means the after image is as good as the ideal one, 0 no better than
// before, negative worse than before.
func (im *imaging) score(c float64, profile []float64) (imageScores, error) {
	s := nanScores()
	if !(c >= 300 && c <= 10000) {
		return s, nil // no image can be formed at such a speed
	}
	var model recon.DelayModel = recon.NewHomogeneous(c, im.a.Probe.Elements())
	if profile != nil {
		m, err := recon.NewCorrectedField(model, profile, recon.FieldOf(&im.a.Probe))
		if err != nil {
			return s, err
		}
		model = m
	}
	after, err := im.measure(model, c)
	if err != nil {
		return s, err
	}
	var wb, wa, wi float64
	n := 0
	for i := range im.before.Targets {
		b, a, d := im.before.Targets[i], after.Targets[i], im.ideal.Targets[i]
		if b.OK && a.OK && d.OK {
			wb += b.LateralWidth
			wa += a.LateralWidth
			wi += d.LateralWidth
			n++
		}
	}
	if n > 0 {
		s.LateralBeforeMM, s.LateralAfterMM, s.LateralIdealMM = wb/float64(n)*1e3, wa/float64(n)*1e3, wi/float64(n)*1e3
		if loss := s.LateralBeforeMM - s.LateralIdealMM; loss >= minLateralLoss*s.LateralIdealMM {
			s.LateralRecovered = (s.LateralBeforeMM - s.LateralAfterMM) / loss
		}
	}
	if k := len(im.pairs); k > 0 {
		var gb, ga, gi float64
		for i := range k {
			gb += im.before.Regions[i].GCNR
			ga += after.Regions[i].GCNR
			gi += im.ideal.Regions[i].GCNR
		}
		s.GCNRBefore, s.GCNRAfter, s.GCNRIdeal = gb/float64(k), ga/float64(k), gi/float64(k)
		if loss := s.GCNRIdeal - s.GCNRBefore; loss >= minGCNRLoss {
			s.GCNRRecovered = (s.GCNRAfter - s.GCNRBefore) / loss
		}
	}
	return s, nil
}
