package bench

import (
	"context"
	"fmt"
	"math"
	"regexp"
	"sync"

	"celerity/aberration"
	"celerity/acq"
	"celerity/correction"
	"celerity/recon"
	"celerity/speed"
)

// Estimate is what an estimator says about one acquisition. A speed of NaN
// and a nil profile were not given.
type Estimate struct {
	SpeedMPS float64
	// CI95MPS is the 95 % interval of the speed; NaN when not given.
	CI95MPS    [2]float64
	Confidence string
	// ProfileS is the per-element arrival-time error, s, positive when the
	// echo arrives late (the sign of the truth's screen).
	ProfileS []float64
	// WorkingSpeedMPS is the speed a profile applies at when the estimator
	// gives no speed of its own (the built-in aberration estimators run at
	// the coherence-factor sweep's estimate); 0 means the scanner's assumed
	// speed.
	WorkingSpeedMPS float64
}

// noEstimate is an Estimate with nothing given.
func noEstimate() *Estimate {
	return &Estimate{SpeedMPS: math.NaN(), CI95MPS: [2]float64{math.NaN(), math.NaN()}}
}

// Input is what an estimator sees of a case: the acquisition folder and the
// acquisition read from it, never the truth.
type Input struct {
	Dir      string
	Acq      *acq.Acquisition
	Channels *recon.Channels

	cfOnce sync.Once
	cf     *speed.Result
	cfErr  error
}

// coherenceSweep runs the default sweep (coherence factor) once per case;
// the speed estimator of that name and the aberration estimators share it.
func (in *Input) coherenceSweep() (*speed.Result, error) {
	in.cfOnce.Do(func() {
		in.cf, in.cfErr = speed.Sweep(in.Acq, in.Channels, sweepConfig(speed.CoherenceFactor))
	})
	return in.cf, in.cfErr
}

// sweepConfig is the configuration of the built-in sweeps: the defaults of
// speed.Sweep (1400 to 1650 m/s, automatic region) with bootstrap seed 1.
func sweepConfig(c speed.Criterion) speed.SweepConfig {
	return speed.SweepConfig{Criterion: c, Seed: 1}
}

// Estimator estimates the speed of sound and/or the arrival-time error
// profile of an acquisition.
type Estimator interface {
	Name() string
	// NeedsTargets reports that the estimator only applies to cases whose
	// phantom holds point targets.
	NeedsTargets() bool
	Estimate(ctx context.Context, in *Input) (*Estimate, error)
}

// preparer is implemented by estimators that build on shared work (the
// coherence-factor sweep), done before their runtime is measured.
type preparer interface {
	prepare(in *Input) error
}

// Built-in estimator names, in canonical order.
const (
	SpeedCoherenceFactor   = "speed-coherence-factor"
	SpeedShortLagCoherence = "speed-short-lag-coherence"
	SpeedBrightness        = "speed-brightness"
	SpeedTargets           = "speed-targets"
	SpeedAberrationAware   = "speed-aberration-aware"
	AberrationBeamsum      = "aberration-beamsum"
	AberrationPairs        = "aberration-pairs"
	AberrationNeighbour    = "aberration-neighbour"
)

// BuiltinNames lists the built-in estimators in canonical order.
func BuiltinNames() []string {
	return []string{SpeedCoherenceFactor, SpeedShortLagCoherence, SpeedBrightness, SpeedTargets, SpeedAberrationAware,
		AberrationBeamsum, AberrationPairs, AberrationNeighbour}
}

func isBuiltin(name string) bool {
	for _, n := range BuiltinNames() {
		if n == name {
			return true
		}
	}
	return false
}

// Builtin returns the built-in estimator of that name.
func Builtin(name string) (Estimator, error) {
	switch name {
	case SpeedCoherenceFactor:
		return sweepEstimator{name, speed.CoherenceFactor}, nil
	case SpeedShortLagCoherence:
		return sweepEstimator{name, speed.ShortLagCoherence}, nil
	case SpeedBrightness:
		return sweepEstimator{name, speed.Brightness}, nil
	case SpeedTargets:
		return targetsEstimator{}, nil
	case SpeedAberrationAware:
		return awareEstimator{}, nil
	case AberrationBeamsum:
		return aberrationEstimator{name, aberration.Beamsum}, nil
	case AberrationPairs:
		return aberrationEstimator{name, aberration.Pairs}, nil
	case AberrationNeighbour:
		return aberrationEstimator{name, aberration.Neighbour}, nil
	}
	return nil, fmt.Errorf("unknown built-in estimator %q", name)
}

// sweepEstimator is speed.Sweep with one focus criterion.
type sweepEstimator struct {
	name string
	crit speed.Criterion
}

func (e sweepEstimator) Name() string       { return e.name }
func (e sweepEstimator) NeedsTargets() bool { return false }

func (e sweepEstimator) Estimate(_ context.Context, in *Input) (*Estimate, error) {
	var r *speed.Result
	var err error
	if e.crit == speed.CoherenceFactor {
		r, err = in.coherenceSweep()
	} else {
		r, err = speed.Sweep(in.Acq, in.Channels, sweepConfig(e.crit))
	}
	if err != nil {
		return nil, err
	}
	return fromSpeed(r), nil
}

func fromSpeed(r *speed.Result) *Estimate {
	est := noEstimate()
	est.SpeedMPS, est.CI95MPS, est.Confidence = r.SpeedMPS, r.CI95MPS, r.Confidence
	return est
}

// awareEstimator is the speed command's default sweep: the sweep with the
// default criterion for the sequence (transmit coherence on three or more
// plane or diverging waves, else the coherence factor), a check for a
// near-field aberrator and, when one is found, the speed re-estimated with
// its profile (correction.EstimateSpeed).
type awareEstimator struct{}

func (awareEstimator) Name() string       { return SpeedAberrationAware }
func (awareEstimator) NeedsTargets() bool { return false }

func (awareEstimator) Estimate(_ context.Context, in *Input) (*Estimate, error) {
	r, _, err := correction.EstimateSpeed(in.Acq, in.Channels, sweepConfig(0))
	if err != nil {
		return nil, err
	}
	return fromSpeed(r), nil
}

// targetsEstimator is the point-target arrival-time fit with its defaults.
type targetsEstimator struct{}

func (targetsEstimator) Name() string       { return SpeedTargets }
func (targetsEstimator) NeedsTargets() bool { return true }

func (targetsEstimator) Estimate(_ context.Context, in *Input) (*Estimate, error) {
	r, err := speed.Targets(in.Acq, in.Channels, speed.TargetConfig{})
	if err != nil {
		return nil, err
	}
	return fromSpeed(&r.Result), nil
}

// aberrationEstimator is aberration.Estimate with one method, at the speed
// the coherence-factor sweep estimates for the same case.
type aberrationEstimator struct {
	name   string
	method aberration.Method
}

func (e aberrationEstimator) Name() string       { return e.name }
func (e aberrationEstimator) NeedsTargets() bool { return false }

func (e aberrationEstimator) prepare(in *Input) error {
	_, err := in.coherenceSweep()
	return err
}

func (e aberrationEstimator) Estimate(_ context.Context, in *Input) (*Estimate, error) {
	cf, err := in.coherenceSweep()
	if err != nil {
		return nil, fmt.Errorf("the coherence-factor sweep it works at failed: %w", err)
	}
	r, err := aberration.Estimate(in.Acq, in.Channels, aberration.Config{
		Model:  recon.NewHomogeneous(cf.SpeedMPS, in.Acq.Probe.Elements()),
		Method: e.method,
	})
	if err != nil {
		return nil, err
	}
	est := noEstimate()
	est.ProfileS = r.ProfileS
	est.WorkingSpeedMPS = cf.SpeedMPS
	return est, nil
}

// estimatorNameRE is the form of estimator names (they head CSV rows and
// file names).
var estimatorNameRE = regexp.MustCompile(`^[a-z0-9][a-z0-9._-]{0,39}$`)

// ValidName checks an external estimator's name.
func ValidName(name string) error {
	if !estimatorNameRE.MatchString(name) {
		return fmt.Errorf("estimator name %q: want lower-case letters, digits, '.', '_' or '-' (up to 40), starting with a letter or digit", name)
	}
	if isBuiltin(name) {
		return fmt.Errorf("estimator name %q is taken by a built-in estimator", name)
	}
	return nil
}
