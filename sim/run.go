package sim

import (
	"fmt"
	"runtime"
	"sync"

	"celerity/acq"
)

// Simulate runs the forward model and returns the RF acquisition.
//
// Sequences of several multi-element events are synthesised from the
// single-element records (see synthesize); others are simulated directly.
// Work is split so that the result does not depend on the number of workers.
func Simulate(cfg *Config) (*acq.Acquisition, error) {
	if err := cfg.Validate(); err != nil {
		return nil, err
	}
	workers := cfg.Workers
	if workers <= 0 {
		workers = runtime.GOMAXPROCS(0)
	}
	var out []float32
	var err error
	if useSynthesis(cfg) {
		out, err = synthesize(cfg, workers)
	} else {
		out, err = simulateDirect(cfg, workers)
	}
	if err != nil {
		return nil, err
	}
	if cfg.NoiseSNRDB != nil {
		addNoise(out, cfg.Probe.NumElements(), cfg.NumSamples, len(cfg.Events), cfg.Seed, *cfg.NoiseSNRDB)
	}
	a := &acq.Acquisition{
		Description:     cfg.Description,
		Probe:           cfg.Probe,
		SamplingRateHz:  cfg.SamplingRateHz,
		StartTimeS:      cfg.StartTimeS,
		AssumedSpeedMPS: cfg.AssumedSpeedMPS,
		Kind:            acq.RF,
		Events:          cfg.Events,
		NumSamples:      cfg.NumSamples,
		RF:              out,
	}
	return a, a.Validate()
}

// simulateDirect deposits every scatterer's echoes for every event: with
// many events each is simulated by one worker; with few, the scatterers of
// each event are split into a fixed number of blocks whose accumulators are
// summed in a fixed order.
func simulateDirect(cfg *Config, workers int) ([]float32, error) {
	p := newPlan(cfg)
	maxBytes := cfg.MaxBytes
	if maxBytes <= 0 {
		maxBytes = 6 << 30
	}
	outBytes := int64(p.ne) * int64(p.n) * int64(p.ns) * 4
	accBytes := int64(p.n) * int64(p.accLen) * 8
	budget := maxBytes - outBytes - int64(max(workers, blocks))*accBytes
	if budget <= 1<<20 {
		return nil, fmt.Errorf("simulation needs %d MiB for channel data and accumulators, over the %d MiB cap",
			(outBytes+int64(max(workers, blocks))*accBytes)>>20, maxBytes>>20)
	}
	if fuseFew && p.ne < blocks && int64(p.ne*blocks)*accBytes <= budget/2 {
		return simulateFused(p, workers), nil
	}
	// Scatterer chunks bound the path table (12 bytes per scatterer and element).
	chunk := len(cfg.Scatterers)
	for chunk > 1 && int64(chunk)*int64(p.n)*12 > budget/2 {
		chunk = (chunk + 1) / 2
	}
	out := make([]float32, p.ne*p.n*p.ns)
	nChunks := 0
	if len(cfg.Scatterers) > 0 {
		nChunks = (len(cfg.Scatterers) + chunk - 1) / chunk
	}
	report := progressCounter(cfg.Progress, nChunks*p.ne)
	per := p.n * p.ns
	for c0 := 0; c0 < len(cfg.Scatterers); c0 += chunk {
		sc := cfg.Scatterers[c0:min(c0+chunk, len(cfg.Scatterers))]
		tau := make([]float32, len(sc)*p.n)
		ph := make([]complex64, len(sc)*p.n)
		parallelRange(len(sc), workers, func(lo, hi int) {
			tr := newTracer(&cfg.Medium)
			for s := lo; s < hi; s++ {
				p.fillPaths(tr, sc[s], tau[s*p.n:(s+1)*p.n], ph[s*p.n:(s+1)*p.n])
			}
		})
		amp := make([]float32, len(sc))
		for i, s := range sc {
			amp[i] = float32(s.Amp)
		}
		run := func(d *depositor, acc *accumulator, lo, hi int) {
			for c := lo; c < hi; c += fusedChunk {
				m := min(c+fusedChunk, hi)
				d.chunk(acc, tau[c*p.n:m*p.n], ph[c*p.n:m*p.n], amp[c:m])
			}
		}
		if p.ne >= blocks {
			queue(p.ne, workers, func() func(e int) {
				acc := newAcc(p)
				return func(e int) {
					acc.clear()
					run(newDepositor(p, e), acc, 0, len(sc))
					p.filter(acc, out[e*per:(e+1)*per])
					report()
				}
			})
			continue
		}
		accs := make([]*accumulator, blocks)
		for b := range accs {
			accs[b] = newAcc(p)
		}
		for e := 0; e < p.ne; e++ {
			queue(blocks, workers, func() func(b int) {
				d := newDepositor(p, e)
				return func(b int) {
					accs[b].clear()
					run(d, accs[b], b*len(sc)/blocks, (b+1)*len(sc)/blocks)
				}
			})
			p.sumAndFilter(accs, out[e*per:(e+1)*per], workers)
			report()
		}
	}
	return out, nil
}

// simulateFused is simulateDirect for a few events with memory for an
// accumulator per event and block: each worker traces the paths of a few
// scatterers at a time into a small table that stays in cache, and deposits
// them for every event at once. The sums are the same, in the same order, as
// with the whole path table, so the records are too; what is saved is
// writing and reading back the table (12 bytes per scatterer and element,
// hundreds of MB for a large phantom), which costs more than tracing.
func simulateFused(p *plan, workers int) []float32 {
	cfg := p.cfg
	accs := make([]*accumulator, p.ne*blocks) // [event][block]
	report := progressCounter(cfg.Progress, blocks)
	queue(blocks, workers, func() func(b int) {
		tr := newTracer(&cfg.Medium)
		tau := make([]float32, fusedChunk*p.n)
		ph := make([]complex64, fusedChunk*p.n)
		amp := make([]float32, 0, fusedChunk)
		deps := make([]*depositor, p.ne)
		for e := range deps {
			deps[e] = newDepositor(p, e)
		}
		return func(b int) {
			for e := range p.ne {
				accs[e*blocks+b] = newAcc(p)
			}
			lo, hi := b*len(cfg.Scatterers)/blocks, (b+1)*len(cfg.Scatterers)/blocks
			for c0 := lo; c0 < hi; c0 += fusedChunk {
				sc := cfg.Scatterers[c0:min(c0+fusedChunk, hi)]
				amp = amp[:0]
				for s := range sc {
					p.fillPaths(tr, sc[s], tau[s*p.n:(s+1)*p.n], ph[s*p.n:(s+1)*p.n])
					amp = append(amp, float32(sc[s].Amp))
				}
				for e, d := range deps {
					d.chunk(accs[e*blocks+b], tau[:len(sc)*p.n], ph[:len(sc)*p.n], amp)
				}
			}
			report()
		}
	})
	per := p.n * p.ns
	out := make([]float32, p.ne*per)
	for e := range p.ne {
		p.sumAndFilter(accs[e*blocks:(e+1)*blocks], out[e*per:(e+1)*per], workers)
	}
	return out
}

// sumAndFilter adds the blocks' accumulators into the first, in order, and
// filters the sum into dst, a range of elements per worker.
func (p *plan) sumAndFilter(accs []*accumulator, dst []float32, workers int) {
	parallelRange(p.n, workers, func(lo, hi int) {
		for b := 1; b < len(accs); b++ {
			accs[0].addRows(accs[b], lo, hi)
		}
		p.filterRows(accs[0], dst, lo, hi)
	})
}

// progressCounter returns a function to call once per unit of work done,
// which reports the count so far and total to f (when not nil); safe for
// concurrent use.
func progressCounter(f func(done, total int), total int) func() {
	var mu sync.Mutex
	done := 0
	return func() {
		mu.Lock()
		done++
		d := done
		mu.Unlock()
		if f != nil {
			f(d, total)
		}
	}
}

// fuseFew lets simulateDirect take the fused route; tests switch it off to
// compare the two routes.
var fuseFew = true

// fusedChunk is the number of scatterers whose paths simulateFused traces
// at a time (about 100 KB of table for 128 elements).
const fusedChunk = 64

// blocks is the fixed number of scatterer blocks per event when events are
// few; fixing it keeps the result independent of the number of workers.
const blocks = 8

// parallelRange splits [0, n) into contiguous ranges, one per worker.
func parallelRange(n, workers int, f func(lo, hi int)) {
	if n == 0 {
		return
	}
	workers = max(1, min(workers, n))
	var wg sync.WaitGroup
	for w := 0; w < workers; w++ {
		lo, hi := w*n/workers, (w+1)*n/workers
		wg.Add(1)
		go func() {
			defer wg.Done()
			f(lo, hi)
		}()
	}
	wg.Wait()
}

// queue runs items 0..n-1 on a pool of workers; each worker gets its own
// state from mk.
func queue(n, workers int, mk func() func(i int)) {
	var next int
	var mu sync.Mutex
	var wg sync.WaitGroup
	for w := 0; w < max(1, min(workers, n)); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			f := mk()
			for {
				mu.Lock()
				i := next
				next++
				mu.Unlock()
				if i >= n {
					return
				}
				f(i)
			}
		}()
	}
	wg.Wait()
}
