package speed

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sort"

	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/internal/jsonx"
	"celerity/recon"
)

// SweepConfig tunes Sweep. The zero value of each field selects its default.
type SweepConfig struct {
	MinMPS, MaxMPS float64   // search range; default 1400 to 1650 m/s
	CoarseStepMPS  float64   // default 10 m/s
	FineStepMPS    float64   // default 2 m/s
	Criterion      Criterion // default DefaultCriterionFor the events
	// Region is where the criterion is evaluated, at RefSpeedMPS; nil
	// chooses one with AutoRegion.
	Region      *Region
	RefSpeedMPS float64 // default the acquisition's assumed speed
	// FNumber is the receive F-number of the aperture data; default 1.
	FNumber float64
	// PixelM is the pixel spacing of the region in z; default half a
	// wavelength (about the axial resolution cell, so pixels are nearly
	// independent samples); the lateral spacing is twice it. The spacings grow
	// when needed to keep the region within MaxPixels.
	PixelM float64
	// TileM is the side of the tiles resampled by the bootstrap; default 2.5 mm.
	TileM float64
	// Bootstrap is the number of resamples; default 200.
	Bootstrap int
	// SystematicFrac is the half-width, as a fraction of the speed, of a
	// rectangular systematic (type B) uncertainty of the focus method that is
	// combined with the bootstrap's statistical one; default 0.0015
	// (0.15 %), the size of the offsets seen between focus-based estimates
	// and ground truth in validation (docs/validation.md: compounded plane
	// waves over +/-8 degrees read 0.3 to 2.3 m/s high). Negative disables it.
	SystematicFrac float64
	Seed           uint64
	// Model returns the delay model for an assumed speed; nil means a
	// homogeneous medium. Use it to sweep with a correction profile applied.
	Model func(c float64) (recon.DelayModel, error)
	// Events restricts the events used; nil means all of them, or for long
	// sequences (synthetic aperture) an even subset of MaxEvents.
	Events []int
	// Progress, if not nil, is called after each speed is evaluated.
	Progress func(done, total int)
	Workers  int
}

// MaxEvents is the number of events a sweep uses by default when a sequence
// holds more (synthetic aperture): an even subset keeps the transmit
// aperture while cutting the work.
const MaxEvents = 32

// EvenEvents returns nil when n <= max, else max indices spread evenly over
// 0..n-1 (both ends included).
func EvenEvents(n, max int) []int {
	if n <= max || max < 2 {
		return nil
	}
	out := make([]int, max)
	for i := range out {
		out[i] = int(math.Round(float64(i) * float64(n-1) / float64(max-1)))
	}
	return out
}

// MaxPixels bounds the pixels of a sweep region.
const MaxPixels = 12000

// DefaultCriterionFor returns the criterion Sweep uses when none is given,
// for the events it will use (nil: all): TransmitCoherence for three or
// more plane or diverging waves, CoherenceFactor otherwise (one event,
// synthetic aperture, focused beams). On compounded plane waves the
// receive-element criteria read high, the more so towards the array and
// the narrower the span of angles, and the transmit coherence does not;
// docs/validation.md has the comparison that chose them.
func DefaultCriterionFor(a *acq.Acquisition, events []int) Criterion {
	if acq.CompoundedWaves(a, events) {
		return TransmitCoherence
	}
	return CoherenceFactor
}

// Point is one evaluated speed.
type Point struct {
	SpeedMPS float64 `json:"speed_mps"`
	Value    float64 `json:"value"`
}

// Result is a speed estimate.
type Result struct {
	SpeedMPS float64 `json:"speed_mps"`
	// StdErrMPS is the bootstrap standard error.
	StdErrMPS float64    `json:"std_err_mps"`
	CI95MPS   [2]float64 `json:"-"`
	// CI95 is CI95MPS for JSON (null where undefined).
	CI95 jsonx.Floats `json:"ci95_mps"`
	// SystematicMPS is the standard uncertainty of the systematic component
	// included in CI95MPS (0 when disabled).
	SystematicMPS float64 `json:"systematic_std_mps"`
	// Confidence is "high" or "low"; Notes say why it is low and what else
	// limited the estimate.
	Confidence string     `json:"confidence"`
	Notes      []string   `json:"notes,omitempty"`
	Method     string     `json:"method"`
	Criterion  string     `json:"criterion"`
	Curve      []Point    `json:"curve"`
	Region     Region     `json:"-"`
	RegionMM   [4]float64 `json:"region_mm"`
	RefSpeed   float64    `json:"ref_speed_mps"`
	Tiles      int        `json:"tiles"`
}

// Confidence levels.
const (
	High = "high"
	Low  = "low"
)

// MaxConfidentHalfWidth is the widest 95 % half-interval (m/s) reported with
// high confidence.
const MaxConfidentHalfWidth = 10.0

func (cfg *SweepConfig) defaults(a *acq.Acquisition) error {
	if cfg.MinMPS == 0 {
		cfg.MinMPS = 1400
	}
	if cfg.MaxMPS == 0 {
		cfg.MaxMPS = 1650
	}
	if !(cfg.MinMPS >= 300 && cfg.MaxMPS <= 10000 && cfg.MaxMPS > cfg.MinMPS) {
		return fmt.Errorf("speed range %g..%g m/s: want 300 <= min < max <= 10000", cfg.MinMPS, cfg.MaxMPS)
	}
	if cfg.CoarseStepMPS == 0 {
		cfg.CoarseStepMPS = 10
	}
	if cfg.FineStepMPS == 0 {
		cfg.FineStepMPS = 2
	}
	if !(cfg.CoarseStepMPS > 0 && cfg.FineStepMPS > 0 && cfg.FineStepMPS <= cfg.CoarseStepMPS) {
		return errors.New("speed steps must be positive, the fine one no larger than the coarse one")
	}
	if (cfg.MaxMPS-cfg.MinMPS)/cfg.CoarseStepMPS > 2000 {
		return errors.New("too many speeds in the coarse grid")
	}
	if _, ok := criterionNames[cfg.Criterion]; !ok && cfg.Criterion != 0 {
		return errors.New("unknown criterion")
	}
	if cfg.RefSpeedMPS == 0 {
		cfg.RefSpeedMPS = a.AssumedSpeedMPS
	}
	if cfg.FNumber == 0 {
		cfg.FNumber = 1
	}
	if cfg.PixelM == 0 {
		cfg.PixelM = cfg.RefSpeedMPS / a.Probe.CenterFrequencyHz / 2
	}
	if cfg.TileM == 0 {
		cfg.TileM = 2.5e-3
	}
	if cfg.Bootstrap == 0 {
		cfg.Bootstrap = 200
	}
	if cfg.SystematicFrac == 0 {
		cfg.SystematicFrac = 0.0015
	}
	if cfg.Events == nil {
		cfg.Events = EvenEvents(a.NumEvents(), MaxEvents)
	}
	if cfg.Criterion == 0 {
		cfg.Criterion = DefaultCriterionFor(a, cfg.Events)
	}
	if cfg.Criterion == TransmitCoherence {
		n := len(cfg.Events)
		if cfg.Events == nil {
			n = a.NumEvents()
		}
		if n < 3 {
			return fmt.Errorf("the transmit-coherence criterion needs three or more events, have %d", n)
		}
	}
	if cfg.Model == nil {
		els := a.Probe.Elements()
		cfg.Model = func(c float64) (recon.DelayModel, error) { return recon.NewHomogeneous(c, els), nil }
	}
	return nil
}

// evaluator computes per-tile criterion sums for one speed.
type evaluator struct {
	a      *acq.Acquisition
	ch     *recon.Channels
	cfg    *SweepConfig
	xs, zs []float64
	tiles  []int
	nTiles int
	maxLag int
	buf    []complex64
}

func (ev *evaluator) run(c float64) ([]sums, error) {
	m, err := ev.cfg.Model(c)
	if err != nil {
		return nil, err
	}
	scale := c / ev.cfg.RefSpeedMPS

	zs := make([]float64, len(ev.zs))
	for i, z := range ev.zs {
		zs[i] = z * scale
	}
	g, err := recon.Points(ev.xs, zs)
	if err != nil {
		return nil, err
	}
	bf, err := recon.NewBeamformer(ev.a, &g, m, recon.Config{FNumber: ev.cfg.FNumber, Window: dsp.Window{Kind: dsp.Boxcar},
		ApertureDepthScale: 1 / scale, Events: ev.cfg.Events, Workers: ev.cfg.Workers})
	if err != nil {
		return nil, err
	}
	if ev.cfg.Criterion == TransmitCoherence {
		return ev.transmitSums(bf)
	}
	ev.buf, err = bf.Aperture(ev.buf, ev.ch, nil)
	if err != nil {
		return nil, err
	}
	mask := bf.ApertureMask()
	n := ev.a.NumElements()
	out := make([]sums, ev.nTiles)
	for t := range out {
		out[t] = newSums(ev.maxLag)
	}
	for p := range ev.xs {
		out[ev.tiles[p]].accumulate(ev.buf[p*n:(p+1)*n], mask[p*n:(p+1)*n])
	}
	return out, nil
}

// transmitSums forms each event's image on its own and pools the
// transmit-coherence sums per tile.
func (ev *evaluator) transmitSums(bf *recon.Beamformer) ([]sums, error) {
	sum, power, err := bf.EventSums(ev.ch)
	if err != nil {
		return nil, err
	}
	ne := float64(len(bf.Events()))
	out := make([]sums, ev.nTiles)
	for t := range out {
		out[t] = newSums(ev.maxLag)
	}
	for p, v := range sum {
		o := &out[ev.tiles[p]]
		I := real(v)*real(v) + imag(v)*imag(v)
		o.txCoh += I
		o.txInc += ne * power[p]
		o.i1 += I
		o.i2 += I * I
		o.np++
	}
	return out, nil
}

// tiledSweep holds the per-tile criterion sums of every speed evaluated.
type tiledSweep struct {
	cfg       *SweepConfig
	ev        *evaluator
	evaluated map[float64][]sums
	order     []float64
	done      int
	total     int
}

func newTiledSweep(a *acq.Acquisition, ch *recon.Channels, cfg *SweepConfig, region Region) *tiledSweep {
	dz := cfg.PixelM
	dx := 2 * dz
	if n := (region.X1 - region.X0) * (region.Z1 - region.Z0) / (dx * dz); n > MaxPixels {
		f := math.Sqrt(n / MaxPixels)
		dx, dz = dx*f, dz*f
	}
	xs, zs, tiles, nTiles := roiPixels(region, dx, dz, cfg.TileM)
	zMid := (region.Z0 + region.Z1) / 2
	active := zMid / cfg.FNumber / a.Probe.MeanPitch()
	ev := &evaluator{a: a, ch: ch, cfg: cfg, xs: xs, zs: zs, tiles: tiles, nTiles: nTiles,
		maxLag: max(1, min(int(math.Round(0.1*active)), a.NumElements()-1))}
	return &tiledSweep{cfg: cfg, ev: ev, evaluated: map[float64][]sums{}}
}

// eval evaluates speed c unless done already or out of range.
func (ts *tiledSweep) eval(c float64) error {
	cfg := ts.cfg
	c = math.Round(c*1e6) / 1e6
	if _, ok := ts.evaluated[c]; ok || c < cfg.MinMPS-1e-9 || c > cfg.MaxMPS+1e-9 {
		return nil
	}
	s, err := ts.ev.run(c)
	if err != nil {
		return err
	}
	ts.evaluated[c] = s
	ts.order = append(ts.order, c)
	ts.done++
	if cfg.Progress != nil {
		ts.cfg.Progress(ts.done, max(ts.total, ts.done))
	}
	return nil
}

// coarse evaluates the coarse grid over the whole range.
func (ts *tiledSweep) coarse() error {
	cfg := ts.cfg
	for c := cfg.MinMPS; c <= cfg.MaxMPS+1e-9; c += cfg.CoarseStepMPS {
		if err := ts.eval(c); err != nil {
			return err
		}
	}
	return nil
}

// fine evaluates the fine grid within one coarse step of c0.
func (ts *tiledSweep) fine(c0 float64) error {
	cfg := ts.cfg
	for c := c0 - cfg.CoarseStepMPS; c <= c0+cfg.CoarseStepMPS+1e-9; c += cfg.FineStepMPS {
		if err := ts.eval(c); err != nil {
			return err
		}
	}
	return nil
}

// curve returns the evaluated speeds in order and the criterion pooled over
// the tiles, each tile weighted by weights[t] (nil: every tile once, and
// tiles outside use are skipped when use is not nil).
func (ts *tiledSweep) curve(weights []float64, use []bool) ([]float64, []float64) {
	sp := append([]float64(nil), ts.order...)
	sort.Float64s(sp)
	vals := make([]float64, len(sp))
	pool := newSums(ts.ev.maxLag)
	for i, c := range sp {
		pool.reset()
		for t, s := range ts.evaluated[c] {
			if use != nil && !use[t] {
				continue
			}
			w := 1.0
			if weights != nil {
				w = weights[t]
			}
			if w == 0 {
				continue
			}
			scaled := s
			if w != 1 {
				scaled = scaleSums(s, w)
			}
			pool.add(&scaled)
		}
		vals[i] = pool.value(ts.cfg.Criterion, ts.ev.maxLag)
	}
	return sp, vals
}

// resolveRegion returns the configured region or an automatic one.
func resolveRegion(a *acq.Acquisition, ch *recon.Channels, cfg *SweepConfig) (Region, []string, error) {
	if cfg.Region != nil {
		r := *cfg.Region
		if !r.valid() {
			return Region{}, nil, fmt.Errorf("region %s: want x1 > x0, z1 > z0 > 0", r)
		}
		return r, nil, nil
	}
	return AutoRegion(a, ch, cfg.RefSpeedMPS, cfg.FNumber)
}

// Sweep estimates the speed of sound by maximising a focus criterion over a
// coarse grid of assumed speeds, then a fine grid around the best, then a
// quadratic fit to the peak. The uncertainty comes from a block bootstrap
// over tiles of the region: the curve is recomputed from tiles drawn with
// replacement, and the spread of its peak gives the standard error and the
// 95 % interval. A flat, noisy or multi-peaked curve, or a peak at the edge
// of the range, gives confidence "low" with the reason in Notes.
func Sweep(a *acq.Acquisition, ch *recon.Channels, cfg SweepConfig) (*Result, error) {
	if err := cfg.defaults(a); err != nil {
		return nil, err
	}
	res := &Result{Method: "sweep", Criterion: cfg.Criterion.String(), RefSpeed: cfg.RefSpeedMPS}
	region, notes, err := resolveRegion(a, ch, &cfg)
	if err != nil {
		return nil, err
	}
	res.Notes = append(res.Notes, notes...)
	res.Region = region
	res.RegionMM = [4]float64{region.X0 * 1e3, region.X1 * 1e3, region.Z0 * 1e3, region.Z1 * 1e3}
	ts := newTiledSweep(a, ch, &cfg, region)
	res.Tiles = ts.ev.nTiles
	ts.total = int(math.Floor((cfg.MaxMPS-cfg.MinMPS)/cfg.CoarseStepMPS)) + 1 + int(2*cfg.CoarseStepMPS/cfg.FineStepMPS)
	if err := ts.coarse(); err != nil {
		return nil, err
	}
	sp, vals := ts.curve(nil, nil)
	best := argmaxFinite(vals)
	if best < 0 {
		return nil, errors.New("the criterion is undefined everywhere: no echoes in the region?")
	}
	if err := ts.fine(sp[best]); err != nil {
		return nil, err
	}
	sp, vals = ts.curve(nil, nil)
	best = argmaxFinite(vals)
	for i := range sp {
		res.Curve = append(res.Curve, Point{SpeedMPS: sp[i], Value: vals[i]})
	}
	peak, edge := refinePeak(sp, vals, cfg.CoarseStepMPS)
	res.SpeedMPS = peak

	// block bootstrap over tiles
	nTiles := ts.ev.nTiles
	rng := rand.New(rand.NewPCG(cfg.Seed, 0x626f6f74))
	peaks := make([]float64, 0, cfg.Bootstrap)
	edges := 0
	w := make([]float64, nTiles)
	for b := 0; b < cfg.Bootstrap; b++ {
		clear(w)
		for range nTiles {
			w[rng.IntN(nTiles)]++
		}
		bsp, bv := ts.curve(w, nil)
		pk, e := refinePeak(bsp, bv, cfg.CoarseStepMPS)
		if e {
			edges++
		}
		if !math.IsNaN(pk) {
			peaks = append(peaks, pk)
		}
	}
	res.StdErrMPS, res.CI95MPS, res.SystematicMPS = intervalFrom(peaks, res.SpeedMPS, cfg.SystematicFrac)
	res.Confidence = High
	lowf := func(format string, args ...any) {
		res.Confidence = Low
		res.Notes = append(res.Notes, fmt.Sprintf(format, args...))
	}
	if edge {
		lowf("the criterion peaks at the edge of the search range (%g..%g m/s)", cfg.MinMPS, cfg.MaxMPS)
	}
	if float64(edges) > 0.05*float64(cfg.Bootstrap) {
		lowf("%d of %d bootstrap curves peak at the edge of the range", edges, cfg.Bootstrap)
	}
	if hw := (res.CI95MPS[1] - res.CI95MPS[0]) / 2; !(hw <= MaxConfidentHalfWidth) {
		lowf("the 95 %% interval is %.1f m/s wide: the criterion curve is too flat or too noisy for this region", 2*hw)
	}
	if k := secondPeak(sp, vals, best, cfg.CoarseStepMPS); k >= 0 {
		lowf("the criterion has a second peak near %.0f m/s", sp[k])
	}
	if !(res.CI95MPS[0] <= res.SpeedMPS+1e-9 && res.SpeedMPS <= res.CI95MPS[1]+1e-9) {
		lowf("the estimate lies outside its own bootstrap interval: the peak is unstable")
	}
	res.CI95 = jsonx.Floats(res.CI95MPS[:])
	if singleUnfocused(a, cfg.Events) {
		res.Notes = append(res.Notes, "one unfocused transmit: diffuse echoes are nearly incoherent across the receive aperture (van Cittert-Zernike), so receive-only focus criteria carry little information; compounded steered waves or synthetic aperture restore it")
	}
	return res, nil
}

// intervalFrom turns bootstrap peaks into a standard error and a 95 %
// interval around est, widened in quadrature by a rectangular systematic
// component of half-width frac * est (standard uncertainty a / sqrt(3)).
func intervalFrom(peaks []float64, est, frac float64) (se float64, ci [2]float64, sys float64) {
	if len(peaks) < 2 {
		return math.NaN(), [2]float64{math.NaN(), math.NaN()}, 0
	}
	sorted := append([]float64(nil), peaks...)
	sort.Float64s(sorted)
	mean := 0.0
	for _, v := range sorted {
		mean += v
	}
	mean /= float64(len(sorted))
	ss := 0.0
	for _, v := range sorted {
		ss += (v - mean) * (v - mean)
	}
	se = math.Sqrt(ss / float64(len(sorted)-1))
	lo, hi := quantile(sorted, 0.025), quantile(sorted, 0.975)
	if frac > 0 {
		sys = frac * est / math.Sqrt(3)
	}
	s := 1.96 * sys
	dl, dh := math.Max(est-lo, 0), math.Max(hi-est, 0)
	return se, [2]float64{est - math.Hypot(dl, s), est + math.Hypot(dh, s)}, sys
}

func scaleSums(s sums, w float64) sums {
	o := sums{coh: s.coh * w, inc: s.inc * w, i1: s.i1 * w, i2: s.i2 * w, np: s.np * w, txCoh: s.txCoh * w, txInc: s.txInc * w,
		lagNum: make([]float64, len(s.lagNum)), lagDen: make([]float64, len(s.lagDen))}
	for m := range s.lagNum {
		o.lagNum[m] = s.lagNum[m] * w
		o.lagDen[m] = s.lagDen[m] * w
	}
	return o
}

func argmaxFinite(v []float64) int {
	best, bi := math.Inf(-1), -1
	for i, x := range v {
		if !math.IsNaN(x) && x > best {
			best, bi = x, i
		}
	}
	return bi
}

// refinePeak returns the vertex of a least-squares parabola through the
// points within 1.5 coarse steps of the largest value, or the largest point
// itself when the fit is not concave or its vertex falls outside the fitted
// span. edge reports a maximum at either end of the range.
func refinePeak(sp, vals []float64, coarse float64) (float64, bool) {
	b := argmaxFinite(vals)
	if b < 0 {
		return math.NaN(), true
	}
	edge := b == 0 || b == len(sp)-1
	var xs, ys []float64
	for i := range sp {
		if math.Abs(sp[i]-sp[b]) <= 1.5*coarse+1e-9 && !math.IsNaN(vals[i]) {
			xs = append(xs, sp[i]-sp[b])
			ys = append(ys, vals[i])
		}
	}
	if len(xs) < 3 {
		return sp[b], edge
	}
	c2, c1, _ := quadFit(xs, ys)
	if !(c2 < 0) {
		return sp[b], edge
	}
	v := -c1 / (2 * c2)
	lo, hi := xs[0], xs[len(xs)-1]
	if v < lo || v > hi {
		return sp[b], edge
	}
	return sp[b] + v, edge
}

// quadFit fits y = c2 x^2 + c1 x + c0 by least squares.
func quadFit(xs, ys []float64) (c2, c1, c0 float64) {
	c0, c1, c2, _ = dsp.FitQuadratic(xs, ys)
	return c2, c1, c0
}

// secondPeak returns the index of a local maximum of the curve at least
// three coarse steps from the best whose height above the curve's minimum is
// at least 80 % of the best's, or -1.
func secondPeak(sp, vals []float64, best int, coarse float64) int {
	lo := math.Inf(1)
	for _, v := range vals {
		if !math.IsNaN(v) {
			lo = math.Min(lo, v)
		}
	}
	top := vals[best] - lo
	if !(top > 0) {
		return -1
	}
	for i := 1; i < len(vals)-1; i++ {
		if math.Abs(sp[i]-sp[best]) < 3*coarse {
			continue
		}
		if vals[i] >= vals[i-1] && vals[i] >= vals[i+1] && vals[i]-lo >= 0.8*top {
			return i
		}
	}
	return -1
}

func quantile(sorted []float64, q float64) float64 {
	if len(sorted) == 0 {
		return math.NaN()
	}
	pos := q * float64(len(sorted)-1)
	i := int(pos)
	if i >= len(sorted)-1 {
		return sorted[len(sorted)-1]
	}
	f := pos - float64(i)
	return sorted[i]*(1-f) + sorted[i+1]*f
}

// singleUnfocused reports whether the events used are one unfocused
// multi-element transmit (a plane or diverging wave).
func singleUnfocused(a *acq.Acquisition, events []int) bool {
	n := len(events)
	if events == nil {
		n = a.NumEvents()
	}
	if n != 1 {
		return false
	}
	e := 0
	if events != nil {
		e = events[0]
	}
	w := acq.DeriveWavefront(a.Probe.Elements(), &a.Events[e], a.AssumedSpeedMPS, 0, a.Probe.CenterFrequencyHz)
	return w.Kind == acq.KindPlaneWave || w.Kind == acq.KindDiverging
}
