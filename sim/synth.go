package sim

import (
	"math"
	"runtime"

	"gonum.org/v1/gonum/dsp/fourier"

	"celerity/acq"
	"celerity/internal/dsp"
)

// Synthesis from the synthetic-aperture data set. The echoes are linear in
// what the elements emit, so an event that fires elements i with weights w_i
// at delays d_i records on element j
//
//	y_j(t) = sum_i w_i x_ij(t - d_i),
//
// where x_ij is the record of element j when element i alone fires at t = 0.
// Simulating the N single-element events once and summing delayed copies (the
// delays applied exactly, as phase ramps in the frequency domain) costs about
// as much as one full-aperture event simulated directly, so sequences of many
// plane, diverging or focused waves are simulated this way. Unlike the direct
// method it merges no transmit elements: it is exact up to the band limit of
// the sampled data.

// useSynthesis reports whether cfg is cheaper by synthesis: at least two
// events and, over all events, at least twice as many firings as distinct
// firing elements.
func useSynthesis(cfg *Config) bool {
	if len(cfg.Events) < 2 || len(cfg.Scatterers) == 0 {
		return false
	}
	firings := 0
	used := map[int]bool{}
	for _, ev := range cfg.Events {
		for i, w := range ev.Weights {
			if w != 0 {
				firings++
				used[i] = true
			}
		}
	}
	return firings >= 2*len(used)
}

// synthesize simulates cfg by synthesis; the result has no noise.
func synthesize(cfg *Config, workers int) ([]float32, error) {
	n := cfg.Probe.NumElements()
	dmin, dmax := math.Inf(1), math.Inf(-1)
	var used []int
	seen := make([]bool, n)
	for _, ev := range cfg.Events {
		for i, w := range ev.Weights {
			if w == 0 {
				continue
			}
			dmin, dmax = math.Min(dmin, ev.Delays[i]), math.Max(dmax, ev.Delays[i])
			if !seen[i] {
				seen[i] = true
				used = append(used, i)
			}
		}
	}
	fs := cfg.SamplingRateHz
	ns := cfg.NumSamples
	span := int(math.Ceil((dmax-dmin)*fs)) + 2
	// the single-element record covers every time any event needs
	sa := *cfg
	sa.StartTimeS = cfg.StartTimeS - dmax
	sa.NumSamples = ns + span
	sa.NoiseSNRDB = nil
	sa.Events = make([]acq.Event, len(used))
	for k, i := range used {
		w := make([]float64, n)
		w[i] = 1
		sa.Events[k] = acq.Event{Delays: make([]float64, n), Weights: w}
	}
	progress := cfg.Progress
	total := len(used) + len(cfg.Events)
	if progress != nil {
		sa.Progress = func(done, _ int) { progress(done, total) }
	}
	x, err := simulateDirect(&sa, workers)
	if err != nil {
		return nil, err
	}
	// spectra of every single-element record
	saLen := sa.NumSamples
	nfft := dsp.NextFastLen(saLen + 64)
	nf := nfft/2 + 1
	spec := make([]complex64, len(used)*n*nf)
	rows := len(used) * n
	parallelRange(rows, workers, func(lo, hi int) {
		fft := fourier.NewFFT(nfft)
		in := make([]float64, nfft)
		out := make([]complex128, nf)
		for r := lo; r < hi; r++ {
			clear(in)
			for s, v := range x[r*saLen : (r+1)*saLen] {
				in[s] = float64(v)
			}
			fft.Coefficients(out, in)
			dst := spec[r*nf : (r+1)*nf]
			for k, v := range out {
				dst[k] = complex64(v)
			}
		}
	})
	x = nil
	res := make([]float32, len(cfg.Events)*n*ns)
	pos := make(map[int]int, len(used))
	for k, i := range used {
		pos[i] = k
	}
	done := len(used)
	queue(len(cfg.Events), max(1, min(workers, runtime.GOMAXPROCS(0))), func() func(e int) {
		fft := fourier.NewFFT(nfft)
		acc := make([]complex128, nf)
		seq := make([]float64, nfft)
		ramp := make([]complex128, nf)
		return func(e int) {
			ev := &cfg.Events[e]
			var srcs []int
			var ramps [][]complex64
			for i, w := range ev.Weights {
				if w == 0 {
					continue
				}
				// y[n] = x[n + s] with s = (dmax - d_i) fs: an advance, X[k] exp(+j 2 pi k s / nfft)
				s := (dmax - ev.Delays[i]) * fs
				step := complex(math.Cos(2*math.Pi*s/float64(nfft)), math.Sin(2*math.Pi*s/float64(nfft)))
				r := complex(w, 0)
				rp := make([]complex64, nf)
				for k := range nf {
					if k%64 == 0 {
						sn, cs := math.Sincos(2 * math.Pi * math.Mod(s*float64(k)/float64(nfft), 1))
						r = complex(w*cs, w*sn)
					}
					rp[k] = complex64(r)
					r *= step
				}
				srcs = append(srcs, pos[i])
				ramps = append(ramps, rp)
			}
			_ = ramp
			for j := 0; j < n; j++ {
				clear(acc)
				for q, k := range srcs {
					sp := spec[(k*n+j)*nf : (k*n+j+1)*nf]
					rp := ramps[q][:len(sp)]
					for f, v := range sp {
						acc[f] += complex128(v * rp[f])
					}
				}
				fft.Sequence(seq, acc)
				dst := res[(e*n+j)*ns : (e*n+j+1)*ns]
				inv := 1 / float64(nfft)
				for s := range dst {
					dst[s] = float32(seq[s] * inv)
				}
			}
			if progress != nil {
				done++
				progress(done, total)
			}
		}
	})
	return res, nil
}
