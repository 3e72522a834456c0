package aberration

import (
	"errors"
	"fmt"
	"math"
	"sort"

	"gonum.org/v1/gonum/mat"

	"celerity/acq"
	"celerity/internal/dsp"
	"celerity/internal/jsonx"
	"celerity/recon"
)

// Method selects the estimator.
type Method int

// Estimators.
const (
	Neighbour Method = iota + 1 // nearest-neighbour differences, integrated
	Pairs                       // weighted least squares over many pairs
	Beamsum                     // each element against the beamformed sum
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

// ParseMethod parses "neighbour" or "pairs".
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
	// PixelM is the pixel spacing in the patches; default half a wavelength.
	PixelM float64
	// MinCoverage is the fraction of a patch's pixels for which an element
	// must be active to be estimated from that patch; default 0.2.
	MinCoverage float64
	// Events restricts the events used; nil means all.
	Events  []int
	Workers int
	// Progress, if not nil, is called after each iteration.
	Progress func(done, total int)
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
	Rejected      bool    `json:"rejected"`
}

// Result is an aberration estimate.
type Result struct {
	// ProfileS is the focusing-error profile (s per element): mean and
	// linear trend removed.
	ProfileS []float64 `json:"profile_s"`
	RMSS     float64   `json:"rms_s"`
	// MeanS and TrendSPerM were removed from the raw estimate: a common
	// delay and a steering (s per m along the array).
	MeanS      float64       `json:"mean_s"`
	TrendSPerM float64       `json:"trend_s_per_m"`
	Method     string        `json:"method"`
	Iterations int           `json:"iterations"`
	CentreHz   float64       `json:"centre_frequency_hz"`
	Patches    []PatchResult `json:"patches"`
	// Disagreement is the rms of the patches' disagreements over the rms of
	// the profile; large values (above about 0.5) mean the errors are not the
	// same everywhere (not isoplanatic).
	Disagreement float64  `json:"disagreement"`
	Isoplanatic  bool     `json:"isoplanatic"`
	Before       Quality  `json:"coherence_before"`
	After        Quality  `json:"coherence_after"`
	Notes        []string `json:"notes,omitempty"`
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
	if cfg.PixelM == 0 {
		cfg.PixelM = cfg.Model.FaceSpeed() / a.Probe.CenterFrequencyHz / 2
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
	// c[m][j] = sum_p A_pj conj(A_p,j+m); e[j] = sum_p |A_pj|^2 over pixels
	// where both are active; n[m][j] pixel counts.
	c      [][]complex128
	ea, eb [][]float64
	n      [][]int
	active []int // per element: pixels where it is active
	cf     [2]float64
	// r[j] = sum_p A_pj conj(B_p), B_p the beamformed sum of pixel p, with
	// energies ra[j] = sum |A_pj|^2 and rb[j] = sum |B_p|^2 over the same pixels.
	r      []complex128
	ra, rb []float64
}

// Estimate estimates the focusing-error profile of acquisition a.
func Estimate(a *acq.Acquisition, ch *recon.Channels, cfg Config) (*Result, error) {
	if err := cfg.defaults(a); err != nil {
		return nil, err
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
	pds := make([]*patchData, len(patches))
	for i, p := range patches {
		if !(p.X1 > p.X0 && p.Z1 > p.Z0 && p.Z0 > 0) {
			return nil, fmt.Errorf("aberration: patch %s: want x1 > x0 and z1 > z0 > 0", p)
		}
		pd := &patchData{patch: p}
		for z := p.Z0; z <= p.Z1+1e-12; z += cfg.PixelM {
			for x := p.X0; x <= p.X1+1e-12; x += cfg.PixelM {
				pd.xs = append(pd.xs, x)
				pd.zs = append(pd.zs, z)
			}
		}
		if len(pd.xs) > 40000 {
			return nil, fmt.Errorf("aberration: patch %s holds %d pixels; use a smaller patch", p, len(pd.xs))
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
	if cfg.Initial != nil {
		if len(cfg.Initial) != nn {
			return nil, fmt.Errorf("aberration: initial profile has %d values for %d elements", len(cfg.Initial), nn)
		}
		copy(prof, cfg.Initial)
	}
	gather := func(profile []float64) error {
		m, err := recon.NewCorrected(cfg.Model, profile)
		if err != nil {
			return err
		}
		for _, pd := range pds {
			if err := pd.gather(a, ch, m, &cfg, lags); err != nil {
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
		// Take the step, halving it while it lowers the coherence factor of
		// the patches: a step that defocuses is noise, not correction.
		old := append([]float64(nil), prof...)
		frac := 1.0
		accepted := false
		for try := 0; try < 4; try++ {
			for j := range prof {
				prof[j] = old[j]
				if !math.IsNaN(step[j]) {
					prof[j] += frac * step[j]
				}
			}
			if err := gather(prof); err != nil {
				return nil, err
			}
			cf := quality(pds, omega, nn).CoherenceFactor
			if cf >= bestCF {
				bestCF = cf
				accepted = true
				break
			}
			frac /= 2
		}
		res.Iterations = it + 1
		if cfg.Progress != nil {
			cfg.Progress(it+1, total)
		}
		if !accepted {
			copy(prof, old)
			if err := gather(prof); err != nil {
				return nil, err
			}
			if it == 0 {
				res.Notes = append(res.Notes, "no correction raised the coherence of the patches: the profile stays at zero")
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
	x := elementCoords(a)
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
		if pr.Elements < 4 {
			pr.Rejected = true
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
	if res.After.LagOneCoherence < 0.3 {
		res.Notes = append(res.Notes, "lag-one coherence stays below 0.3: the echoes are weak or noisy, and the profile is uncertain")
	}
	return res, nil
}

// gather beamforms the patch with model m and accumulates the lagged
// cross-products of its aperture data.
func (pd *patchData) gather(a *acq.Acquisition, ch *recon.Channels, m recon.DelayModel, cfg *Config, lags int) error {
	g, err := recon.Points(pd.xs, pd.zs)
	if err != nil {
		return err
	}
	bf, err := recon.NewBeamformer(a, &g, m, recon.Config{FNumber: cfg.FNumber, Window: dsp.Window{Kind: dsp.Boxcar},
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
	pd.r = make([]complex128, nn)
	pd.ra = make([]float64, nn)
	pd.rb = make([]float64, nn)
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
			v := row[j]
			sr += float64(real(v))
			si += float64(imag(v))
			e += float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
			cnt++
			for m := 1; m <= L && j+m < nn; m++ {
				if !mk[j+m] {
					continue
				}
				w := row[j+m]
				pd.c[m][j] += complex128(v) * complex(float64(real(w)), -float64(imag(w)))
				pd.ea[m][j] += float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
				pd.eb[m][j] += float64(real(w))*float64(real(w)) + float64(imag(w))*float64(imag(w))
				pd.n[m][j]++
			}
		}
		if cnt > 0 {
			pd.cf[0] += sr*sr + si*si
			pd.cf[1] += float64(cnt) * e
			bb := sr*sr + si*si
			for j := range nn {
				if !mk[j] {
					continue
				}
				v := complex128(row[j])
				pd.r[j] += v * complex(sr, -si)
				pd.ra[j] += real(v)*real(v) + imag(v)*imag(v)
				pd.rb[j] += bb
			}
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
		for j := 0; j+1 < nn; j++ {
			c := pd.c[1][j]
			num += real(c)
			den += (pd.ea[1][j] + pd.eb[1][j]) / 2
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
	if z := noiseDepth(ch, c); z < zFar {
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

// noiseDepth returns the depth (at speed c) beyond which the smoothed mean
// echo power stays within 10 dB of the quietest stretch of the record.
func noiseDepth(ch *recon.Channels, c float64) float64 {
	pw := make([]float64, ch.NS)
	for e := 0; e < ch.NE; e++ {
		for j := 0; j < ch.NN; j++ {
			for n, v := range ch.Row(e, j) {
				pw[n] += float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
			}
		}
	}
	win := max(1, int(math.Round(2e-3/c*ch.FS)))
	sm := make([]float64, len(pw))
	var s float64
	for i := range pw {
		s += pw[i]
		if i >= win {
			s -= pw[i-win]
		}
		sm[i] = s / float64(min(i+1, win))
	}
	start := len(sm) / 5
	floor := math.Inf(1)
	for n := start; n < len(sm); n++ {
		floor = math.Min(floor, sm[n])
	}
	last := len(sm) - 1
	for last > start && sm[last] < 10*floor {
		last--
	}
	return c * (ch.T0 + float64(last)/ch.FS) / 2
}

var _ = sort.Float64s
