package correction

import (
	"errors"
	"fmt"
	"math"

	"celerity/aberration"
	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/metrics"
	"celerity/recon"
	"celerity/speed"
)

// Config tunes Run.
type Config struct {
	Sweep      speed.SweepConfig
	Aberration aberration.Config // its Model is set by Run
	// Rounds caps the speed / profile alternation; default 4.
	Rounds int
	// SpeedTolMPS and ProfileTolS stop the alternation when a round changes
	// the speed and the profile (rms) by less than these; defaults 0.5 m/s
	// and 1 ns.
	SpeedTolMPS float64
	ProfileTolS float64
	// NoAberration skips the profile: speed only.
	NoAberration bool
	// Homogeneous keeps a single bulk speed. By default, once the
	// alternation settles, the speed is also resolved by depth (speed.ByDepth)
	// and, when it finds distinct layers with high confidence, the bulk model
	// becomes those layers and the profile is refined on top of them.
	Homogeneous bool
	// KeepCurvature keeps the quadratic part of the profile. By default it is
	// removed before the profile is applied: across one aperture a quadratic
	// delay is indistinguishable from a change of the speed of sound (a
	// defocus), and leaving it in the profile lets the alternation trade one
	// for the other; removed, the curvature belongs to the speed estimate.
	KeepCurvature bool
	// Progress, if not nil, reports the stage and its progress.
	Progress func(stage string, done, total int)
}

// Round is one pass of the alternation.
type Round struct {
	SpeedMPS       float64    `json:"speed_mps"`
	CI95MPS        [2]float64 `json:"ci95_mps"`
	Confidence     string     `json:"confidence"`
	ProfileRMSS    float64    `json:"profile_rms_s"`
	ProfileChangeS float64    `json:"profile_change_s"`
}

// Outcome is the result of Run.
type Outcome struct {
	Speed      *speed.Result
	Aberration *aberration.Result // nil with NoAberration
	// Model is the corrected delay model: homogeneous at the estimated speed
	// plus the profile.
	Model  recon.DelayModel
	Rounds []Round
	// Converged tells whether the alternation settled within Rounds.
	Converged bool
	// Depth is the depth-resolved estimate (nil when not run), and Layers the
	// layers used in Model when they replaced the homogeneous speed.
	Depth  *speed.DepthResult
	Layers []acq.Layer
	// ProfileS is the profile applied in Model (the aberration estimate
	// without its quadratic part unless KeepCurvature).
	ProfileS []float64
}

// RemoveQuadratic returns p minus its least-squares fit by a + b x + c x^2.
func RemoveQuadratic(p, x []float64) []float64 {
	var s [5]float64
	var t [3]float64
	for i, v := range p {
		q := 1.0
		for k := 0; k < 5; k++ {
			s[k] += q
			if k < 3 {
				t[k] += q * v
			}
			q *= x[i]
		}
	}
	m := [3][3]float64{{s[0], s[1], s[2]}, {s[1], s[2], s[3]}, {s[2], s[3], s[4]}}
	c, ok := dsp.Solve3(m, t)
	out := make([]float64, len(p))
	for i, v := range p {
		if ok {
			out[i] = v - c[0] - c[1]*x[i] - c[2]*x[i]*x[i]
		} else {
			out[i] = v
		}
	}
	return out
}

func elementX(els []acq.Element) []float64 {
	x := make([]float64, len(els))
	for i, e := range els {
		x[i] = e.X
	}
	return x
}

// Run estimates speed and profile by alternation: the speed is swept with
// the current profile applied, then the profile is estimated at the new
// speed, until both settle.
func Run(a *acq.Acquisition, ch *recon.Channels, cfg Config) (*Outcome, error) {
	if cfg.Rounds == 0 {
		cfg.Rounds = 4
	}
	if cfg.Rounds < 1 || cfg.Rounds > 20 {
		return nil, errors.New("correction: rounds must be between 1 and 20")
	}
	if cfg.SpeedTolMPS == 0 {
		cfg.SpeedTolMPS = 0.5
	}
	if cfg.ProfileTolS == 0 {
		cfg.ProfileTolS = 1e-9
	}
	els := a.Probe.Elements()
	n := len(els)
	prof := make([]float64, n)
	out := &Outcome{}
	prevSpeed := math.NaN()
	stage := func(name string) func(int, int) {
		if cfg.Progress == nil {
			return nil
		}
		return func(d, t int) { cfg.Progress(name, d, t) }
	}
	for r := 0; r < cfg.Rounds; r++ {
		sc := cfg.Sweep
		cur := append([]float64(nil), prof...)
		applied := r > 0 && !cfg.NoAberration
		if applied {
			sc.Model = func(c float64) (recon.DelayModel, error) {
				return recon.NewCorrected(recon.NewHomogeneous(c, els), cur)
			}
		}
		sc.Progress = stage(fmt.Sprintf("round %d: speed", r+1))
		if r > 0 && out.Speed != nil && out.Speed.Confidence == speed.High {
			// later rounds refine around a confident previous estimate; after a
			// low-confidence one (a screen can push the first sweep to the
			// edge of the range) they search the whole range again
			sc.MinMPS = math.Max(sc.MinMPS, prevSpeed-30)
			sc.MaxMPS = prevSpeed + 30
			if cfg.Sweep.MaxMPS != 0 {
				sc.MaxMPS = math.Min(sc.MaxMPS, cfg.Sweep.MaxMPS)
			}
			if sc.MinMPS == 0 {
				sc.MinMPS = prevSpeed - 30
			}
			sc.CoarseStepMPS = 5
		}

		sr, err := speed.Sweep(a, ch, sc)
		if err != nil {
			return nil, fmt.Errorf("round %d: speed: %w", r+1, err)
		}
		out.Speed = sr
		round := Round{SpeedMPS: sr.SpeedMPS, CI95MPS: sr.CI95MPS, Confidence: sr.Confidence}
		if cfg.NoAberration {
			out.Rounds = append(out.Rounds, round)
			out.Converged = true
			break
		}
		ac := cfg.Aberration
		at := sr.SpeedMPS
		if r == 0 && sr.Confidence != speed.High {
			// A first sweep without confidence (a strong screen can push it
			// to the edge of the range) is a poor speed to estimate a profile
			// at: a large speed error leaks into the profile beyond the
			// curvature that is removed. Start from the scanner's speed.
			at = a.AssumedSpeedMPS
		}
		ac.Model = recon.NewHomogeneous(at, els)
		if ac.PixelWork == 0 && ac.PixelM == 0 {
			// the base pixel budget: the workflow runs several estimates
			// and removes the profile's quadratic part anyway
			ac.PixelWork = aberration.BaseWork
		}
		if r > 0 {
			// refine from the previous profile
			ac.Initial = append([]float64(nil), prof...)
			if ac.Iterations == 0 {
				ac.Iterations = 3
			}
		}
		ac.Progress = stage(fmt.Sprintf("round %d: aberration", r+1))
		ar, err := aberration.Estimate(a, ch, ac)
		if err != nil {
			return nil, fmt.Errorf("round %d: aberration: %w", r+1, err)
		}
		out.Aberration = ar
		change := 0.0
		for j := range prof {
			d := ar.ProfileS[j] - prof[j]
			change += d * d
		}
		change = math.Sqrt(change / float64(n))
		next := ar.ProfileS
		if !cfg.KeepCurvature {
			next = RemoveQuadratic(next, elementX(els))
		}
		change = 0.0
		for j := range prof {
			d := next[j] - prof[j]
			change += d * d
		}
		change = math.Sqrt(change / float64(n))
		copy(prof, next)
		round.ProfileRMSS, round.ProfileChangeS = metrics.RMS(prof), change
		out.Rounds = append(out.Rounds, round)
		if r > 0 && math.Abs(sr.SpeedMPS-prevSpeed) < cfg.SpeedTolMPS && change < cfg.ProfileTolS {
			prevSpeed = sr.SpeedMPS
			out.Converged = true
			break
		}
		prevSpeed = sr.SpeedMPS
	}
	if out.Aberration != nil {
		out.ProfileS = append([]float64(nil), prof...)
	}
	var base recon.DelayModel = recon.NewHomogeneous(out.Speed.SpeedMPS, els)
	if !cfg.Homogeneous {
		layered, err := refineLayers(a, ch, &cfg, out, prof)
		if err != nil {
			return nil, err
		}
		if layered != nil {
			base = layered
		}
	}
	if cfg.NoAberration {
		out.Model = base
		return out, nil
	}
	if out.Layers != nil {
		out.ProfileS = append([]float64(nil), prof...)
	}
	m, err := recon.NewCorrectedField(base, prof, recon.FieldOf(&a.Probe))
	if err != nil {
		return nil, err
	}
	out.Model = m
	return out, nil
}

// refineLayers resolves the speed by depth with the current profile applied;
// when the merged layers are distinct and confident, it returns the layered
// model and refines the profile (in place) on top of it.
func refineLayers(a *acq.Acquisition, ch *recon.Channels, cfg *Config, out *Outcome, prof []float64) (recon.DelayModel, error) {
	els := a.Probe.Elements()
	sc := cfg.Sweep
	cur := append([]float64(nil), prof...)
	if !cfg.NoAberration {
		sc.Model = func(c float64) (recon.DelayModel, error) {
			return recon.NewCorrected(recon.NewHomogeneous(c, els), cur)
		}
	}
	if cfg.Progress != nil {
		sc.Progress = func(d, t int) { cfg.Progress("speed by depth", d, t) }
	}
	dr, err := speed.ByDepth(a, ch, speed.DepthConfig{SweepConfig: sc})
	if err != nil {
		// depth resolution is a refinement: keep the homogeneous model
		return nil, nil
	}
	out.Depth = dr
	if dr.Confidence != speed.High || len(dr.Layers) < 2 {
		return nil, nil
	}
	var layers []acq.Layer
	for i, l := range dr.Layers {
		al := acq.Layer{SpeedMPS: l.SpeedMPS}
		if i < len(dr.Layers)-1 {
			al.ThicknessM = l.BottomM - l.TopM
		}
		layers = append(layers, al)
	}
	lm, err := recon.NewLayered(layers, els)
	if err != nil {
		return nil, nil
	}
	out.Layers = layers
	if cfg.NoAberration {
		return lm, nil
	}
	ac := cfg.Aberration
	ac.Model = lm
	if ac.PixelWork == 0 && ac.PixelM == 0 {
		ac.PixelWork = aberration.BaseWork
	}
	ac.Initial = append([]float64(nil), prof...)
	if ac.Iterations == 0 {
		ac.Iterations = 3
	}
	if cfg.Progress != nil {
		ac.Progress = func(d, t int) { cfg.Progress("profile on layers", d, t) }
	}
	ar, err := aberration.Estimate(a, ch, ac)
	if err != nil {
		return nil, err
	}
	out.Aberration = ar
	next := ar.ProfileS
	if !cfg.KeepCurvature {
		next = RemoveQuadratic(next, elementX(els))
	}
	copy(prof, next)
	return lm, nil
}
