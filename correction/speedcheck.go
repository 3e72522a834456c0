package correction

import (
	"fmt"

	"celerity/aberration"
	"celerity/acq"
	"celerity/recon"
	"celerity/speed"
)

// AberratorThresholdS is the rms (s) of a quick profile estimate, with mean,
// trend and curvature removed, above which a near-field aberrator is taken to
// be present. Screen-free data give about 1 ns (validation), chest-wall-like
// screens 20 ns and more.
const AberratorThresholdS = 5e-9

// SpeedCheck is what EstimateSpeed found about aberration.
type SpeedCheck struct {
	// ProfileRMSS is the rms of the quick profile estimate (s), mean, trend
	// and curvature removed.
	ProfileRMSS float64 `json:"aberration_rms_s"`
	// Alternated tells whether the speed was re-estimated with the profile
	// applied (an aberrator was found).
	Alternated bool      `json:"aberration_compensated"`
	Rounds     []Round   `json:"rounds,omitempty"`
	Profile    []float64 `json:"-"`
}

// EstimateSpeed runs the focus sweep, then checks for a near-field
// aberrator with a quick profile estimate at the speed found. A phase screen
// pulls a focus-based estimate by several m/s, and the bootstrap cannot see
// it (it affects every tile alike), so when one is found the speed is
// re-estimated by alternating it with the profile (Run), and a note says so.
func EstimateSpeed(a *acq.Acquisition, ch *recon.Channels, sc speed.SweepConfig) (*speed.Result, *SpeedCheck, error) {
	res, err := speed.Sweep(a, ch, sc)
	if err != nil {
		return nil, nil, err
	}
	check := &SpeedCheck{}
	ar, err := aberration.Estimate(a, ch, aberration.Config{Model: recon.NewHomogeneous(res.SpeedMPS, a.Probe.Elements()), Iterations: 2})
	if err != nil {
		res.Notes = append(res.Notes, "the check for a near-field aberrator could not run: "+err.Error())
		return res, check, nil
	}
	els := a.Probe.Elements()
	check.ProfileRMSS = rmsOf(RemoveQuadratic(ar.ProfileS, elementX(els)))
	if check.ProfileRMSS <= AberratorThresholdS {
		return res, check, nil
	}
	oc, err := Run(a, ch, Config{Sweep: sc, Homogeneous: true, Rounds: 3})
	if err != nil {
		return nil, nil, err
	}
	check.Alternated = true
	check.Rounds = oc.Rounds
	check.Profile = oc.ProfileS
	out := oc.Speed
	out.Notes = append(out.Notes, fmt.Sprintf("a near-field aberrator of about %.0f ns rms was found; the speed was re-estimated with its arrival-time profile applied (%d rounds of speed and profile; the sweep alone gave %.1f m/s)",
		check.ProfileRMSS*1e9, len(oc.Rounds), res.SpeedMPS))
	if !oc.Converged {
		out.Confidence = speed.Low
		out.Notes = append(out.Notes, "the speed and the profile had not settled after 3 rounds")
	}
	return out, check, nil
}
