package speed

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"slices"
	"sort"
	"strings"
	"sync"

	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/recon"
)

// TargetConfig tunes Targets. The zero value of each field selects its
// default.
type TargetConfig struct {
	// InitialSpeedMPS is the speed at which the detection image is formed;
	// default the acquisition's assumed speed.
	InitialSpeedMPS float64
	// MinMPS and MaxMPS bound the fitted speed; default 1300 and 1800 m/s.
	MinMPS, MaxMPS float64
	// Region is where targets are searched for, in m at the initial speed;
	// nil means the whole field of view below the first 3 mm.
	Region *Region
	// MinContrastDB is how far (dB) a target's envelope must stand above the
	// median envelope of the 4 mm square around it; default 20.
	MinContrastDB float64
	// MaxTargets is the number of targets kept, the brightest; default 8.
	MaxTargets int
	// FitOffset also fits a time offset common to all channels (a lens or
	// pulse delay that the acquisition's time reference leaves out). Without
	// it the time reference is trusted, which makes the speed better
	// determined, but biased by any such offset.
	FitOffset bool
	// Events restricts the events used; nil means all.
	Events []int
	// Workers bounds the goroutines (targets are fitted in parallel); 0
	// means GOMAXPROCS.
	Workers int
}

// TargetFit is the arrival-time fit of one point target.
type TargetFit struct {
	// XM and ZM are the fitted position, m (at the fitted speed).
	XM float64 `json:"x_m"`
	ZM float64 `json:"z_m"`
	// SpeedMPS is the fitted speed and StdErrMPS its standard error from the
	// fit residuals.
	SpeedMPS  float64 `json:"speed_mps"`
	StdErrMPS float64 `json:"std_err_mps"`
	// Channels is the number of (event, element) arrival times in the final
	// fit.
	Channels int `json:"channels"`
	// RMSResidualNS is the rms misfit of those arrival times, ns.
	RMSResidualNS float64 `json:"rms_residual_ns"`
	// OffsetNS is the fitted common time offset, ns (0 unless FitOffset):
	// positive when the echoes arrive later than the acquisition's time
	// reference says.
	OffsetNS float64 `json:"offset_ns"`
}

// TargetResult is the point-target estimate: the combined speed in Result
// (Method "targets", Criterion "arrival-time fit") and each target's fit.
type TargetResult struct {
	Result
	Targets []TargetFit `json:"targets"`
}

// ErrNoTargets is returned (wrapped) by Targets when no usable point target
// is found.
var ErrNoTargets = errors.New("no usable point target")

// Defaults and limits of the point-target method.
const (
	// targetMinChannels is the fewest arrival times a target's fit may rest
	// on; fewer leave the speed poorly determined.
	targetMinChannels = 16
	// targetMinCoef drops arrival times whose window correlates less than
	// this with the reference pulse (the echo is buried or overlapped).
	targetMinCoef = 0.5
	// targetOutlierSigmas drops arrival times whose normalised residual lies
	// beyond this many robust standard deviations (1.4826 MAD).
	targetOutlierSigmas = 4.0
	// targetPasses is the number of measure -> fit passes.
	targetPasses = 3
	// targetFocusEvents caps the events of the coarse focus search.
	targetFocusEvents = 16
	// targetMaxDetectPixels bounds the detection image.
	targetMaxDetectPixels = 1 << 20
	// targetBackgroundM is the side of the square whose median envelope is
	// a target's background.
	targetBackgroundM = 4e-3
	// targetIsolationM: a target has no brighter maximum this close.
	targetIsolationM = 2e-3
	// targetShadowM and targetShadowDB: a maximum this close to one more
	// than this much brighter is taken for its side lobe or the tail of its
	// echo (a plane wave from a finite aperture trails an edge wave that
	// images some 30 dB down, about 2 mm below a wire), not a target.
	targetShadowM  = 5e-3
	targetShadowDB = 20.0
	// targetTimeRefFrac is the standard uncertainty, in periods of the
	// centre frequency, of the arrival time that the envelope peak of an
	// aligned stack marks when the time reference is trusted: it depends on
	// the pulse shape (a hundredth of a period, as acq.FitTolerance allows
	// firing delays). Simulated Gaussian pulses stay within a quarter of it.
	targetTimeRefFrac = 0.01
	// targetMethodFrac is the half-width, as a fraction of the speed, of a
	// rectangular systematic (type B) uncertainty of the method itself: on
	// simulated wires its estimates stay within 1e-5 of the truth when the
	// time reference is trusted and within about 1.5e-4 when an offset is
	// fitted (the curvature of the arrival-time curve alone then carries
	// the speed, and pulse-shape details of order 0.01 ns weigh more).
	targetMethodFrac = 1e-4
	// targetMaxRMSPeriods: a fit whose rms residual exceeds this many
	// periods of the centre frequency has not found a point target (its
	// phases slip by whole cycles); near-field aberrators leave some tens of
	// ns (CHECKS.md: chest wall 21 ns rms), well inside it.
	targetMaxRMSPeriods = 0.25
)

// Targets estimates the speed of sound from the arrival-time curves of
// bright, isolated point targets (wires), after Anderson & Trahey (JASA
// 104(5), 1998).
//
// Detection: an image is formed at the initial speed (F-number 1.5, Hann
// receive window, pixels of half a wavelength). Its local envelope maxima
// that stand MinContrastDB above the median envelope of the 4 mm square
// around them, have no brighter maximum within 2 mm, none 20 dB brighter
// within 5 mm (side lobes and echo tails of a brighter target), and do not
// touch the grid edge are targets; the brightest MaxTargets are kept.
//
// Each target is then brought near focus by maximising its peak brightness
// over the assumed speed (a coarse search; the target's image moves with the
// speed, approximately to depth z c / c_0), and its arrival times are
// measured and fitted. For event e and element j the model is
//
//	t_ej(x, z, c) = T_e(x, z; c) + sqrt((x - x_j)^2 + (z - z_j)^2) / c + t_off
//
// where T_e is the arrival of the transmitted wave at the target, derived
// from the event's firing delays at speed c (a plane wave has
// sin(theta) = c * slope of the delays; a single-element event starts at its
// element), and t_off is 0 unless FitOffset. An element takes part when it
// sees the target within its directivity (the -6 dB angle of its width, or
// 45 degrees when the width is unknown); an event when its wave reaches the
// target from within the firing aperture and the waves diffracted at the
// aperture's ends arrive at least a pulse length (-6 dB) later, so that they
// do not distort the pulse the target sees.
//
// Arrival times: around each predicted time a window of about two pulse
// lengths of baseband data is interpolated. The windows of one event are
// stacked into a reference pulse; each channel's delay against the stack
// without it is found by cross-correlation (dsp.XCorrLag), then refined from
// the phase of the zero-lag product at the centre frequency (dsp.PhaseLag),
// re-interpolating until the phase difference vanishes. The channels are
// re-stacked at their measured delays and measured again. Within an event
// every channel sees the same transmitted pulse, so the phases give precise
// relative delays; the event's absolute time is the envelope peak of the
// aligned stack (a Gaussian through the log-envelope), which a constant
// carrier-phase shift of the pulse (as in the field of a wave summed over a
// transmit aperture) does not move. Channels whose correlation with the
// reference is below 0.5 are dropped, the rest weighted by
// rho^2 / (1 - rho^2) (the inverse of the delay variance, to a constant).
//
// Fit: weighted nonlinear least squares (Levenberg-Marquardt, numerical
// derivatives) for (x, z, c) or (x, z, c, t_off), with c bounded to
// [MinMPS, MaxMPS]; arrival times whose normalised residual lies beyond 4
// robust standard deviations are dropped and the fit repeated. Measurement
// and fit alternate three times. The covariance is s^2 (J^T W J)^-1 with
// s^2 = sum w r^2 / (n - p), inflated by (1 + rho) / (1 - rho) when the
// residuals of neighbouring elements correlate (rho > 0: a smooth,
// unmodelled pattern rather than noise). A fit that misses its arrival
// times by more than a quarter period rms has found no point target, and
// one that lands within 1 mm of a brighter target's is a duplicate; both
// are dropped.
//
// Combination: the weighted mean of the targets' speeds, each weighted by
// the inverse of its variance: the statistical one from the fit, plus, when
// the time reference is trusted (no FitOffset), the effect on c of a
// time-reference error of a hundredth of a period. That part is common to
// all targets and is not averaged down; with a systematic uncertainty of
// the method itself (rectangular, +/-1e-4 of the speed, the size of the
// errors seen on simulated wires) it makes SystematicMPS. When the speeds
// scatter more than their uncertainties allow (chi-square test at 5 %), the
// standard error is inflated by sqrt(chi^2 / dof) and Student's t with
// dof = targets - 1 replaces 1.96. CI95MPS is the estimate
// +/- sqrt((k SE)^2 + (1.96 SystematicMPS)^2).
// Targets fitted with fewer than 16 arrival times are reported but left out
// of the combination. Confidence is "low", with the reason in Notes, when
// the 95 % half-width exceeds MaxConfidentHalfWidth or a fit stops at a
// speed bound (such fits are left out of the mean unless nothing else is
// left); otherwise "high".
//
// When no target is detected, or none can be fitted with 16 arrival times,
// Targets returns an error wrapping ErrNoTargets (there is no estimate to
// report); other errors are configuration or data errors.
func Targets(a *acq.Acquisition, ch *recon.Channels, cfg TargetConfig) (*TargetResult, error) {
	if err := cfg.defaults(a, ch); err != nil {
		return nil, err
	}
	res := &TargetResult{Result: Result{Method: "targets", Criterion: "arrival-time fit", RefSpeed: cfg.InitialSpeedMPS}}
	region, err := cfg.region(a)
	if err != nil {
		return nil, err
	}
	res.Region = region
	res.RegionMM = [4]float64{region.X0 * 1e3, region.X1 * 1e3, region.Z0 * 1e3, region.Z1 * 1e3}

	cands, err := detectTargets(a, ch, &cfg, region)
	if err != nil {
		return nil, err
	}
	if len(cands) == 0 {
		return nil, fmt.Errorf("%w: no isolated envelope maximum in %s stands %g dB above its surroundings at %g m/s",
			ErrNoTargets, region, cfg.MinContrastDB, cfg.InitialSpeedMPS)
	}
	lo, hi := math.Inf(1), math.Inf(-1)
	for _, c := range cands {
		lo, hi = math.Min(lo, c.contrastDB), math.Max(hi, c.contrastDB)
	}
	res.Notes = append(res.Notes, fmt.Sprintf("%d target(s) detected at %g m/s, %.0f to %.0f dB above their surroundings", len(cands), cfg.InitialSpeedMPS, lo, hi))

	f := newTargetFitter(a, ch, &cfg)
	f.bfWorkers = max(1, cfg.Workers/len(cands))
	fits := make([]targetOutcome, len(cands))
	var wg sync.WaitGroup
	sem := make(chan struct{}, cfg.Workers)
	for i := range cands {
		wg.Add(1)
		sem <- struct{}{}
		go func() {
			defer wg.Done()
			defer func() { <-sem }()
			fits[i] = f.fitTarget(cands[i])
		}()
	}
	wg.Wait()

	// Keep one fit per physical target: a side lobe detected as a second
	// target converges onto the same point as the main lobe.
	var kept []targetOutcome
	for i, o := range fits {
		where := fmt.Sprintf("target detected at (%.2f, %.2f) mm", cands[i].x*1e3, cands[i].z*1e3)
		if o.err != nil {
			res.Notes = append(res.Notes, where+": not fitted: "+o.err.Error())
			continue
		}
		if lim := targetMaxRMSPeriods / a.Probe.CenterFrequencyHz * 1e9; o.fit.RMSResidualNS > lim {
			why := "not a point target"
			if o.atBound {
				why = fmt.Sprintf("the fit stops at the speed bound %g m/s", o.fit.SpeedMPS)
			}
			res.Notes = append(res.Notes, fmt.Sprintf("%s: arrival times misfit by %.0f ns rms (over a quarter period): %s; dropped", where, o.fit.RMSResidualNS, why))
			continue
		}
		dup := false
		for _, k := range kept {
			if math.Hypot(o.fit.XM-k.fit.XM, o.fit.ZM-k.fit.ZM) < 1e-3 {
				dup = true
			}
		}
		if dup {
			res.Notes = append(res.Notes, where+": converged onto a brighter target; dropped")
			continue
		}
		kept = append(kept, o)
	}
	var use []targetOutcome
	total := 0
	for _, o := range kept {
		res.Targets = append(res.Targets, o.fit)
		where := fmt.Sprintf("target at (%.2f, %.2f) mm", o.fit.XM*1e3, o.fit.ZM*1e3)
		if o.fit.Channels < targetMinChannels {
			res.Notes = append(res.Notes, fmt.Sprintf("%s: only %d arrival times fit; left out of the combination", where, o.fit.Channels))
			continue
		}
		use = append(use, o)
		total += o.fit.Channels
	}
	if len(use) == 0 {
		return nil, fmt.Errorf("%w: %d target(s) detected, none usable (%s)",
			ErrNoTargets, len(cands), strings.Join(res.Notes[1:], "; "))
	}
	res.Confidence = High
	lowf := func(format string, args ...any) {
		res.Confidence = Low
		res.Notes = append(res.Notes, fmt.Sprintf(format, args...))
	}
	// A fit stopped at a bound has no meaningful standard error; leave it out
	// of the mean unless nothing else is left.
	var inner []targetOutcome
	for _, o := range use {
		if o.atBound {
			lowf("target at (%.2f, %.2f) mm: the fit stops at the speed bound %.0f m/s", o.fit.XM*1e3, o.fit.ZM*1e3, o.fit.SpeedMPS)
			continue
		}
		inner = append(inner, o)
	}
	if len(inner) == 0 {
		inner = use
	}
	speeds := make([]float64, len(inner))
	ses := make([]float64, len(inner))
	sens := make([]float64, len(inner))
	for i, o := range inner {
		speeds[i], ses[i], sens[i] = o.fit.SpeedMPS, o.fit.StdErrMPS, o.dcdt
	}
	sigmaT := targetTimeRefFrac / a.Probe.CenterFrequencyHz * 1e9 // ns
	comb := combineSpeeds(speeds, ses, sens, sigmaT)
	// The method's own systematic part (rectangular, half-width
	// targetMethodFrac of the speed) joins the time reference's.
	comb.sys = math.Hypot(comb.sys, targetMethodFrac*comb.mean/math.Sqrt(3))
	res.SpeedMPS, res.StdErrMPS, res.SystematicMPS = comb.mean, comb.se, comb.sys
	k := 1.96
	if comb.inflated {
		dof := len(inner) - 1
		k = studentT975(dof)
		res.Notes = append(res.Notes, fmt.Sprintf("the targets' speeds scatter more than their uncertainties allow (chi-square %.1f on %d degrees of freedom); standard error inflated by %.2f, interval from Student's t", comb.chi2, dof, math.Sqrt(comb.chi2/float64(dof))))
	}
	hw := math.Hypot(k*comb.se, 1.96*comb.sys)
	res.CI95MPS = [2]float64{comb.mean - hw, comb.mean + hw}
	offs := ""
	if cfg.FitOffset {
		offs = " and a common time offset"
	}
	res.Notes = append(res.Notes, fmt.Sprintf("%d target(s) fitted for position, speed%s from %d arrival times in all", len(inner), offs, total))
	if !(hw <= MaxConfidentHalfWidth) {
		lowf("the 95 %% interval is %.1f m/s wide", 2*hw)
	}
	return res, nil
}

func (cfg *TargetConfig) defaults(a *acq.Acquisition, ch *recon.Channels) error {
	if err := a.ValidateHeader(); err != nil {
		return err
	}
	if ch == nil || ch.NE != a.NumEvents() || ch.NN != a.NumElements() || ch.NS != a.NumSamples || len(ch.Data) != ch.NE*ch.NN*ch.NS {
		return errors.New("targets: channel data do not match the acquisition")
	}
	if cfg.InitialSpeedMPS == 0 {
		cfg.InitialSpeedMPS = a.AssumedSpeedMPS
	}
	if !(cfg.InitialSpeedMPS >= 300 && cfg.InitialSpeedMPS <= 10000) {
		return fmt.Errorf("targets: initial speed %g m/s: want 300..10000", cfg.InitialSpeedMPS)
	}
	if cfg.MinMPS == 0 {
		cfg.MinMPS = 1300
	}
	if cfg.MaxMPS == 0 {
		cfg.MaxMPS = 1800
	}
	if !(cfg.MinMPS >= 300 && cfg.MaxMPS <= 10000 && cfg.MaxMPS > cfg.MinMPS) {
		return fmt.Errorf("targets: speed bounds %g..%g m/s: want 300 <= min < max <= 10000", cfg.MinMPS, cfg.MaxMPS)
	}
	if cfg.MinContrastDB == 0 {
		cfg.MinContrastDB = 20
	}
	if math.IsNaN(cfg.MinContrastDB) || math.IsInf(cfg.MinContrastDB, 0) {
		return errors.New("targets: minimum contrast must be finite")
	}
	if cfg.MaxTargets == 0 {
		cfg.MaxTargets = 8
	}
	if cfg.MaxTargets < 0 {
		return fmt.Errorf("targets: maximum number of targets must be positive, got %d", cfg.MaxTargets)
	}
	if cfg.Events == nil {
		for e := range a.NumEvents() {
			cfg.Events = append(cfg.Events, e)
		}
	}
	if len(cfg.Events) == 0 {
		return errors.New("targets: no events")
	}
	for _, e := range cfg.Events {
		if e < 0 || e >= a.NumEvents() {
			return fmt.Errorf("targets: event %d outside 0..%d", e, a.NumEvents()-1)
		}
	}
	if cfg.Workers <= 0 {
		cfg.Workers = runtime.GOMAXPROCS(0)
	}
	return nil
}

// region returns the search region: the given one, or the span of the array
// from 3 mm down to the deepest echo the record holds at the initial speed.
func (cfg *TargetConfig) region(a *acq.Acquisition) (Region, error) {
	if cfg.Region != nil {
		r := *cfg.Region
		if !r.valid() {
			return Region{}, fmt.Errorf("targets: region %s: want x1 > x0, z1 > z0 > 0", r)
		}
		return r, nil
	}
	els := a.Probe.Elements()
	x0, x1 := math.Inf(1), math.Inf(-1)
	for _, e := range els {
		x0, x1 = math.Min(x0, e.X), math.Max(x1, e.X)
	}
	c := cfg.InitialSpeedMPS
	z0 := math.Max(3e-3, c*a.StartTimeS/2+3e-3)
	z1 := c*(a.StartTimeS+a.Duration())/2 - c*targetPulseWidth(&a.Probe)
	r := Region{X0: x0, X1: x1, Z0: z0, Z1: z1}
	if !r.valid() {
		return Region{}, fmt.Errorf("targets: the record holds no echoes deeper than 3 mm at %g m/s", c)
	}
	return r, nil
}

// targetPulseWidth returns the -6 dB envelope width of the pulse, s, for a
// Gaussian pulse: 4 ln2 / (pi B f0), with B = 0.6 when the bandwidth is
// unknown.
func targetPulseWidth(p *acq.Probe) float64 {
	b := p.FractionalBandwidth
	if !(b > 0) {
		b = 0.6
	}
	return 4 * math.Ln2 / (math.Pi * b * p.CenterFrequencyHz)
}

// targetCandidate is a detected target at the initial speed.
type targetCandidate struct {
	x, z       float64 // m
	contrastDB float64
}

// detectTargets forms the detection image and returns its isolated, bright
// local maxima, brightest first.
func detectTargets(a *acq.Acquisition, ch *recon.Channels, cfg *TargetConfig, r Region) ([]targetCandidate, error) {
	c := cfg.InitialSpeedMPS
	d := c / a.Probe.CenterFrequencyHz / 2
	if n := (r.X1 - r.X0) * (r.Z1 - r.Z0) / (d * d); n > targetMaxDetectPixels {
		d *= math.Sqrt(n / targetMaxDetectPixels)
	}
	g, err := recon.NewRect(r.X0, r.X1, d, r.Z0, r.Z1, d)
	if err != nil {
		return nil, err
	}
	if g.Rows < 3 || g.Cols < 3 {
		return nil, fmt.Errorf("targets: region %s is too small to search (%d x %d pixels)", r, g.Rows, g.Cols)
	}
	bf, err := recon.NewBeamformer(a, &g, recon.NewHomogeneous(c, a.Probe.Elements()),
		recon.Config{FNumber: 1.5, Window: dsp.Window{Kind: dsp.Hann}, Events: cfg.Events, Workers: cfg.Workers})
	if err != nil {
		return nil, err
	}
	img, err := bf.Form(nil, ch)
	if err != nil {
		return nil, err
	}
	env := recon.Envelope(img)
	rows, cols := g.Rows, g.Cols
	at := func(i, j int) float64 { return env[i*cols+j] }
	type peak struct {
		i, j int
		v    float64
	}
	var peaks []peak
	for i := 1; i < rows-1; i++ {
		for j := 1; j < cols-1; j++ {
			v := at(i, j)
			if !(v > 0) {
				continue
			}
			isMax := true
			for di := -1; di <= 1 && isMax; di++ {
				for dj := -1; dj <= 1; dj++ {
					if di == 0 && dj == 0 {
						continue
					}
					// ties go to the earlier pixel, so a flat top yields one maximum
					u := at(i+di, j+dj)
					if u > v || (u == v && (di < 0 || (di == 0 && dj < 0))) {
						isMax = false
						break
					}
				}
			}
			if isMax {
				peaks = append(peaks, peak{i, j, v})
			}
		}
	}
	sort.SliceStable(peaks, func(p, q int) bool { return peaks[p].v > peaks[q].v })

	// Brighter maxima seen so far, bucketed in cells of the shadow radius.
	type cell struct{ i, j int }
	buckets := map[cell][]int{}
	cellOf := func(x, z float64) cell {
		return cell{int(math.Floor(x / targetShadowM)), int(math.Floor(z / targetShadowM))}
	}
	shadow := math.Pow(10, targetShadowDB/20)
	var out []targetCandidate
	hw := max(1, int(math.Round(targetBackgroundM/2/d)))
	stride := max(1, hw/16) // about a thousand background pixels at most
	var bg []float64
	for k, p := range peaks {
		if len(out) >= cfg.MaxTargets {
			break
		}
		x, z := g.X[p.j], g.Z[p.i]
		cc := cellOf(x, z)
		isolated := true
		for di := -1; di <= 1; di++ {
			for dj := -1; dj <= 1; dj++ {
				for _, q := range buckets[cell{cc.i + di, cc.j + dj}] {
					pq := peaks[q]
					r := math.Hypot(g.X[pq.j]-x, g.Z[pq.i]-z)
					if r < targetIsolationM || (r < targetShadowM && pq.v > shadow*p.v) {
						isolated = false
					}
				}
			}
		}
		buckets[cc] = append(buckets[cc], k)
		if !isolated {
			continue
		}
		bg = bg[:0]
		for i := max(0, p.i-hw); i <= min(rows-1, p.i+hw); i += stride {
			for j := max(0, p.j-hw); j <= min(cols-1, p.j+hw); j += stride {
				bg = append(bg, at(i, j))
			}
		}
		med := tgtMedian(bg)
		contrast := math.Inf(1)
		if med > 0 {
			contrast = 20 * math.Log10(p.v/med)
		}
		if contrast < cfg.MinContrastDB {
			continue
		}
		// sub-pixel position: a parabola through the log-envelope on each axis
		lg := func(v float64) float64 { return math.Log(math.Max(v, 1e-300)) }
		ox, _ := dsp.ParabolicPeak(lg(at(p.i, p.j-1)), lg(p.v), lg(at(p.i, p.j+1)))
		oz, _ := dsp.ParabolicPeak(lg(at(p.i-1, p.j)), lg(p.v), lg(at(p.i+1, p.j)))
		out = append(out, targetCandidate{x: x + ox*d, z: z + oz*d, contrastDB: contrast})
	}
	return out, nil
}

// tgtMedian returns the median of v, reordering it.
func tgtMedian(v []float64) float64 {
	n := len(v)
	if n == 0 {
		return math.NaN()
	}
	sort.Float64s(v)
	if n%2 == 1 {
		return v[n/2]
	}
	return (v[n/2-1] + v[n/2]) / 2
}

// targetFitter holds what every target's measurement and fit share.
type targetFitter struct {
	a       *acq.Acquisition
	ch      *recon.Channels
	cfg     *TargetConfig
	els     []acq.Element
	f0      float64
	cosMax  float64      // directivity acceptance, cos of the angle off the normal
	half    int          // window half-length, samples
	maxLag  int          // coarse lag search, samples
	omega   float64      // centre angular frequency, rad per sample
	span    [][2]float64 // lateral extent of each event's firing elements, m
	edges   [][2]int     // each event's outermost firing elements
	edgeGap float64      // least delay of the edge waves, s
	events  []int
	focusEv []int // events of the focus search
	// bfWorkers is the worker pool of each focus-search beamformer.
	bfWorkers int
}

func newTargetFitter(a *acq.Acquisition, ch *recon.Channels, cfg *TargetConfig) *targetFitter {
	f := &targetFitter{a: a, ch: ch, cfg: cfg, els: a.Probe.Elements(), f0: a.Probe.CenterFrequencyHz, events: cfg.Events}
	deg := 45.0
	if w := a.Probe.ElementWidthM; w > 0 {
		// -6 dB of sinc(w sin(theta) / lambda): sinc(u) = 1/2 at u = 0.6034
		if s := 0.6034 * (cfg.InitialSpeedMPS / f.f0) / w; s < 1 {
			deg = math.Asin(s) * 180 / math.Pi
		} else {
			deg = 90
		}
	}
	f.cosMax = math.Cos(math.Min(deg, 80) * math.Pi / 180)
	pw := targetPulseWidth(&a.Probe)
	f.half = max(3, int(math.Ceil(1.25*pw*ch.FS)))
	f.maxLag = max(2, int(math.Ceil(pw*ch.FS)))
	f.omega = 2 * math.Pi * f.f0 / ch.FS
	// lateral span of each event's firing elements
	f.span = make([][2]float64, a.NumEvents())
	f.edgeGap = pw
	for e := range a.Events {
		lo, hi := math.Inf(1), math.Inf(-1)
		for _, k := range a.Events[e].Firing() {
			lo, hi = math.Min(lo, f.els[k].X), math.Max(hi, f.els[k].X)
		}
		pitch := a.Probe.MeanPitch()
		f.span[e] = [2]float64{lo - pitch/2, hi + pitch/2}
		var ed [2]int
		for _, k := range a.Events[e].Firing() {
			if f.els[k].X == lo {
				ed[0] = k
			}
			if f.els[k].X == hi {
				ed[1] = k
			}
		}
		f.edges = append(f.edges, ed)
	}
	n := len(f.events)
	if n <= targetFocusEvents {
		f.focusEv = f.events
	} else {
		for k := range targetFocusEvents {
			f.focusEv = append(f.focusEv, f.events[k*(n-1)/(targetFocusEvents-1)])
		}
	}
	return f
}

// targetOutcome is one target's fit and its diagnostics.
type targetOutcome struct {
	fit     TargetFit
	atBound bool
	dcdt    float64 // m/s per ns of time-reference error
	err     error
}

// fitTarget focuses on one candidate, then alternates arrival-time
// measurement and fit.
func (f *targetFitter) fitTarget(cand targetCandidate) targetOutcome {
	x, z, c, err := f.focus(cand.x, cand.z)
	if err != nil {
		return targetOutcome{err: err}
	}
	p := tgtParams{x, z, c, 0}
	var fr tgtFitResult
	for pass := range targetPasses {
		obs := f.measure(p)
		if len(obs) < 6 {
			if pass == 0 {
				return targetOutcome{err: fmt.Errorf("only %d arrival times could be measured", len(obs))}
			}
			break
		}
		fr = f.fit(obs, p)
		if fr.err != nil {
			return targetOutcome{err: fr.err}
		}
		p = fr.p
	}
	if fr.n == 0 {
		return targetOutcome{err: errors.New("no arrival times measured")}
	}
	return targetOutcome{
		fit: TargetFit{XM: fr.p[0], ZM: fr.p[1], SpeedMPS: fr.p[2], StdErrMPS: fr.se, Channels: fr.n,
			RMSResidualNS: fr.rmsNS, OffsetNS: fr.p[3] * 1e9},
		atBound: fr.atBound,
		dcdt:    fr.dcdt,
	}
}

// focus finds the speed and position at which the target's image is
// brightest: steps of about 20 m/s over the speed bounds and a parabola
// through the brightest and its neighbours. At speed c the target is looked
// for near (x, z c / c_0), where the image of a target seen at (x, z) at
// speed c_0 moves to. This only needs to land within a fraction of a pulse
// length of the arrival times; the fit does the rest.
func (f *targetFitter) focus(x0, z0 float64) (x, z, c float64, err error) {
	c0 := f.cfg.InitialSpeedMPS
	lo, hi := f.cfg.MinMPS, f.cfg.MaxMPS
	n := max(3, int(math.Ceil((hi-lo)/20))+1)
	step := (hi - lo) / float64(n-1)
	vals := make([]float64, n)
	for k := range n {
		c := lo + float64(k)*step
		v, _, _, err := f.brightest(c, x0, z0*c/c0)
		if err != nil {
			return 0, 0, 0, err
		}
		vals[k] = v
	}
	k := dsp.ArgMax(vals)
	if k < 0 || !(vals[k] > 0) {
		return 0, 0, 0, errors.New("no echo near the detected position")
	}
	c = lo + float64(k)*step
	if k > 0 && k < n-1 {
		d, _ := dsp.ParabolicPeak(vals[k-1], vals[k], vals[k+1])
		c += d * step
	}
	_, x, z, err = f.brightest(c, x0, z0*c/c0)
	return x, z, c, err
}

// brightest forms a small image around (cx, cz) at speed c and returns its
// largest envelope value and where it lies, both refined by parabolas
// through the log-envelope. When the maximum lies on the edge of the box, the
// box is moved there, up to three times.
func (f *targetFitter) brightest(c, cx, cz float64) (v, x, z float64, err error) {
	lam := c / f.f0
	dx, dz := lam/2, lam/6
	const half = 1e-3
	m := recon.NewHomogeneous(c, f.els)
	for range 4 {
		z0 := math.Max(cz-half, 1e-3)
		g, err := recon.NewRect(cx-half, cx+half, dx, z0, z0+2*half, dz)
		if err != nil {
			return 0, 0, 0, err
		}
		bf, err := recon.NewBeamformer(f.a, &g, m, recon.Config{FNumber: 1, Events: f.focusEv, Workers: f.bfWorkers})
		if err != nil {
			return 0, 0, 0, err
		}
		img, err := bf.Form(nil, f.ch)
		if err != nil {
			return 0, 0, 0, err
		}
		env := recon.Envelope(img)
		k := dsp.ArgMax(env)
		if k < 0 {
			return 0, cx, cz, nil
		}
		i, j := k/g.Cols, k%g.Cols
		x, z, v = g.X[j], g.Z[i], env[k]
		if (i == 0 || i == g.Rows-1 || j == 0 || j == g.Cols-1) && (i > 0 || z0 > 1e-3) {
			cx, cz = x, z
			continue
		}
		lg := func(v float64) float64 { return math.Log(math.Max(v, 1e-300)) }
		lv := lg(v)
		var ox, oz, vx, vz float64
		if j > 0 && j < g.Cols-1 {
			ox, vx = dsp.ParabolicPeak(lg(env[k-1]), lv, lg(env[k+1]))
		} else {
			vx = lv
		}
		if i > 0 && i < g.Rows-1 {
			oz, vz = dsp.ParabolicPeak(lg(env[k-g.Cols]), lv, lg(env[k+g.Cols]))
		} else {
			vz = lv
		}
		return math.Exp(vx + vz - lv), x + ox*dx, z + oz*dz, nil
	}
	return v, x, z, nil
}

// tgtParams are the fit parameters: x (m), z (m), c (m/s), offset (s).
type tgtParams [4]float64

// tgtObs is one measured arrival time.
type tgtObs struct {
	ev, el int     // index into targetFitter.events, element
	t      float64 // s
	w      float64 // weight, rho^2 / (1 - rho^2)
}

// tgtModel gives predicted arrival times, with the waves derived at each
// speed cached.
type tgtModel struct {
	f     *targetFitter
	cache map[float64]*tgtWaves
}

type tgtWaves struct {
	m     *recon.Homogeneous
	waves []*recon.Wave
}

func (f *targetFitter) model() *tgtModel { return &tgtModel{f: f, cache: map[float64]*tgtWaves{}} }

func (tm *tgtModel) at(c float64) *tgtWaves {
	if w, ok := tm.cache[c]; ok {
		return w
	}
	if len(tm.cache) > 32 {
		clear(tm.cache)
	}
	f := tm.f
	w := &tgtWaves{m: recon.NewHomogeneous(c, f.els)}
	for _, e := range f.events {
		w.waves = append(w.waves, recon.NewWave(w.m, &f.a.Events[e], f.f0))
	}
	tm.cache[c] = w
	return w
}

// time returns the predicted arrival time of event index k on element j, and
// whether the path is valid: the element sees the target within its
// directivity, and the event's wave reaches it (a single firing element within
// its directivity; otherwise a wavefront launched from within the firing
// aperture).
func (tm *tgtModel) time(p tgtParams, k, j int) (float64, bool) {
	f := tm.f
	w := tm.at(p[2])
	x, z := p[0], p[1]
	if !f.sees(j, x, z) {
		return 0, false
	}
	wave := w.waves[k]
	tx, xs := w.m.Transmit(wave, x, z)
	if math.IsNaN(tx) || math.IsInf(tx, 0) {
		return 0, false
	}
	if wave.Front.Kind == acq.KindSingleElement {
		if !f.sees(wave.Front.Element, x, z) {
			return 0, false
		}
	} else {
		e := f.events[k]
		if sp := f.span[e]; xs < sp[0] || xs > sp[1] {
			return 0, false
		}
		if wave.Front.Kind != acq.KindFocused {
			// The waves diffracted at the ends of the firing aperture arrive
			// after the main wavefront; they must come a pulse length (-6 dB)
			// later, or they distort the pulse the target sees.
			d := f.a.Events[e].Delays
			for _, q := range f.edges[e] {
				if d[q]+w.m.Receive(q, x, z)-tx < f.edgeGap {
					return 0, false
				}
			}
		}
	}
	return tx + w.m.Receive(j, x, z) + p[3], true
}

// sees reports whether element j sees (x, z) within the acceptance angle.
func (f *targetFitter) sees(j int, x, z float64) bool {
	e := f.els[j]
	dx, dz := x-e.X, z-e.Z
	r := math.Hypot(dx, dz)
	return r > 0 && (dx*e.NX+dz*e.NZ)/r >= f.cosMax
}

// extract interpolates 2 half + 1 baseband samples centred on time tc,
// with the carrier phase at tc removed: b(tau) = iq(tc + tau) exp(j 2 pi fd tc),
// so that a pulse arriving at tc + delta reads env(tau - delta)
// exp(-j 2 pi f0 delta) (for fd = f0) whatever tc is. ok is false when the
// window leaves the record.
func (f *targetFitter) extract(dst []complex64, row []complex64, tc float64, half int) ([]complex64, bool) {
	s0 := (tc-f.ch.T0)*f.ch.FS - float64(half)
	if s0 < 1 || s0+float64(2*half) > float64(len(row)-3) {
		return dst, false
	}
	dst = slices.Grow(dst[:0], 2*half+1)[:2*half+1]
	ph := dsp.Phasor(f.ch.FD * tc)
	for n := range dst {
		dst[n] = dsp.Cubic(row, float32(s0+float64(n))) * ph
	}
	return dst, true
}

// measure measures the arrival times of the target at p on every valid
// channel of every event; see Targets for the method.
func (f *targetFitter) measure(p tgtParams) []tgtObs {
	tm := f.model()
	var out []tgtObs
	K, M := f.half, f.maxLag
	L := 2*K + 1
	var ext, padded, bminus, buf []complex64
	for k, e := range f.events {
		type chn struct {
			j    int
			tp   float64     // predicted arrival, s
			lag  float64     // measured delay after tp, samples
			coef float64     // correlation with the reference
			win  []complex64 // window at tp + lag
		}
		var cs []chn
		stack := make([]complex64, L)
		for j := range f.ch.NN {
			tp, ok := tm.time(p, k, j)
			if !ok {
				continue
			}
			row := f.ch.Row(e, j)
			var okw bool
			ext, okw = f.extract(ext, row, tp, K+M)
			if !okw {
				continue
			}
			win := slices.Clone(ext[M : M+L])
			for n, v := range win {
				stack[n] += v
			}
			cs = append(cs, chn{j: j, tp: tp, win: win})
		}
		if len(cs) < 3 {
			continue
		}
		padded = slices.Grow(padded[:0], L+2*M)[:L+2*M]
		bminus = slices.Grow(bminus[:0], L)[:L]
		// First pass: against the stack at the predicted times.
		for i := range cs {
			cn := &cs[i]
			row := f.ch.Row(e, cn.j)
			ext, _ = f.extract(ext, row, cn.tp, K+M)
			clear(padded)
			for n := range L {
				padded[M+n] = stack[n] - cn.win[n]
				bminus[n] = padded[M+n]
			}
			lag, coef := dsp.XCorrLag(padded, ext, M)
			if coef == 0 {
				cn.coef = 0
				continue
			}
			cn.lag, cn.coef, buf = f.phaseAlign(buf, row, cn.tp, lag, bminus)
			cn.win = append(cn.win[:0], buf...)
		}
		// Second pass: against the stack of the aligned windows.
		aligned := make([]complex64, L)
		n := 0
		for _, cn := range cs {
			if cn.coef >= targetMinCoef {
				for i, v := range cn.win {
					aligned[i] += v
				}
				n++
			}
		}
		if n < 3 {
			continue
		}
		for i := range cs {
			cn := &cs[i]
			if cn.coef == 0 {
				continue
			}
			in := cn.coef >= targetMinCoef
			for t := range L {
				bminus[t] = aligned[t]
				if in {
					bminus[t] -= cn.win[t]
				}
			}
			cn.lag, cn.coef, buf = f.phaseAlign(buf, f.ch.Row(e, cn.j), cn.tp, cn.lag, bminus)
		}
		// The event's absolute time: the envelope peak of the aligned stack.
		env := make([]float64, L)
		for t, v := range aligned {
			env[t] = math.Log(math.Max(cmplxAbs(v), 1e-300))
		}
		pk := dsp.ArgMax(env)
		if pk < 1 || pk > L-2 {
			continue
		}
		d, _ := dsp.ParabolicPeak(env[pk-1], env[pk], env[pk+1])
		tau := (float64(pk-K) + d) / f.ch.FS
		for _, cn := range cs {
			if cn.coef < targetMinCoef {
				continue
			}
			r := math.Min(cn.coef, 0.999)
			out = append(out, tgtObs{ev: k, el: cn.j, t: cn.tp + cn.lag/f.ch.FS + tau, w: r * r / (1 - r*r)})
		}
	}
	return out
}

// phaseAlign refines the delay lag (samples after tp) of the channel in row
// against the reference ref: the window at tp + lag is re-interpolated and
// the lag moved by the phase of its zero-lag product with ref until the
// change is below a thousandth of a sample. It returns the lag, the
// correlation coefficient and the final window (in buf).
func (f *targetFitter) phaseAlign(buf, row []complex64, tp, lag float64, ref []complex64) (float64, float64, []complex64) {
	K := f.half
	coef := 0.0
	for range 6 {
		var ok bool
		buf, ok = f.extract(buf, row, tp+lag/f.ch.FS, K)
		if !ok {
			return lag, 0, buf
		}
		var d float64
		d, coef = dsp.PhaseLag(ref, buf, f.omega)
		if math.Abs(d) > 0.5*math.Pi/f.omega { // more than a quarter period: step gently
			d = math.Copysign(0.5*math.Pi/f.omega, d)
		}
		lag += d
		if math.Abs(d) < 1e-3 {
			break
		}
	}
	return lag, coef, buf
}

func cmplxAbs(v complex64) float64 { return math.Hypot(float64(real(v)), float64(imag(v))) }

// tgtFitResult is the outcome of one robust fit.
type tgtFitResult struct {
	p       tgtParams
	se      float64 // standard error of c, m/s
	dcdt    float64 // change of c for a 1 ns later time reference, m/s
	n       int
	rmsNS   float64
	atBound bool
	err     error
}

// fit fits the arrival times by weighted Levenberg-Marquardt from p,
// dropping robust outliers (normalised residuals beyond
// targetOutlierSigmas robust standard deviations of the median) and
// refitting until the kept set settles, at most eight times.
func (f *targetFitter) fit(obs []tgtObs, p tgtParams) tgtFitResult {
	tm := f.model()
	use := make([]bool, len(obs))
	for i := range use {
		use[i] = true
	}
	np := 3
	if f.cfg.FitOffset {
		np = 4
	}
	var res tgtFitResult
	for round := 0; round < 8; round++ {
		var sub []tgtObs
		for i, o := range obs {
			if use[i] {
				sub = append(sub, o)
			}
		}
		if len(sub) <= np+1 {
			return tgtFitResult{err: fmt.Errorf("only %d arrival times left after outlier rejection", len(sub))}
		}
		res = f.lm(tm, sub, p, np)
		if res.err != nil {
			return res
		}
		p = res.p
		// normalised residuals of all the observations
		z := make([]float64, 0, len(obs))
		zi := make([]float64, len(obs))
		for i, o := range obs {
			t, ok := tm.time(p, o.ev, o.el)
			if !ok {
				zi[i] = math.Inf(1)
				continue
			}
			zi[i] = (o.t - t) * 1e9 * math.Sqrt(o.w)
			if use[i] {
				z = append(z, zi[i])
			}
		}
		med := tgtMedian(slices.Clone(z))
		dev := make([]float64, len(z))
		for i, v := range z {
			dev[i] = math.Abs(v - med)
		}
		s := 1.4826 * tgtMedian(dev)
		if !(s > 0) {
			break // (nearly) exact data: nothing stands out
		}
		changed := false
		for i := range obs {
			keep := !math.IsInf(zi[i], 0) && math.Abs(zi[i]-med) <= targetOutlierSigmas*s
			if keep != use[i] {
				// once dropped, an observation may come back when the fit moves
				changed = true
				use[i] = keep
			}
		}
		if !changed {
			break
		}
	}
	return res
}

// lm is weighted Levenberg-Marquardt in scaled parameters (mm, mm, m/s, ns)
// with residuals in ns and central-difference derivatives; c is kept within
// the bounds. It returns the fit with s^2 (J^T W J)^-1 standard errors.
func (f *targetFitter) lm(tm *tgtModel, obs []tgtObs, p0 tgtParams, np int) tgtFitResult {
	scale := [4]float64{1e-3, 1e-3, 1, 1e-9}
	step := [4]float64{1e-3, 1e-3, 1e-2, 1e-2}
	lo, hi := f.cfg.MinMPS, f.cfg.MaxMPS
	n := len(obs)
	toP := func(u [4]float64) tgtParams {
		var p tgtParams
		for i := range 4 {
			p[i] = u[i] * scale[i]
		}
		return p
	}
	var u [4]float64
	for i := range 4 {
		u[i] = p0[i] / scale[i]
	}
	u[2] = math.Min(math.Max(u[2], lo), hi)
	if np < 4 {
		u[3] = 0
	}
	resid := func(u [4]float64, r []float64) (float64, bool) {
		p := toP(u)
		ss := 0.0
		for i, o := range obs {
			t, ok := tm.time(p, o.ev, o.el)
			if !ok {
				// a trial point from which the path is no longer valid:
				// the model is still defined, so keep the fit smooth
				t = tm.rawTime(p, o.ev, o.el)
			}
			r[i] = (o.t - t) * 1e9
			if math.IsNaN(r[i]) || math.IsInf(r[i], 0) {
				return math.Inf(1), false
			}
			ss += o.w * r[i] * r[i]
		}
		return ss, true
	}
	r := make([]float64, n)
	rt := make([]float64, n)
	jac := make([][]float64, np)
	for k := range jac {
		jac[k] = make([]float64, n)
	}
	ss, ok := resid(u, r)
	if !ok {
		return tgtFitResult{err: errors.New("the model is undefined at the starting point")}
	}
	jacobian := func() {
		for k := range np {
			up, dn := u, u
			up[k] += step[k]
			dn[k] -= step[k]
			resid(up, rt)
			copy(jac[k], rt)
			resid(dn, rt)
			for i := range n {
				// r = t_obs - t_model, so d t_model / du = -(r_up - r_dn) / 2h
				jac[k][i] = -(jac[k][i] - rt[i]) / (2 * step[k])
			}
		}
	}
	normal := func() (a [4][4]float64, g [4]float64) {
		for i, o := range obs {
			for k := range np {
				g[k] += o.w * jac[k][i] * r[i]
				for l := range np {
					a[k][l] += o.w * jac[k][i] * jac[l][i]
				}
			}
		}
		return
	}
	lambda := 1e-3
	jacobian()
	for iter := 0; iter < 100; iter++ {
		a, g := normal()
		improved := false
		for try := 0; try < 20; try++ {
			m := a
			for k := range np {
				m[k][k] += lambda * a[k][k]
			}
			d, ok := tgtSolve(m, g, np)
			if !ok {
				lambda *= 10
				continue
			}
			nu := u
			for k := range np {
				nu[k] += d[k]
			}
			nu[2] = math.Min(math.Max(nu[2], lo), hi)
			nss, ok := resid(nu, rt)
			if ok && nss <= ss {
				small := true
				for k := range np {
					if math.Abs(nu[k]-u[k]) > 1e-7*math.Max(1, math.Abs(u[k])) {
						small = false
					}
				}
				rel := (ss - nss) / math.Max(ss, 1e-300)
				u, ss = nu, nss
				copy(r, rt)
				lambda = math.Max(lambda/10, 1e-9)
				improved = !(small || rel < 1e-12)
				break
			}
			lambda *= 10
		}
		if !improved {
			break
		}
		jacobian()
	}
	resid(u, r)
	jacobian()
	a, _ := normal()
	res := tgtFitResult{p: toP(u), n: n}
	cov, ok := tgtInverse(a, np)
	if !ok || n <= np {
		return tgtFitResult{err: errors.New("the fit is singular: the arrival times do not determine position and speed")}
	}
	s2 := ss / float64(n-np)
	// Residuals that vary smoothly from element to element (an unmodelled
	// arrival-time pattern rather than noise) carry less information than
	// their number suggests: inflate the variance by the AR(1) factor
	// (1 + rho1) / (1 - rho1) of their lag-one correlation between
	// neighbouring elements of one event.
	var num, den float64
	for i := 1; i < n; i++ {
		a, b := obs[i-1], obs[i]
		if a.ev != b.ev || b.el-a.el != 1 {
			continue
		}
		za, zb := r[i-1]*math.Sqrt(a.w), r[i]*math.Sqrt(b.w)
		num += za * zb
		den += (za*za + zb*zb) / 2
	}
	if den > 0 {
		if rho := math.Min(num/den, 0.98); rho > 0 {
			s2 *= (1 + rho) / (1 - rho)
		}
	}
	res.se = math.Sqrt(s2 * cov[2][2])
	// Sensitivity of c to a common shift of every arrival time by 1 ns:
	// du = (J^T W J)^-1 J^T W 1 (zero when the offset is fitted).
	var g1 [4]float64
	for i, o := range obs {
		for k := range np {
			g1[k] += o.w * jac[k][i]
		}
	}
	for k := range np {
		res.dcdt += cov[2][k] * g1[k]
	}
	var sr float64
	for _, v := range r {
		sr += v * v
	}
	res.rmsNS = math.Sqrt(sr / float64(n))
	res.atBound = u[2] <= lo+1e-6 || u[2] >= hi-1e-6
	return res
}

// rawTime is time without the validity checks.
func (tm *tgtModel) rawTime(p tgtParams, k, j int) float64 {
	w := tm.at(p[2])
	tx, _ := w.m.Transmit(w.waves[k], p[0], p[1])
	return tx + w.m.Receive(j, p[0], p[1]) + p[3]
}

// tgtSolve solves the n x n system m d = g by Gaussian elimination with
// partial pivoting.
func tgtSolve(m [4][4]float64, g [4]float64, n int) ([4]float64, bool) {
	for c := range n {
		piv := c
		for r := c + 1; r < n; r++ {
			if math.Abs(m[r][c]) > math.Abs(m[piv][c]) {
				piv = r
			}
		}
		if m[piv][c] == 0 || math.IsNaN(m[piv][c]) {
			return g, false
		}
		m[c], m[piv] = m[piv], m[c]
		g[c], g[piv] = g[piv], g[c]
		for r := c + 1; r < n; r++ {
			q := m[r][c] / m[c][c]
			for k := c; k < n; k++ {
				m[r][k] -= q * m[c][k]
			}
			g[r] -= q * g[c]
		}
	}
	var d [4]float64
	for r := n - 1; r >= 0; r-- {
		s := g[r]
		for k := r + 1; k < n; k++ {
			s -= m[r][k] * d[k]
		}
		d[r] = s / m[r][r]
	}
	return d, true
}

// tgtInverse inverts the n x n matrix a.
func tgtInverse(a [4][4]float64, n int) ([4][4]float64, bool) {
	var inv [4][4]float64
	for c := range n {
		var e [4]float64
		e[c] = 1
		col, ok := tgtSolve(a, e, n)
		if !ok {
			return inv, false
		}
		for r := range n {
			inv[r][c] = col[r]
		}
	}
	return inv, true
}

// tgtCombined is the combination of several targets' speeds.
type tgtCombined struct {
	mean, se, sys, chi2 float64
	inflated            bool
}

// combineSpeeds combines the speeds v of several targets, with statistical
// standard errors se and sensitivities sens (m/s per ns) to an error of the
// time reference whose standard uncertainty is sigmaT (ns). Each target's
// total uncertainty is u_i = sqrt(se_i^2 + (sens_i sigmaT)^2); the mean is
// weighted by 1 / u_i^2. The statistical standard error propagates se_i
// through those weights; it is inflated by sqrt(chi2 / dof) when
// chi2 = sum ((v_i - mean) / u_i)^2 exceeds its 95 % quantile. The
// systematic part, common to all targets (one time reference), is the
// weighted mean sensitivity times sigmaT, and is not averaged down.
func combineSpeeds(v, se, sens []float64, sigmaT float64) tgtCombined {
	var out tgtCombined
	u2 := make([]float64, len(v))
	var sw, swv, sws float64
	for i := range v {
		u2[i] = se[i]*se[i] + sens[i]*sens[i]*sigmaT*sigmaT
		w := 1 / u2[i]
		sw += w
		swv += w * v[i]
		sws += w * sens[i]
	}
	out.mean = swv / sw
	out.sys = math.Abs(sws/sw) * sigmaT
	var vs float64
	for i := range v {
		w := 1 / u2[i] / sw
		vs += w * w * se[i] * se[i]
	}
	out.se = math.Sqrt(vs)
	dof := len(v) - 1
	if dof < 1 {
		return out
	}
	for i := range v {
		d := v[i] - out.mean
		out.chi2 += d * d / u2[i]
	}
	if out.chi2 > chiSquare95(dof) {
		out.se *= math.Sqrt(out.chi2 / float64(dof))
		out.inflated = true
	}
	return out
}

// chiSquare95 returns the 95 % quantile of the chi-square distribution with
// dof degrees of freedom: tabulated for dof <= 10 (standard tables), the
// Wilson-Hilferty approximation beyond (within 0.2 % there).
func chiSquare95(dof int) float64 {
	tab := []float64{3.841, 5.991, 7.815, 9.488, 11.070, 12.592, 14.067, 15.507, 16.919, 18.307}
	if dof >= 1 && dof <= len(tab) {
		return tab[dof-1]
	}
	k := float64(dof)
	q := 1 - 2/(9*k) + 1.6449*math.Sqrt(2/(9*k))
	return k * q * q * q
}

// studentT975 returns the 97.5 % quantile of Student's t with dof degrees
// of freedom: tabulated for dof <= 10 (standard tables), the Cornish-Fisher
// expansion z + (z^3 + z) / (4 dof) + (5 z^5 + 16 z^3 + 3 z) / (96 dof^2)
// beyond (within 0.1 % there).
func studentT975(dof int) float64 {
	tab := []float64{12.706, 4.303, 3.182, 2.776, 2.571, 2.447, 2.365, 2.306, 2.262, 2.228}
	if dof >= 1 && dof <= len(tab) {
		return tab[dof-1]
	}
	if dof < 1 {
		return math.Inf(1)
	}
	z := 1.959964
	n := float64(dof)
	z3, z5 := z*z*z, z*z*z*z*z
	return z + (z3+z)/(4*n) + (5*z5+16*z3+3*z)/(96*n*n)
}
