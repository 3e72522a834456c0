package speed

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"

	"celerity/acq"
	"celerity/recon"
)

// DepthConfig tunes ByDepth.
type DepthConfig struct {
	SweepConfig
	// WindowM is the depth extent of each window at the reference speed;
	// default 5 mm.
	WindowM float64
	// MinLayerMPS and MaxLayerMPS bound the interval speeds; default 1300
	// and 1800 m/s.
	MinLayerMPS, MaxLayerMPS float64
}

// Window is the average speed of sound found in one depth window.
type Window struct {
	TopM, BottomM float64 // at the reference speed
	// TimeS is the two-way echo time at the window centre.
	TimeS     float64    `json:"time_s"`
	SpeedMPS  float64    `json:"speed_mps"`
	StdErrMPS float64    `json:"std_err_mps"`
	CI95MPS   [2]float64 `json:"ci95_mps"`
}

// Layer is an interval speed between two depths.
type Layer struct {
	TopM      float64    `json:"top_m"`
	BottomM   float64    `json:"bottom_m"`
	SpeedMPS  float64    `json:"speed_mps"`
	StdErrMPS float64    `json:"std_err_mps"`
	CI95MPS   [2]float64 `json:"ci95_mps"`
}

// DepthResult is a depth-resolved estimate.
type DepthResult struct {
	Windows []Window `json:"windows"`
	// Intervals are the Dix interval speeds between successive window centres.
	Intervals []Layer `json:"intervals"`
	// Layers merges neighbouring intervals whose 95 % intervals overlap into
	// one layer, whose speed is the time-weighted rms of its intervals (what
	// Dix gives over the merged time span).
	Layers     []Layer  `json:"layers"`
	Confidence string   `json:"confidence"`
	Notes      []string `json:"notes,omitempty"`
	Criterion  string   `json:"criterion"`
	Region     Region   `json:"-"`
}

// Dix converts average (moveout) speeds V_k at two-way times t_k, increasing,
// into interval speeds, after Dix (1955):
//
//	v_1 = V_1,  v_k^2 = (V_k^2 t_k - V_(k-1)^2 t_(k-1)) / (t_k - t_(k-1)),
//
// clamped to [lo, hi]; clamped reports which were.
func Dix(times, avg []float64, lo, hi float64) (interval []float64, clamped []bool) {
	interval = make([]float64, len(avg))
	clamped = make([]bool, len(avg))
	for k := range avg {
		var v2 float64
		if k == 0 {
			v2 = avg[0] * avg[0]
		} else {
			v2 = (avg[k]*avg[k]*times[k] - avg[k-1]*avg[k-1]*times[k-1]) / (times[k] - times[k-1])
		}
		switch {
		case !(v2 >= lo*lo):
			v2, clamped[k] = lo*lo, true
		case v2 > hi*hi:
			v2, clamped[k] = hi*hi, true
		}
		interval[k] = math.Sqrt(v2)
	}
	return interval, clamped
}

// ByDepth estimates the average speed of sound in successive depth windows,
// each by the focus sweep of Sweep restricted to the tiles of the window, and
// inverts them to interval (layer) speeds with the Dix relation. The
// windows' echo times are fixed by the reference speed, so the inversion needs
// no depths; layer depths follow from the interval speeds. Uncertainties
// come from the same block bootstrap: each resample gives every window's
// speed and so a Dix inversion, whose spread gives the layers' intervals.
func ByDepth(a *acq.Acquisition, ch *recon.Channels, cfg DepthConfig) (*DepthResult, error) {
	if err := cfg.SweepConfig.defaults(a); err != nil {
		return nil, err
	}
	if cfg.WindowM == 0 {
		cfg.WindowM = 5e-3
	}
	if cfg.MinLayerMPS == 0 {
		cfg.MinLayerMPS = 1300
	}
	if cfg.MaxLayerMPS == 0 {
		cfg.MaxLayerMPS = 1800
	}
	if !(cfg.WindowM > 0) || !(cfg.MaxLayerMPS > cfg.MinLayerMPS) {
		return nil, errors.New("depth windows must be positive and the layer speed range non-empty")
	}
	sc := &cfg.SweepConfig
	res := &DepthResult{Criterion: sc.Criterion.String(), Confidence: High}
	var region Region
	if sc.Region != nil {
		region = *sc.Region
		if !region.valid() {
			return nil, fmt.Errorf("region %s: want x1 > x0, z1 > z0 > 0", region)
		}
	} else {
		r, notes, err := AutoRegion(a, ch, sc.RefSpeedMPS, sc.FNumber)
		if err != nil {
			return nil, err
		}
		// Depth resolution needs the shallow layers too: start where the
		// aperture holds 16 elements (at least 5 mm), and say that the
		// shallowest windows lean high on compounded plane waves.
		p := &a.Probe
		r.Z0 = math.Max(math.Max(5e-3, 2*sc.FNumber*16*p.MeanPitch()), sc.RefSpeedMPS*a.StartTimeS/2+10*sc.RefSpeedMPS/p.CenterFrequencyHz)
		region = r
		res.Notes = append(res.Notes, notes...)
		if near := 0.4 * p.Aperture(); r.Z0 < near && planeWaves(a, sc.Events) && sc.Criterion != TransmitCoherence {
			res.Notes = append(res.Notes, fmt.Sprintf("the shallowest windows start at %.1f mm, above 0.4 times the array length (%.1f mm), where receive-element focus criteria on plane waves read high, the more so the narrower the span of angles (docs/validation.md)", r.Z0*1e3, near*1e3))
		}
	}
	res.Region = region
	nw := max(1, int(math.Round((region.Z1-region.Z0)/cfg.WindowM)))
	if nw < 2 {
		res.Notes = append(res.Notes, "the region holds a single depth window: no layering can be resolved")
	}
	// tiles as rows of the windows: one tile row per window keeps them apart
	sc.TileM = math.Min(sc.TileM, (region.Z1-region.Z0)/float64(nw))
	ts := newTiledSweep(a, ch, sc, region)
	if err := ts.coarse(); err != nil {
		return nil, err
	}
	// which window each tile belongs to, from its pixels' depths
	tileWin := make([]int, ts.ev.nTiles)
	for i := range tileWin {
		tileWin[i] = -1
	}
	for p, t := range ts.ev.tiles {
		w := min(nw-1, int((ts.ev.zs[p]-region.Z0)/(region.Z1-region.Z0)*float64(nw)))
		tileWin[t] = w
	}
	use := make([][]bool, nw)
	for w := range use {
		use[w] = make([]bool, ts.ev.nTiles)
	}
	for t, w := range tileWin {
		if w >= 0 {
			use[w][t] = true
		}
	}
	// a fine search around every window's best
	for w := range nw {
		sp, vals := ts.curve(nil, use[w])
		if b := argmaxFinite(vals); b >= 0 {
			if err := ts.fine(sp[b]); err != nil {
				return nil, err
			}
		}
	}
	times := make([]float64, nw)
	avg := make([]float64, nw)
	for w := range nw {
		top := region.Z0 + float64(w)*(region.Z1-region.Z0)/float64(nw)
		bot := top + (region.Z1-region.Z0)/float64(nw)
		times[w] = (top + bot) / sc.RefSpeedMPS // two-way: 2 * centre / c
		sp, vals := ts.curve(nil, use[w])
		pk, edge := refinePeak(sp, vals, sc.CoarseStepMPS)
		if edge || math.IsNaN(pk) {
			res.Confidence = Low
			res.Notes = append(res.Notes, fmt.Sprintf("window %.1f-%.1f mm peaks at the edge of the search range", top*1e3, bot*1e3))
		}
		avg[w] = pk
		res.Windows = append(res.Windows, Window{TopM: top, BottomM: bot, TimeS: times[w], SpeedMPS: pk})
	}
	interval, clamped := Dix(times, avg, cfg.MinLayerMPS, cfg.MaxLayerMPS)
	// bootstrap: the same tile resample for every window
	rng := rand.New(rand.NewPCG(sc.Seed, 0x6465707468))
	winPeaks := make([][]float64, nw)
	layPeaks := make([][]float64, nw)
	wts := make([]float64, ts.ev.nTiles)
	bavg := make([]float64, nw)
	for b := 0; b < sc.Bootstrap; b++ {
		// resample tiles within each window
		clear(wts)
		for w := range nw {
			var members []int
			for t, u := range use[w] {
				if u {
					members = append(members, t)
				}
			}
			for range members {
				wts[members[rng.IntN(len(members))]]++
			}
		}
		ok := true
		for w := range nw {
			sp, vals := ts.curve(wts, use[w])
			pk, _ := refinePeak(sp, vals, sc.CoarseStepMPS)
			if math.IsNaN(pk) {
				ok = false
				break
			}
			bavg[w] = pk
		}
		if !ok {
			continue
		}
		iv, _ := Dix(times, bavg, cfg.MinLayerMPS, cfg.MaxLayerMPS)
		for w := range nw {
			winPeaks[w] = append(winPeaks[w], bavg[w])
			layPeaks[w] = append(layPeaks[w], iv[w])
		}
	}
	for w := range nw {
		res.Windows[w].StdErrMPS, res.Windows[w].CI95MPS, _ = intervalFrom(winPeaks[w], avg[w], sc.SystematicFrac)
	}
	// layers: from the surface to the first window's centre at v_1, then
	// between window centres; depths from the interval speeds
	depth := 0.0
	prevT := 0.0
	for w := range nw {
		bottom := depth + interval[w]*(times[w]-prevT)/2
		l := Layer{TopM: depth, BottomM: bottom, SpeedMPS: interval[w]}
		l.StdErrMPS, l.CI95MPS, _ = intervalFrom(layPeaks[w], interval[w], sc.SystematicFrac)
		if clamped[w] {
			res.Notes = append(res.Notes, fmt.Sprintf("the interval speed between %.1f and %.1f mm left the physical range and was clamped", depth*1e3, bottom*1e3))
			res.Confidence = Low
		}
		if hw := (l.CI95MPS[1] - l.CI95MPS[0]) / 2; !(hw <= 3*MaxConfidentHalfWidth) {
			res.Confidence = Low
			res.Notes = append(res.Notes, fmt.Sprintf("the interval speed between %.1f and %.1f mm is uncertain (95 %% interval %.0f m/s wide); Dix inversion amplifies errors in thin intervals", depth*1e3, bottom*1e3, 2*hw))
		}
		res.Intervals = append(res.Intervals, l)
		depth, prevT = bottom, times[w]
	}
	res.Layers = mergeLayers(res.Intervals, times, layPeaks, sc.SystematicFrac)
	return res, nil
}

// mergeLayers joins neighbouring intervals whose 95 % intervals overlap. The
// merged speed is sqrt(sum v_k^2 dt_k / sum dt_k); its interval comes from
// the same combination applied to each bootstrap resample.
func mergeLayers(iv []Layer, times []float64, boot [][]float64, sysFrac float64) []Layer {
	if len(iv) == 0 {
		return nil
	}
	dt := make([]float64, len(iv))
	prev := 0.0
	for k := range iv {
		dt[k] = times[k] - prev
		prev = times[k]
	}
	var out []Layer
	start := 0
	flush := func(end int) {
		var sw, sv float64
		for k := start; k < end; k++ {
			sw += dt[k]
			sv += iv[k].SpeedMPS * iv[k].SpeedMPS * dt[k]
		}
		l := Layer{TopM: iv[start].TopM, BottomM: iv[end-1].BottomM, SpeedMPS: math.Sqrt(sv / sw)}
		nb := len(boot[start])
		for k := start; k < end; k++ {
			nb = min(nb, len(boot[k]))
		}
		comb := make([]float64, nb)
		for b := range nb {
			v := 0.0
			for k := start; k < end; k++ {
				v += boot[k][b] * boot[k][b] * dt[k]
			}
			comb[b] = math.Sqrt(v / sw)
		}
		l.StdErrMPS, l.CI95MPS, _ = intervalFrom(comb, l.SpeedMPS, sysFrac)
		if end-start == 1 {
			l.StdErrMPS, l.CI95MPS = iv[start].StdErrMPS, iv[start].CI95MPS
		}
		out = append(out, l)
		start = end
	}
	for k := 1; k < len(iv); k++ {
		a, b := iv[k-1], iv[k]
		overlap := a.CI95MPS[0] <= b.CI95MPS[1] && b.CI95MPS[0] <= a.CI95MPS[1]
		if !overlap {
			flush(k)
		}
	}
	flush(len(iv))
	return out
}

// planeWaves reports whether every event used is a plane wave.
func planeWaves(a *acq.Acquisition, events []int) bool {
	if events == nil {
		events = make([]int, a.NumEvents())
		for i := range events {
			events[i] = i
		}
	}
	els := a.Probe.Elements()
	for _, e := range events {
		if e < 0 || e >= a.NumEvents() {
			return false
		}
		w := acq.DeriveWavefront(els, &a.Events[e], a.AssumedSpeedMPS, 0, a.Probe.CenterFrequencyHz)
		if w.Kind != acq.KindPlaneWave {
			return false
		}
	}
	return len(events) > 0
}
