package correction

import (
	"fmt"
	"math"
	"strings"

	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/metrics"
	"celerity/recon"
)

// Shot is one image of an evaluation.
type Shot struct {
	Name  string // before, after, ideal
	Title string
	Model recon.DelayModel
	// SpeedMPS is the speed the image's depths correspond to; truth
	// positions (given in the true medium) appear at z * SpeedMPS / c_true.
	SpeedMPS float64
	Image    []complex64
	Metrics  ImageMetrics
}

// Evaluation compares the images before and after correction, and with the
// ideal image when the truth is known.
type Evaluation struct {
	Grid  *recon.Grid
	Shots []*Shot
	// RefSpeedMPS is the speed in which target and region positions are given.
	RefSpeedMPS float64
	Targets     [][2]float64
	Pairs       []metrics.RegionPair
	Before      map[string]float64
	After       map[string]float64
	Ideal       map[string]float64
	// Recovered is the fraction of each loss the correction recovered:
	// (before - after) / (before - ideal) for the lateral width and
	// (after - before) / (ideal - before) for gCNR.
	Recovered map[string]float64
	// Truth holds estimate-versus-truth errors.
	Truth map[string]float64
}

// EvalConfig tunes Evaluate.
type EvalConfig struct {
	Grid   *recon.Grid  // nil: a rectangle over the field of view
	Recon  recon.Config // zero: F-number 1.5, Hann window
	Pairs  []metrics.RegionPair
	Search float64 // target search half-size, m; default 1.5 mm
}

// Evaluate forms the images before (the scanner's assumed speed, no
// profile), after (the outcome's model) and, with truth, ideal (the true
// medium and screen), and measures them: point targets and region pairs
// from the truth (inclusions give a cyst and its background) or from cfg.
func Evaluate(a *acq.Acquisition, ch *recon.Channels, oc *Outcome, truth *acq.Truth, cfg EvalConfig) (*Evaluation, error) {
	els := a.Probe.Elements()
	cEst := oc.Speed.SpeedMPS
	ev := &Evaluation{Pairs: cfg.Pairs}
	ev.Shots = []*Shot{
		{Name: "before", Title: fmt.Sprintf("before (%.0f m/s)", a.AssumedSpeedMPS), Model: recon.NewHomogeneous(a.AssumedSpeedMPS, els), SpeedMPS: a.AssumedSpeedMPS},
		{Name: "after", Title: fmt.Sprintf("after (%.0f m/s + profile)", cEst), Model: oc.Model, SpeedMPS: cEst},
	}
	if oc.Aberration == nil {
		ev.Shots[1].Title = fmt.Sprintf("after (%.0f m/s)", cEst)
	}
	trueC := 0.0
	if truth != nil {
		var ideal recon.DelayModel
		if len(truth.Layers) > 0 {
			l, err := recon.NewLayered(truth.Layers, els)
			if err != nil {
				return nil, err
			}
			ideal = l
			trueC = truth.MeanSpeed(0.03)
		} else {
			ideal = recon.NewHomogeneous(truth.SpeedMPS, els)
			trueC = truth.SpeedMPS
		}
		if truth.Screen != nil && len(truth.Screen.DelaysS) == len(els) {
			var err error
			if ideal, err = recon.NewCorrectedField(ideal, truth.Screen.DelaysS, recon.FieldOf(&a.Probe)); err != nil {
				return nil, err
			}
		}
		ev.Shots = append(ev.Shots, &Shot{Name: "ideal", Title: "ideal (truth)", Model: ideal, SpeedMPS: trueC})
		ev.Targets = truth.TargetsM
		if ev.Pairs == nil && len(truth.Inclusions) > 0 {
			var cs [][2]float64
			var rs []float64
			for _, in := range truth.Inclusions {
				cs = append(cs, in.CenterM)
				rs = append(rs, in.RadiusM)
			}
			ev.Pairs = metrics.PairsFromInclusions(cs, rs)
		}
	}
	ev.RefSpeedMPS = trueC
	if ev.RefSpeedMPS == 0 {
		ev.RefSpeedMPS = cEst
	}
	if cfg.Grid != nil {
		ev.Grid = cfg.Grid
	} else {
		g, err := defaultRect(a, cEst)
		if err != nil {
			return nil, err
		}
		ev.Grid = &g
	}
	rc := cfg.Recon
	if rc.FNumber == 0 && rc.Window.Kind == 0 {
		rc.FNumber = 1.5
		rc.Window = dsp.Window{Kind: dsp.Hann}
	}
	search := cfg.Search
	if search == 0 {
		search = 1.5e-3
	}
	for _, s := range ev.Shots {
		bf, err := recon.NewBeamformer(a, ev.Grid, s.Model, rc)
		if err != nil {
			return nil, err
		}
		if s.Image, err = bf.Form(nil, ch); err != nil {
			return nil, err
		}
		scale := s.SpeedMPS / ev.RefSpeedMPS
		var tg [][2]float64
		for _, t := range ev.Targets {
			tg = append(tg, [2]float64{t[0], t[1] * scale})
		}
		var ps []metrics.RegionPair
		for _, p := range ev.Pairs {
			ps = append(ps, ScalePair(p, scale))
		}
		if ev.Grid.Kind == recon.Rect && ev.Grid.Rows > 1 {
			if s.Metrics, err = Measure(ev.Grid, s.Image, tg, search, ps); err != nil {
				return nil, err
			}
		}
	}
	ev.Before = ev.Shots[0].Metrics.Summary()
	ev.After = ev.Shots[1].Metrics.Summary()
	if len(ev.Shots) > 2 {
		ev.Ideal = ev.Shots[2].Metrics.Summary()
		ev.Recovered = map[string]float64{}
		if b, ok := ev.Before["lateral_width_mm"]; ok {
			if i := ev.Ideal["lateral_width_mm"]; b-i > 0 {
				ev.Recovered["lateral_width"] = (b - ev.After["lateral_width_mm"]) / (b - i)
			}
		}
		for k, i := range ev.Ideal {
			if strings.HasSuffix(k, "_gcnr") {
				if b := ev.Before[k]; i-b > 0 {
					ev.Recovered[k] = (ev.After[k] - b) / (i - b)
				}
			}
		}
		ev.Truth = map[string]float64{"speed_mps": trueC, "speed_error_mps": cEst - trueC}
		if truth.Screen != nil && oc.ProfileS != nil {
			x := make([]float64, len(els))
			for i, e := range els {
				x[i] = e.X
			}
			e, r := metrics.ProfileError(oc.ProfileS, truth.Screen.DelaysS, x)
			td, _, _ := metrics.Detrend(truth.Screen.DelaysS, x)
			ev.Truth["profile_rms_s"] = metrics.RMS(td)
			ev.Truth["profile_error_rms_s"] = e
			ev.Truth["profile_correlation"] = r
		}
	}
	return ev, nil
}

// defaultRect is a rectangle under the array down to the end of the record,
// a third of a wavelength wide and a quarter deep per pixel.
func defaultRect(a *acq.Acquisition, c float64) (recon.Grid, error) {
	p := &a.Probe
	lam := c / p.CenterFrequencyHz
	zmax := c * (a.StartTimeS + a.Duration()) / 2
	zmin := math.Max(c*a.StartTimeS/2, 1e-3)
	half := p.Aperture() / 2
	return recon.NewRect(-half, half, lam/3, zmin, zmax*0.95, lam/4)
}

// ScalePair moves a region pair's depths by scale (circles and annuli by
// their centres, rectangles by their edges).
func ScalePair(p metrics.RegionPair, scale float64) metrics.RegionPair {
	return metrics.RegionPair{Name: p.Name, Inside: scaleRegion(p.Inside, scale), Outside: scaleRegion(p.Outside, scale)}
}

func scaleRegion(r metrics.Region, s float64) metrics.Region {
	switch v := r.(type) {
	case metrics.Circle:
		v.CZ *= s
		return v
	case metrics.Annulus:
		v.CZ *= s
		return v
	case metrics.Rect:
		v.Z0 *= s
		v.Z1 *= s
		return v
	case metrics.Difference:
		out := metrics.Difference{Base: scaleRegion(v.Base, s)}
		for _, h := range v.Holes {
			out.Holes = append(out.Holes, scaleRegion(h, s))
		}
		return out
	}
	return r
}
