package correction

import (
	"fmt"
	"math"

	"celerity/aberration"
	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/internal/jsonx"
	"celerity/metrics"
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
	Alternated bool    `json:"aberration_compensated"`
	Rounds     []Round `json:"rounds,omitempty"`
	// CurvatureStdMPS is the standard uncertainty (m/s) added for the
	// screen's curvature (0 when no aberrator was found).
	CurvatureStdMPS float64   `json:"curvature_std_mps"`
	Profile         []float64 `json:"-"`
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
	check.ProfileRMSS = metrics.RMS(RemoveQuadratic(ar.ProfileS, elementX(els)))
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
	// Across one aperture a screen's own curvature cannot be told from a
	// change of speed: a quadratic delay q x^2 mimics the receive-focusing
	// error -x^2 dc / (2 z c^2) of a speed error dc at depth z. For a screen
	// with the rms and correlation length of the profile found, the spread of
	// its quadratic coefficient q follows from its covariance, and
	// dc = 2 z c^2 q carries into the interval as a systematic component.
	zMid := (out.Region.Z0 + out.Region.Z1) / 2
	if sd := curvatureSpeedStd(oc.ProfileS, elementX(els), zMid, out.SpeedMPS); sd > 0 {
		check.CurvatureStdMPS = sd
		half := 1.96 * sd
		lo, hi := out.SpeedMPS-out.CI95MPS[0], out.CI95MPS[1]-out.SpeedMPS
		out.CI95MPS = [2]float64{out.SpeedMPS - math.Hypot(lo, half), out.SpeedMPS + math.Hypot(hi, half)}
		out.CI95 = jsonx.Floats(out.CI95MPS[:])
		out.Notes = append(out.Notes, fmt.Sprintf("the interval includes %.1f m/s (standard) for the screen's own curvature, which a sweep cannot tell from a speed change", sd))
		if hw := (out.CI95MPS[1] - out.CI95MPS[0]) / 2; hw > speed.MaxConfidentHalfWidth {
			out.Confidence = speed.Low
		}
	}
	out.Notes = append(out.Notes, fmt.Sprintf("a near-field aberrator of about %.0f ns rms was found; the speed was re-estimated with its arrival-time profile applied (%d rounds of speed and profile; the sweep alone gave %.1f m/s)",
		check.ProfileRMSS*1e9, len(oc.Rounds), res.SpeedMPS))
	if !oc.Converged {
		out.Confidence = speed.Low
		out.Notes = append(out.Notes, "the speed and the profile had not settled after 3 rounds")
	}
	return out, check, nil
}

// curvatureSpeedStd returns the standard deviation of 2 z c^2 q, where q is
// the least-squares quadratic coefficient (over element positions x) of a
// random screen with the rms and autocorrelation width of profile p: a
// zero-mean Gaussian process with covariance s2 exp(-d^2 / (2 l^2)).
func curvatureSpeedStd(p, x []float64, z, c float64) float64 {
	n := len(p)
	if n < 8 {
		return 0
	}
	s2 := 0.0
	for _, v := range p {
		s2 += v * v
	}
	s2 /= float64(n)
	if s2 == 0 {
		return 0
	}
	// correlation length: the lag where the normalised autocorrelation of
	// the profile falls to 1/2 (its FWHM is twice that), interpolated
	pitch := math.Abs(x[n-1]-x[0]) / float64(n-1)
	half := 0.0
	prev := 1.0
	for m := 1; m < n/2; m++ {
		r := 0.0
		for j := 0; j+m < n; j++ {
			r += p[j] * p[j+m]
		}
		r /= float64(n-m) * s2
		if r < 0.5 {
			half = (float64(m-1) + (prev-0.5)/(prev-r)) * pitch
			break
		}
		prev = r
	}
	if half == 0 {
		half = float64(n/2) * pitch
	}
	// Gaussian autocorrelation exp(-d^2/(2 l^2)) = 1/2 at d = l sqrt(2 ln 2)
	l := half / math.Sqrt(2*math.Ln2)
	// LS projector onto the quadratic coefficient: row 3 of (A^T A)^-1 A^T
	var s [5]float64
	for _, xi := range x {
		q := 1.0
		for k := 0; k < 5; k++ {
			s[k] += q
			q *= xi
		}
	}
	m := [3][3]float64{{s[0], s[1], s[2]}, {s[1], s[2], s[3]}, {s[2], s[3], s[4]}}
	w := make([]float64, n)
	for i, xi := range x {
		// solve m * a = e_i-column of A^T, take the quadratic coefficient
		a, ok := dsp.Solve3(m, [3]float64{1, xi, xi * xi})
		if !ok {
			return 0
		}
		w[i] = a[2]
	}
	varq := 0.0
	for i := range n {
		for j := range n {
			d := x[i] - x[j]
			varq += w[i] * w[j] * s2 * math.Exp(-d*d/(2*l*l))
		}
	}
	if varq <= 0 {
		return 0
	}
	return 2 * z * c * c * math.Sqrt(varq)
}
