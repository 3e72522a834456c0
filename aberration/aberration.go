package aberration

import (
	"errors"
	"fmt"
	"math"
	"sort"
	"sync"

	"gonum.org/v1/gonum/mat"

	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/internal/jsonx"
	"celerity/recon"
	"celerity/speed"
)

// Method selects the estimator.
type Method int

// Estimators.
const (
	Neighbour Method = iota + 1 // nearest-neighbour differences, integrated
	Pairs                       // weighted least squares over many pairs
	Beamsum                     // each element against the beamformed sum, checked against pairs
)

func (m Method) String() string {
	switch m {
	case Neighbour:
		return "neighbour"
	case Beamsum:
		return "beamsum"
	}
	return "pairs"
}

// ParseMethod parses "neighbour" (or "neighbor"), "pairs" or "beamsum".
func ParseMethod(s string) (Method, error) {
	switch s {
	case "neighbour", "neighbor":
		return Neighbour, nil
	case "pairs":
		return Pairs, nil
	case "beamsum":
		return Beamsum, nil
	}
	return 0, fmt.Errorf("method %q: want neighbour, pairs or beamsum", s)
}

// Patch is a rectangular region (m) of the image plane, assumed
// isoplanatic: one profile explains its focusing errors.
type Patch struct{ X0, X1, Z0, Z1 float64 }

func (p Patch) String() string {
	return fmt.Sprintf("x %.1f..%.1f mm, z %.1f..%.1f mm", p.X0*1e3, p.X1*1e3, p.Z0*1e3, p.Z1*1e3)
}

// Config tunes Estimate.
type Config struct {
	// Model is the bulk delay model (homogeneous speed or layers); required.
	Model recon.DelayModel
	// Patches are the regions used; nil chooses three side by side across
	// the array over the depths where echoes stand above the noise.
	Patches []Patch
	Method  Method // default Beamsum
	// MaxLag is the largest element lag of the pairs method; default 8.
	MaxLag int
	// Iterations caps correct / re-form / re-estimate rounds; default 6.
	Iterations int
	// Initial is a starting profile (s per element), e.g. from an earlier
	// estimate; nil starts from zero.
	Initial []float64
	// TolS stops the iteration when the profile changes by less than this
	// rms (s); default 0.2 ns.
	TolS float64
	// FNumber is the receive F-number of the aperture data; default 0.6: a
	// wide aperture gives each element more pixels to be estimated from.
	FNumber float64
	// PixelM is the pixel spacing in the patches. The default is half a
	// wavelength, widened where needed so that one pass over the patches
	// costs at most about 1e7 pixel-element-event products (see
	// defaultPixel): a sequence of many events (synthetic aperture) focuses
	// its aperture data well, so fewer pixels serve, and each costs more.
	PixelM float64
	// MinCoverage is the fraction of a patch's pixels for which an element
	// must be active to be estimated from that patch; default 0.2.
	MinCoverage float64
	// Events restricts the events used; nil means all. A subset of a
	// synthetic-aperture sequence samples the transmit aperture sparsely:
	// its grating lobes lower the coherence the estimate works from.
	Events  []int
	Workers int
	// Progress, if not nil, is called after each iteration.
	Progress func(done, total int)
	// KeepCurvature leaves the quadratic part of the profile as the
	// element-by-element estimate gives it. By default, on three or more
	// plane or diverging waves, it is set afterwards by the coherence of the
	// events' images (curvature.go), which those estimates leave poorly
	// determined behind sparse compounding.
	KeepCurvature bool
	// GeometricTransmit applies a profile to a transmitted plane or
	// diverging wave at the stationary element alone (recon.Corrected
	// without a field). By default the wavelets of the elements within the
	// pulse's first Fresnel zone are summed (recon.NewCorrectedField, with
	// recon.FieldOf the probe), which follows a screen that varies within
	// that zone.
	GeometricTransmit bool
	// PixelWork sets the default pixel spacing (when PixelM is 0) by the
	// pixel-element-event products one pass over the patches may cost; 0
	// means BaseWork, twice that for compounded plane or diverging waves
	// (whose estimate's noise floor falls with denser pixels).
	PixelWork float64
	// SubAperture is the number of adjacent elements whose aperture data
	// are summed before the neighbour and many-pairs correlations (1: none;
	// odd). 0 chooses it: 1 for synthetic aperture and single waves, for
	// three or more compounded plane or diverging waves about a third of the
	// coherence length of the compounded transmit's main lobe (see
	// subaperture.go), which cancels the grating-lobe clutter that sets the
	// phase of neighbour correlations behind sparse compounding.
	SubAperture int
	field       recon.TransmitField
	// subAperture is SubAperture once chosen
	subAperture int
}

// Quality holds coherence measures of the aperture data of the patches.
type Quality struct {
	LagOneCoherence float64 `json:"lag_one_coherence"`
	CoherenceFactor float64 `json:"coherence_factor"`
	// ResidualLagRMSS is the rms of the remaining neighbour delay
	// differences (s), over all patches.
	ResidualLagRMSS float64 `json:"residual_lag_rms_s"`
}

// PatchResult is the estimate from one patch.
type PatchResult struct {
	Patch Patch `json:"-"`
	// PatchMM is the patch as x0, x1, z0, z1 in mm.
	PatchMM [4]float64 `json:"patch_mm"`
	// ProfileS is the patch's own profile, NaN where the patch does not see
	// an element; mean and trend removed over the elements it sees.
	ProfileS jsonx.Floats `json:"profile_s"`
	Elements int          `json:"elements"`
	// DisagreementS is the rms difference from the combined profile over the
	// elements the patch sees (both detrended there).
	DisagreementS float64 `json:"disagreement_s"`
	// CoherentGain is sum_p |sum_j A_pj|^2 / sum_p sum_j |A_pj|^2 over the
	// patch's aperture data after correction: 1 for incoherent noise, the
	// number of elements for perfectly coherent echoes.
	CoherentGain float64 `json:"coherent_gain"`
	// Rejected patches (fewer than 4 elements seen, or a coherent gain
	// below 2) are left out of the disagreement.
	Rejected bool `json:"rejected"`
}

// Result is an aberration estimate.
type Result struct {
	// ProfileS is the focusing-error profile (s per element): mean and
	// linear trend removed.
	ProfileS []float64 `json:"profile_s"`
	RMSS     float64   `json:"rms_s"`
	// MeanS and TrendSPerM are the least-squares constant and slope (s per
	// m along the array) removed from the raw estimate. The data do not
	// determine them (a common delay shifts the image in depth, a slope
	// steers it), so the estimate's steps carry neither: they are those of
	// Config.Initial (zero without one).
	MeanS      float64       `json:"mean_s"`
	TrendSPerM float64       `json:"trend_s_per_m"`
	Method     string        `json:"method"`
	Iterations int           `json:"iterations"`
	CentreHz   float64       `json:"centre_frequency_hz"`
	Patches    []PatchResult `json:"patches"`
	// Disagreement is the rms of the patches' disagreements over the rms of
	// the profile; large values (above about 0.5) mean the errors are not the
	// same everywhere (not isoplanatic).
	Disagreement float64 `json:"disagreement"`
	Isoplanatic  bool    `json:"isoplanatic"`
	// CurvatureFromEvents says that the quadratic part of the profile was
	// set by the coherence of the events' images (see Config.KeepCurvature).
	CurvatureFromEvents bool `json:"curvature_from_events"`
	// Unslipped counts the rounds after which whole-period slips between
	// neighbouring elements were removed (see unslip).
	Unslipped int `json:"unslipped"`
	// SubAperture is the number of adjacent elements summed before the
	// neighbour and many-pairs correlations (Config.SubAperture).
	SubAperture int      `json:"sub_aperture_elements"`
	Before      Quality  `json:"coherence_before"`
	After       Quality  `json:"coherence_after"`
	Notes       []string `json:"notes,omitempty"`
	// RawS is the estimate before mean and trend removal.
	RawS []float64 `json:"raw_s"`
}

func (cfg *Config) defaults(a *acq.Acquisition) error {
	if cfg.Model == nil {
		return errors.New("aberration: a bulk delay model is required")
	}
	if len(cfg.Model.Elements()) != a.NumElements() {
		return errors.New("aberration: the delay model does not match the probe")
	}
	if cfg.Method == 0 {
		cfg.Method = Beamsum
	}
	if cfg.Method != Neighbour && cfg.Method != Pairs && cfg.Method != Beamsum {
		return fmt.Errorf("aberration: unknown method %d", int(cfg.Method))
	}
	if cfg.MaxLag == 0 {
		cfg.MaxLag = 8
	}
	if cfg.MaxLag < 1 || cfg.MaxLag >= a.NumElements() {
		return fmt.Errorf("aberration: max lag %d outside 1..%d", cfg.MaxLag, a.NumElements()-1)
	}
	if cfg.Iterations == 0 {
		cfg.Iterations = 6
	}
	if cfg.Iterations < 1 || cfg.Iterations > 100 {
		return errors.New("aberration: iterations must be between 1 and 100")
	}
	if cfg.TolS == 0 {
		cfg.TolS = 0.2e-9
	}
	if cfg.FNumber == 0 {
		cfg.FNumber = 0.6
	}
	if cfg.PixelWork < 0 || math.IsNaN(cfg.PixelWork) || math.IsInf(cfg.PixelWork, 0) {
		return fmt.Errorf("aberration: pixel work must be positive and finite, got %g", cfg.PixelWork)
	}
	if cfg.PixelM < 0 || math.IsNaN(cfg.PixelM) || math.IsInf(cfg.PixelM, 0) {
		return fmt.Errorf("aberration: pixel spacing must be positive and finite, got %g m", cfg.PixelM)
	}
	if cfg.Initial != nil {
		if len(cfg.Initial) != a.NumElements() {
			return fmt.Errorf("aberration: initial profile has %d values for %d elements", len(cfg.Initial), a.NumElements())
		}
		for j, v := range cfg.Initial {
			if math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > 1e-4 {
				return fmt.Errorf("aberration: initial profile: element %d: %g s must be finite and within 100 us", j, v)
			}
		}
	}
	if cfg.SubAperture < 0 || cfg.SubAperture > a.NumElements()/4 || (cfg.SubAperture > 0 && cfg.SubAperture%2 == 0) {
		return fmt.Errorf("aberration: sub-aperture %d elements: want an odd number from 1 to %d, or 0 to choose", cfg.SubAperture, a.NumElements()/4)
	}
	if cfg.MinCoverage == 0 {
		cfg.MinCoverage = 0.2
	}
	return nil
}

// patchData is one patch's pixels and the statistics of its aperture data.
type patchData struct {
	patch  Patch
	xs, zs []float64
	grid   *recon.Grid // of xs, zs, made by the first gather
	// c[m][j] = sum_p A_pj conj(A_p,j+m); e[j] = sum_p |A_pj|^2 over pixels
	// where both are active; n[m][j] pixel counts.
	c      [][]complex128
	ea, eb [][]float64
	n      [][]int
	active []int // per element: pixels where it is active
	cf     [2]float64
	// energy = sum_p sum_j |A_pj|^2: cf[0] / energy is the patch's coherent
	// gain, 1 for incoherent noise and the number of elements for echoes
	// that are perfectly coherent across them.
	energy float64
	// r[j] = sum_p A_pj conj(B_pj), B_pj the beamformed sum of pixel p
	// without element j, with energies ra[j] = sum |A_pj|^2 and
	// rb[j] = sum |B_pj|^2 over the same pixels.
	r      []complex128
	ra, rb []float64
	// q1[j] = sum_p A_pj conj(A_p,j+1) and its energies qa, qb, when the
	// lagged products c are taken on sub-aperture sums (nil otherwise: c[1],
	// ea[1] and eb[1] are these)
	q1     []complex128
	qa, qb []float64
}

// Estimate estimates the focusing-error profile of acquisition a.
func Estimate(a *acq.Acquisition, ch *recon.Channels, cfg Config) (*Result, error) {
	if err := cfg.defaults(a); err != nil {
		return nil, err
	}
	if !cfg.GeometricTransmit {
		cfg.field = recon.FieldOf(&a.Probe)
		cfg.field.Cache = recon.NewFieldCache() // every gather re-forms the same pixels
	}
	nn := a.NumElements()
	res := &Result{Method: cfg.Method.String()}
	patches := cfg.Patches
	if patches == nil {
		var notes []string
		var err error
		patches, notes, err = AutoPatches(a, ch, cfg.Model.FaceSpeed(), cfg.FNumber)
		if err != nil {
			return nil, err
		}
		res.Notes = append(res.Notes, notes...)
	}
	if len(patches) == 0 {
		return nil, errors.New("aberration: no patches")
	}
	for _, p := range patches {
		finite := !math.IsInf(p.X0, 0) && !math.IsInf(p.X1, 0) && !math.IsInf(p.Z0, 0) && !math.IsInf(p.Z1, 0)
		if !(finite && p.X1 > p.X0 && p.Z1 > p.Z0 && p.Z0 > 0) {
			return nil, fmt.Errorf("aberration: patch %s: want finite x1 > x0 and z1 > z0 > 0", p)
		}
	}
	if cfg.PixelM == 0 {
		nev := a.NumEvents()
		if cfg.Events != nil {
			nev = len(cfg.Events)
		}
		work := cfg.PixelWork
		if work == 0 {
			work = gatherWork
			if acq.CompoundedWaves(a, cfg.Events) {
				work *= compoundedWork
			}
		}
		cfg.PixelM = defaultPixel(patches, cfg.Model.FaceSpeed()/a.Probe.CenterFrequencyHz, nn, nev, work)
	}
	x := elementCoords(a)
	cfg.subAperture = cfg.SubAperture
	if cfg.subAperture == 0 {
		cfg.subAperture = subApertureFor(a, cfg.Events, patches, x)
	}
	res.SubAperture = cfg.subAperture
	pds := make([]*patchData, len(patches))
	for i, p := range patches {
		// count before allocating: a fine spacing over a large patch is
		// rejected, not built
		nx := int(math.Floor((p.X1-p.X0)/cfg.PixelM+1e-9)) + 1
		nz := int(math.Floor((p.Z1-p.Z0)/cfg.PixelM+1e-9)) + 1
		if float64(nx)*float64(nz) > maxPatchPixels {
			return nil, fmt.Errorf("aberration: patch %s holds %.0f pixels at %.3g mm spacing (at most %d); use a smaller patch or a wider spacing",
				p, float64(nx)*float64(nz), cfg.PixelM*1e3, maxPatchPixels)
		}
		pd := &patchData{patch: p}
		for iz := range nz {
			for ix := range nx {
				pd.xs = append(pd.xs, p.X0+float64(ix)*cfg.PixelM)
				pd.zs = append(pd.zs, p.Z0+float64(iz)*cfg.PixelM)
			}
		}
		pds[i] = pd
	}
	res.CentreHz = centreFrequency(ch)
	omega := 2 * math.Pi * res.CentreHz
	lags := cfg.MaxLag
	if cfg.Method == Neighbour {
		lags = 1
	}
	prof := make([]float64, nn)
	copy(prof, cfg.Initial) // checked by defaults
	gather := func(profile []float64) error {
		m, err := recon.NewCorrectedField(cfg.Model, profile, cfg.field)
		if err != nil {
			return err
		}
		// The patches are gathered concurrently: each one's beamforming is
		// parallel, its accumulation (a tenth to a quarter of a pass) is
		// not, and overlaps the others' beamforming. Each patch's sums
		// are its own, so the result does not depend on the order.
		errs := make([]error, len(pds))
		var wg sync.WaitGroup
		for i, pd := range pds {
			wg.Go(func() { errs[i] = pd.gather(a, ch, m, &cfg, lags) })
		}
		wg.Wait()
		for _, err := range errs {
			if err != nil {
				return err
			}
		}
		return nil
	}
	if err := gather(prof); err != nil {
		return nil, err
	}
	res.Before = quality(pds, omega, nn)
	total := cfg.Iterations
	bestCF := res.Before.CoherenceFactor
	anyAccepted := false
	for it := 0; it < cfg.Iterations; it++ {
		// Lag one only in the first round: its differences are small enough
		// not to wrap; later rounds see the residual, small at every lag.
		use := lags
		if it == 0 {
			use = 1
		}
		var step []float64
		if cfg.Method == Beamsum {
			step, _ = solveBeamsum(pds, nn, omega, cfg.MinCoverage)
		} else {
			step, _ = solve(pds, nil, nn, use, omega, cfg.MinCoverage)
		}
		// Candidate steps: the method's own and, for the beamsum method, the
		// many-pairs step of the same round (lag one in the first). Each is
		// tried at full length and the one that raises the coherence factor
		// of the patches most is taken; if none raises it, the method's own
		// step is halved while it lowers it: a step that defocuses is noise,
		// not correction. The two estimates fail in different ways: the
		// beamsum reference is formed with the current profile, so a smooth
		// error that merely moves the focus (the aperture data of a pixel
		// then come from a neighbouring point and look coherent) is nearly
		// invisible to it, and a first step from errors beyond half a period
		// wraps; the pairs compare elements directly, but their differences
		// are noisy where neighbouring elements correlate weakly.
		steps := [][]float64{step}
		if cfg.Method == Beamsum {
			pst, _ := solve(pds, nil, nn, use, omega, cfg.MinCoverage)
			steps = append(steps, pst)
			// From the second round on, the beamsum method's own candidate
			// is the mean of the two steps: both estimate the same residual
			// from the same aperture data against different references (the
			// focused sum, the other sub-apertures), so part of their noise
			// is their own, and near convergence, where the coherence
			// factor can no longer tell the candidates apart, the mean has
			// the lower noise floor (11 plane waves, 20 ns / 6 mm screens
			// with a wire: 9.4-10.5 % of the screen's rms with the beamsum
			// step, 7.2-8.9 % with the mean). The first round keeps the
			// beamsum step: only it is unwrapped along the array, which a
			// large first residual needs.
			if it > 0 {
				avg := make([]float64, nn)
				for j := range avg {
					switch {
					case math.IsNaN(step[j]):
						avg[j] = pst[j]
					case math.IsNaN(pst[j]):
						avg[j] = step[j]
					default:
						avg[j] = (step[j] + pst[j]) / 2
					}
				}
				steps[0] = avg
			}
		}
		// The data do not determine a step's mean and linear trend (a delay
		// common to all elements shifts the image in depth, a slope steers
		// it; the aperture data of the shifted image look the same), so
		// each step is made free of them: otherwise they wander from round
		// to round with the noise. The raw profile keeps those of Initial.
		for _, st := range steps {
			free, _, _ := detrend(st, x, nil)
			copy(st, free)
		}
		old := append([]float64(nil), prof...)
		// the patches' statistics at the old profile, restored if no step
		// is accepted (gather replaces, never modifies, their slices)
		saved := snapshot(pds)
		take := func(st []float64, frac float64) (float64, error) {
			for j := range prof {
				prof[j] = old[j]
				if !math.IsNaN(st[j]) {
					prof[j] += frac * st[j]
				}
			}
			if err := gather(prof); err != nil {
				return 0, err
			}
			return quality(pds, omega, nn).CoherenceFactor, nil
		}
		accepted := false
		var bestProf []float64
		var bestPds []patchData
		for _, st := range steps {
			cf, err := take(st, 1)
			if err != nil {
				return nil, err
			}
			if cf >= bestCF {
				bestCF, accepted = cf, true
				bestProf, bestPds = append([]float64(nil), prof...), snapshot(pds)
			}
		}
		if accepted {
			copy(prof, bestProf)
			restore(pds, bestPds)
		}
		for frac := 0.5; !accepted && frac > 0.1; frac /= 2 {
			cf, err := take(steps[0], frac)
			if err != nil {
				return nil, err
			}
			if cf >= bestCF {
				bestCF, accepted = cf, true
			}
		}
		res.Iterations = it + 1
		if cfg.Progress != nil {
			cfg.Progress(it+1, total)
		}
		anyAccepted = anyAccepted || accepted
		if accepted && unslip(prof, cfg.Initial, x, 2*math.Pi/omega) {
			if err := gather(prof); err != nil {
				return nil, err
			}
			bestCF = quality(pds, omega, nn).CoherenceFactor
			res.Unslipped++
		}
		if !accepted {
			copy(prof, old)
			restore(pds, saved)
			if it == 0 {
				res.Notes = append(res.Notes, "no correction raised the coherence of the patches: the profile stays where it started")
			}
			break
		}
		change := 0.0
		for j := range prof {
			d := prof[j] - old[j]
			change += d * d
		}
		change = math.Sqrt(change / float64(nn))
		if change < cfg.TolS && it > 0 {
			break
		}
	}
	// The curvature step needs the rest of the profile: where every step
	// was refused, the best quadratic through an uncorrected screen makes up
	// for the other errors rather than measuring the screen's own.
	if !cfg.KeepCurvature && anyAccepted && acq.CompoundedWaves(a, cfg.Events) {
		refined, changed, err := refineCurvature(a, ch, &cfg, pds, prof, x, omega)
		if err != nil {
			return nil, err
		}
		if changed {
			copy(prof, refined)
			if err := gather(prof); err != nil {
				return nil, err
			}
			res.CurvatureFromEvents = true
		}
	}
	// per-patch profiles of the remaining residual, on top of the joint one
	for i, pd := range pds {
		var pp []float64
		var seen []bool
		if cfg.Method == Beamsum {
			pp, seen = solveBeamsum([]*patchData{pd}, nn, omega, cfg.MinCoverage)
		} else {
			pp, seen = solve([]*patchData{pd}, nil, nn, lags, omega, cfg.MinCoverage)
		}
		pr := PatchResult{Patch: pd.patch, PatchMM: [4]float64{pd.patch.X0 * 1e3, pd.patch.X1 * 1e3, pd.patch.Z0 * 1e3, pd.patch.Z1 * 1e3}}
		pr.ProfileS = make([]float64, nn)
		for j := range nn {
			if seen[j] {
				pr.ProfileS[j] = prof[j] + pp[j]
				pr.Elements++
			} else {
				pr.ProfileS[j] = math.NaN()
			}
		}
		res.Patches = append(res.Patches, pr)
		_ = i
	}
	res.After = quality(pds, omega, nn)
	res.RawS = append([]float64(nil), prof...)
	res.ProfileS, res.MeanS, res.TrendSPerM = detrend(prof, x, nil)
	res.RMSS = rms(res.ProfileS)
	// disagreement of the patches
	var dis []float64
	for i := range res.Patches {
		pr := &res.Patches[i]
		mask := make([]bool, nn)
		for j, v := range pr.ProfileS {
			mask[j] = !math.IsNaN(v)
		}
		pr.CoherentGain = gain(pds[i])
		if pr.Elements < 4 {
			pr.Rejected = true
			continue
		}
		// A patch whose echoes are hardly more coherent than noise gives a
		// profile of noise: its disagreement says nothing about how the
		// errors vary across the field. (Its weight in the joint estimate is
		// already small: rho^2 / (1 - rho^2).)
		if g := pr.CoherentGain; g < minGain {
			pr.Rejected = true
			res.Notes = append(res.Notes, fmt.Sprintf("patch %s: its echoes are hardly more coherent than noise (coherent gain %.2f, 1 for noise): left out of the disagreement", pr.Patch, g))
			continue
		}
		a1, _, _ := detrend(pr.ProfileS, x, mask)
		b1, _, _ := detrend(prof, x, mask)
		var s float64
		for j := range nn {
			if mask[j] {
				d := a1[j] - b1[j]
				s += d * d
			}
		}
		pr.DisagreementS = math.Sqrt(s / float64(pr.Elements))
		// keep the patch's own profile detrended over what it sees
		for j := range nn {
			if mask[j] {
				pr.ProfileS[j] = a1[j]
			}
		}
		dis = append(dis, pr.DisagreementS)
	}
	if len(dis) > 0 && res.RMSS > 0 {
		ss := 0.0
		for _, d := range dis {
			ss += d * d
		}
		res.Disagreement = math.Sqrt(ss/float64(len(dis))) / res.RMSS
	}
	res.Isoplanatic = res.Disagreement <= 0.5
	if !res.Isoplanatic {
		res.Notes = append(res.Notes, fmt.Sprintf("the patches disagree (%.0f %% of the profile rms): the errors are not the same across the field (not isoplanatic); one profile corrects them only in part", 100*res.Disagreement))
	}
	// The lag-one coherence is no test of noise here: sparse plane-wave
	// compounding leaves grating-lobe echoes that lower it to about 0.1 in
	// clean speckle. The coherent gain of the patches is.
	var cs, ce float64
	for _, pd := range pds {
		cs += pd.cf[0]
		ce += pd.energy
	}
	if ce > 0 && cs/ce < minGain {
		res.Notes = append(res.Notes, fmt.Sprintf("the echoes are hardly more coherent than noise (coherent gain %.2f, 1 for noise): the profile is uncertain", cs/ce))
	}
	return res, nil
}

// minGain is the coherent gain below which a patch counts as noise: twice
// (3 dB above) the gain of incoherent signals, whose mean is 1 and whose
// average over a patch's hundreds of pixels scatters by a few per cent;
// speckle gives about 6 or more even behind sparse plane-wave compounding.
const minGain = 2.0

// gain returns a patch's coherent gain: sum_p |sum_j A_pj|^2 / sum_p sum_j |A_pj|^2.
func gain(pd *patchData) float64 {
	if pd.energy == 0 {
		return 0
	}
	return pd.cf[0] / pd.energy
}

// snapshot copies the patches' statistics (shallow: gather replaces their
// slices, never writes into them).
func snapshot(pds []*patchData) []patchData {
	out := make([]patchData, len(pds))
	for i, pd := range pds {
		out[i] = *pd
	}
	return out
}

// restore puts back a snapshot.
func restore(pds []*patchData, s []patchData) {
	for i := range pds {
		*pds[i] = s[i]
	}
}

// maxPatchPixels bounds one patch's pixels (its aperture data hold one
// complex value per pixel and element).
const maxPatchPixels = 40000

// gatherWork is the default budget of one pass over the patches, in
// pixel-element-event products: about 0.1 to 0.2 s of delay-and-sum on two
// cores, so that an estimate (up to two passes per round) takes a few
// seconds. Compounded plane or diverging waves get compoundedWork times
// more: behind sparse compounding the aperture data carry grating-lobe
// clutter, and the estimate's noise floor, smooth across the array and
// about 2 ns on 11 plane waves at the base budget, falls with denser
// pixels (docs/validation.md).
const (
	gatherWork     = BaseWork
	compoundedWork = 2
)

// BaseWork is the base budget of one pass over the patches (Config.PixelWork).
const BaseWork = 1e7

// defaultPixel returns the default pixel spacing (m): half a wavelength,
// widened to sqrt(area / n) when the n = work / (elements * events) pixels
// the budget allows do not fill the patches' area at that spacing. The
// estimate's precision is set by the number of independent speckle
// samples, one per resolution cell (about a wavelength by the pulse length);
// a sequence of many single-element events, which costs the most per pixel,
// also focuses its aperture data best (higher coherence), so it needs the
// fewest.
func defaultPixel(patches []Patch, lambda float64, nn, nev int, work float64) float64 {
	area := 0.0
	for _, p := range patches {
		area += (p.X1 - p.X0) * (p.Z1 - p.Z0)
	}
	n := work / float64(max(1, nn*nev))
	return math.Max(lambda/2, math.Sqrt(area/n))
}

// gather beamforms the patch with model m and accumulates the lagged
// cross-products of its aperture data.
func (pd *patchData) gather(a *acq.Acquisition, ch *recon.Channels, m recon.DelayModel, cfg *Config, lags int) error {
	if pd.grid == nil {
		// one grid for every pass, which the transmit field cache knows it by
		g, err := recon.Points(pd.xs, pd.zs)
		if err != nil {
			return err
		}
		pd.grid = &g
	}
	bf, err := recon.NewBeamformer(a, pd.grid, m, recon.Config{FNumber: cfg.FNumber, Window: dsp.Window{Kind: dsp.Boxcar},
		Events: cfg.Events, Workers: cfg.Workers})
	if err != nil {
		return err
	}
	ap, err := bf.Aperture(nil, ch, nil)
	if err != nil {
		return err
	}
	mask := bf.ApertureMask()
	nn := a.NumElements()
	L := cfg.MaxLag
	pd.c = make([][]complex128, L+1)
	pd.ea = make([][]float64, L+1)
	pd.eb = make([][]float64, L+1)
	pd.n = make([][]int, L+1)
	for m := 1; m <= L; m++ {
		pd.c[m] = make([]complex128, nn)
		pd.ea[m] = make([]float64, nn)
		pd.eb[m] = make([]float64, nn)
		pd.n[m] = make([]int, nn)
	}
	pd.active = make([]int, nn)
	pd.cf = [2]float64{}
	pd.energy = 0
	pd.r = make([]complex128, nn)
	pd.ra = make([]float64, nn)
	pd.rb = make([]float64, nn)
	pd.q1, pd.qa, pd.qb = nil, nil, nil
	// per pixel: the active elements' values and energies, then the lagged
	// products and the correlation of each element with the sum of the
	// others (itself left out, whose own energy would pull every phase
	// towards zero, the more so the less the elements correlate)
	vr := make([]float64, nn)
	vi := make([]float64, nn)
	en := make([]float64, nn)
	// the lagged products are taken on sub-aperture sums of k adjacent
	// elements (k = 1: the elements themselves)
	k := cfg.subAperture
	fr, fi, fen := vr, vi, en
	if k > 1 {
		fr, fi, fen = make([]float64, nn), make([]float64, nn), make([]float64, nn)
		pd.q1 = make([]complex128, nn)
		pd.qa = make([]float64, nn)
		pd.qb = make([]float64, nn)
	}
	for p := range pd.xs {
		row := ap[p*nn : (p+1)*nn]
		mk := mask[p*nn : (p+1)*nn]
		var sr, si, e float64
		cnt := 0
		for j := range nn {
			if !mk[j] {
				continue
			}
			pd.active[j]++
			vr[j], vi[j] = float64(real(row[j])), float64(imag(row[j]))
			en[j] = vr[j]*vr[j] + vi[j]*vi[j]
			sr += vr[j]
			si += vi[j]
			e += en[j]
			cnt++
		}
		if cnt == 0 {
			continue
		}
		if k > 1 {
			// raw lag-one products for the quality measures
			for j := 0; j+1 < nn; j++ {
				if mk[j] && mk[j+1] {
					pd.q1[j] += complex(vr[j]*vr[j+1]+vi[j]*vi[j+1], vi[j]*vr[j+1]-vr[j]*vi[j+1])
					pd.qa[j] += en[j]
					pd.qb[j] += en[j+1]
				}
			}
			subSums(fr, fi, fen, vr, vi, mk, k)
		}
		// the active elements are usually one run: only then can the mask
		// tests be skipped
		lo, hi := first(mk), last(mk)
		run := hi-lo+1 == cnt
		for m := 1; m <= L; m++ {
			c, ea, eb, n := pd.c[m], pd.ea[m], pd.eb[m], pd.n[m]
			for j := lo; j+m <= hi; j++ {
				l := j + m
				if !run && (!mk[j] || !mk[l]) {
					continue
				}
				c[j] += complex(fr[j]*fr[l]+fi[j]*fi[l], fi[j]*fr[l]-fr[j]*fi[l])
				ea[j] += fen[j]
				eb[j] += fen[l]
				n[j]++
			}
		}
		pd.cf[0] += sr*sr + si*si
		pd.cf[1] += float64(cnt) * e
		pd.energy += e
		for j := range nn {
			if !mk[j] {
				continue
			}
			or, oi := sr-vr[j], si-vi[j]
			pd.r[j] += complex(vr[j]*or+vi[j]*oi, vi[j]*or-vr[j]*oi)
			pd.ra[j] += en[j]
			pd.rb[j] += or*or + oi*oi
		}
	}
	return nil
}

// solve estimates the profile step from the patches' lagged products up to
// lag lags: phi_(j+m) - phi_j = arg(C_jm) / w, weighted by rho^2 / (1 - rho^2)
// times the pixel count (the inverse variance of a phase estimate from
// correlated signals), by least squares with the mean fixed at zero over the
// elements seen. Elements no patch sees well enough are NaN.
func solve(pds []*patchData, _ []float64, nn, lags int, omega, minCov float64) ([]float64, []bool) {
	seen := make([]bool, nn)
	for _, pd := range pds {
		np := len(pd.xs)
		for j := range nn {
			if float64(pd.active[j]) >= minCov*float64(np) {
				seen[j] = true
			}
		}
	}
	idx := make([]int, nn)
	k := 0
	for j := range nn {
		if seen[j] {
			idx[j] = k
			k++
		} else {
			idx[j] = -1
		}
	}
	out := make([]float64, nn)
	for j := range out {
		out[j] = math.NaN()
	}
	if k < 2 {
		return out, seen
	}
	A := mat.NewSymDense(k, nil)
	b := make([]float64, k)
	addEq := func(j, l int, d, w float64) {
		// w (phi_l - phi_j - d)^2
		J, Lx := idx[j], idx[l]
		A.SetSym(J, J, A.At(J, J)+w)
		A.SetSym(Lx, Lx, A.At(Lx, Lx)+w)
		A.SetSym(J, Lx, A.At(J, Lx)-w)
		b[J] -= w * d
		b[Lx] += w * d
	}
	neq := 0
	for _, pd := range pds {
		for m := 1; m <= lags && m < len(pd.c); m++ {
			for j := 0; j+m < nn; j++ {
				if idx[j] < 0 || idx[j+m] < 0 || pd.n[m][j] < 8 {
					continue
				}
				c := pd.c[m][j]
				den := math.Sqrt(pd.ea[m][j] * pd.eb[m][j])
				if den == 0 {
					continue
				}
				rho := math.Min(math.Hypot(real(c), imag(c))/den, 0.999)
				if rho < 0.05 {
					continue
				}
				d := math.Atan2(imag(c), real(c)) / omega
				w := rho * rho / (1 - rho*rho) * float64(pd.n[m][j])
				addEq(j, j+m, d, w)
				neq++
			}
		}
	}
	if neq == 0 {
		return out, seen
	}
	// fix the free constant: add sum(phi) = 0 with a small weight
	tr := 0.0
	for i := range k {
		tr += A.At(i, i)
	}
	reg := 1e-9 * tr / float64(k)
	for i := range k {
		for j := i; j < k; j++ {
			A.SetSym(i, j, A.At(i, j)+reg)
		}
	}
	var x mat.VecDense
	if err := x.SolveVec(A, mat.NewVecDense(k, b)); err != nil {
		return out, seen
	}
	// remove the mean over the elements seen
	mean := 0.0
	for i := range k {
		mean += x.AtVec(i)
	}
	mean /= float64(k)
	for j := range nn {
		if idx[j] >= 0 {
			out[j] = x.AtVec(idx[j]) - mean
		}
	}
	// Elements not seen get 0 step (keep their value): report NaN for them.
	return out, seen
}

// solveBeamsum estimates each element's residual from the phase of its
// correlation with the beamformed sum: arg(sum_p A_pj conj(B_p)) =
// -w (phi_j - mean phi), averaged over patches with weights
// rho^2 / (1 - rho^2) times the pixel count. The beamformed sum is focused,
// so echoes from outside the main lobe of the (possibly sparse) transmit
// focus correlate with it less than they do with a neighbouring element.
func solveBeamsum(pds []*patchData, nn int, omega, minCov float64) ([]float64, []bool) {
	out := make([]float64, nn)
	seen := make([]bool, nn)
	for j := range nn {
		var acc complex128
		var wsum float64
		for _, pd := range pds {
			np := len(pd.xs)
			if float64(pd.active[j]) < minCov*float64(np) || pd.ra[j] == 0 || pd.rb[j] == 0 {
				continue
			}
			c := pd.r[j]
			rho := math.Min(math.Hypot(real(c), imag(c))/math.Sqrt(pd.ra[j]*pd.rb[j]), 0.999)
			w := rho * rho / (1 - rho*rho) * float64(pd.active[j])
			acc += complex(w, 0) * c / complex(math.Hypot(real(c), imag(c))+1e-300, 0)
			wsum += w
		}
		if wsum == 0 {
			out[j] = math.NaN()
			continue
		}
		seen[j] = true
		out[j] = -math.Atan2(imag(acc), real(acc)) / omega
	}
	// phases wrap at half a period: behind a strong screen the first step
	// needs them unwrapped along the array
	unwrapAlong(out, seen, 2*math.Pi/omega)
	mean, n := 0.0, 0
	for j := range nn {
		if seen[j] {
			mean += out[j]
			n++
		}
	}
	if n > 0 {
		mean /= float64(n)
		for j := range nn {
			if seen[j] {
				out[j] -= mean
			}
		}
	}
	return out, seen
}

// quality pools coherence measures over the patches.
func quality(pds []*patchData, omega float64, nn int) Quality {
	var num, den, cfn, cfd, lr, lw float64
	for _, pd := range pds {
		if len(pd.c) < 2 {
			continue
		}
		c1, ea, eb := pd.c[1], pd.ea[1], pd.eb[1]
		if pd.q1 != nil {
			c1, ea, eb = pd.q1, pd.qa, pd.qb
		}
		for j := 0; j+1 < nn; j++ {
			c := c1[j]
			num += real(c)
			den += (ea[j] + eb[j]) / 2
			if pd.n[1][j] > 0 && c != 0 {
				d := math.Atan2(imag(c), real(c)) / omega
				w := float64(pd.n[1][j])
				lr += w * d * d
				lw += w
			}
		}
		cfn += pd.cf[0]
		cfd += pd.cf[1]
	}
	q := Quality{}
	if den > 0 {
		q.LagOneCoherence = num / den
	}
	if cfd > 0 {
		q.CoherenceFactor = cfn / cfd
	}
	if lw > 0 {
		q.ResidualLagRMSS = math.Sqrt(lr / lw)
	}
	return q
}

// centreFrequency estimates the mean frequency of the echoes (Hz) from the
// phase increment of the baseband data between neighbouring samples,
// weighted by power: f = fd + fs arg(sum iq[n+1] conj(iq[n])) / (2 pi).
func centreFrequency(ch *recon.Channels) float64 {
	var acc complex128
	for e := 0; e < ch.NE; e++ {
		for j := 0; j < ch.NN; j++ {
			row := ch.Row(e, j)
			for n := 0; n+1 < len(row); n++ {
				a, b := complex128(row[n+1]), complex128(row[n])
				acc += a * complex(real(b), -imag(b))
			}
		}
	}
	return ch.FD + ch.FS*math.Atan2(imag(acc), real(acc))/(2*math.Pi)
}

// elementCoords returns each element's coordinate along the array (x for
// flat arrays, arc length for convex ones).
func elementCoords(a *acq.Acquisition) []float64 {
	els := a.Probe.Elements()
	x := make([]float64, len(els))
	if a.Probe.Geometry == acq.Convex {
		for i := 1; i < len(els); i++ {
			x[i] = x[i-1] + math.Hypot(els[i].X-els[i-1].X, els[i].Z-els[i-1].Z)
		}
		mid := (x[0] + x[len(x)-1]) / 2
		for i := range x {
			x[i] -= mid
		}
		return x
	}
	for i, e := range els {
		x[i] = e.X
	}
	return x
}

// detrend removes the least-squares mean and linear trend in x over the
// elements in mask (all when nil); NaN values are skipped.
func detrend(p, x []float64, mask []bool) ([]float64, float64, float64) {
	var n, sx, sy, sxx, sxy float64
	for i, v := range p {
		if math.IsNaN(v) || (mask != nil && !mask[i]) {
			continue
		}
		n++
		sx += x[i]
		sy += v
		sxx += x[i] * x[i]
		sxy += x[i] * v
	}
	out := make([]float64, len(p))
	if n < 2 {
		copy(out, p)
		return out, 0, 0
	}
	den := n*sxx - sx*sx
	slope := 0.0
	if den != 0 {
		slope = (n*sxy - sx*sy) / den
	}
	icpt := (sy - slope*sx) / n
	for i, v := range p {
		out[i] = v - icpt - slope*x[i]
	}
	mean := sy / n
	return out, mean, slope
}

func rms(v []float64) float64 {
	var s float64
	n := 0
	for _, x := range v {
		if !math.IsNaN(x) {
			s += x * x
			n++
		}
	}
	if n == 0 {
		return 0
	}
	return math.Sqrt(s / float64(n))
}

// AutoPatches chooses three patches side by side across the array, each a
// third of the array wide, over the depths where echoes stand 10 dB above
// the record's noise floor, from 0.4 times the array length (or, when the
// record is short, where the aperture at F-number fnum holds 16 elements, and
// at least 5 mm).
func AutoPatches(a *acq.Acquisition, ch *recon.Channels, c, fnum float64) ([]Patch, []string, error) {
	p := &a.Probe
	zNear := math.Max(5e-3, 2*fnum*16*p.MeanPitch())
	zNear = math.Max(zNear, c*a.StartTimeS/2+10*c/p.CenterFrequencyHz)
	zFar := 0.9 * c * (a.StartTimeS + a.Duration()) / 2
	var notes []string
	if z := speed.NoiseDepth(ch, c); z < zFar {
		zFar = z
		notes = append(notes, fmt.Sprintf("depths beyond %.1f mm excluded: echoes within 10 dB of the noise floor", z*1e3))
	}
	if zFar-zNear < 2e-3 {
		return nil, notes, fmt.Errorf("aberration: no usable depth range (%.1f to %.1f mm)", zNear*1e3, zFar*1e3)
	}
	// Deeper echoes serve better: the aperture is wider there, and near the
	// array a sparse set of compounded waves focuses least. Start at 0.4 times
	// the array length when the usable range allows.
	if z := 0.4 * p.Aperture(); z < zFar-4e-3 && z > zNear {
		zNear = z
	}
	half := p.Aperture() / 2
	var out []Patch
	for k := range 3 {
		x0 := -half + float64(k)*2*half/3
		out = append(out, Patch{X0: x0, X1: x0 + 2*half/3, Z0: zNear, Z1: zFar})
	}
	return out, notes, nil
}

var _ = sort.Float64s

// unwrapAlong removes the period jumps of wrapped delays along the array:
// where the delay of a seen element differs from that of the previous seen
// one by more than half a period, whole periods are added to it and to all
// that follow. A screen whose peaks exceed half a period still changes by
// a small part of one from element to element (tens of ns over its
// correlation length of several elements, against 200 ns at 5 MHz).
func unwrapAlong(d []float64, seen []bool, period float64) {
	prev := math.NaN()
	shift := 0.0
	for j := range d {
		if !seen[j] {
			continue
		}
		v := d[j] + shift
		if !math.IsNaN(prev) {
			k := math.Round((v - prev) / period)
			shift -= k * period
			v -= k * period
		}
		d[j] = v
		prev = v
	}
}

// subSums sets fr, fi to the sums of vr, vi over the k active elements
// centred on each active element (fewer at the ends of the active run), and
// fen to their energies. Inactive elements get zero.
func subSums(fr, fi, fen, vr, vi []float64, mk []bool, k int) {
	h := k / 2
	nn := len(vr)
	for j := range nn {
		fr[j], fi[j], fen[j] = 0, 0, 0
		if !mk[j] {
			continue
		}
		var sr, si float64
		for i := max(0, j-h); i <= min(nn-1, j+h); i++ {
			if mk[i] {
				sr += vr[i]
				si += vi[i]
			}
		}
		fr[j], fi[j], fen[j] = sr, si, sr*sr+si*si
	}
}

// first returns the index of the first true value of mk (len(mk) if none).
func first(mk []bool) int {
	for j, v := range mk {
		if v {
			return j
		}
	}
	return len(mk)
}

// last returns the index of the last true value of mk (-1 if none).
func last(mk []bool) int {
	for j := len(mk) - 1; j >= 0; j-- {
		if mk[j] {
			return j
		}
	}
	return -1
}

// unslip removes whole-period slips between neighbouring elements from
// the estimated part of a profile (prof minus initial, nil meaning zero)
// and restores the mean and trend of initial; it reports whether it
// changed anything. The estimate measures phases at the centre frequency:
// a linear ramp taken modulo a period (a steering, which the data do not
// determine, with jumps of a period) focuses the centre frequency as well
// as none, and the iteration can settle there behind a strong screen (seen
// on a 60 ns, 2.5 mm screen: a ramp of 170 ns over 90 elements, then a
// jump of -200 ns). A body-wall screen changes by far less than half a
// period from one element to the next (about 17 ns rms for 60 ns at
// 2.5 mm and 0.3 mm pitch), so a jump of more than half a period between
// neighbours is a slip, not the screen.
func unslip(prof, initial, x []float64, period float64) bool {
	d := make([]float64, len(prof))
	for j := range prof {
		d[j] = prof[j]
		if initial != nil {
			d[j] -= initial[j]
		}
	}
	u := append([]float64(nil), d...)
	seen := make([]bool, len(d))
	for j := range seen {
		seen[j] = true
	}
	unwrapAlong(u, seen, period)
	changed := false
	for j := range u {
		if u[j] != d[j] {
			changed = true
			break
		}
	}
	if !changed {
		return false
	}
	u, _, _ = detrend(u, x, nil)
	for j := range prof {
		prof[j] = u[j]
		if initial != nil {
			prof[j] += initial[j]
		}
	}
	return true
}
