package recon

import (
	"errors"
	"fmt"
	"math"
	"runtime"
	"sync"

	"celerity/acq"
	"celerity/internal/dsp"
)

// Interp selects how channel data is interpolated at fractional delays.
type Interp int

// Interpolation kernels (on the complex baseband samples).
const (
	Linear Interp = iota
	Cubic         // Keys cubic convolution, a = -0.5
)

// ParseInterp parses "linear" or "cubic".
func ParseInterp(s string) (Interp, error) {
	switch s {
	case "linear", "":
		return Linear, nil
	case "cubic":
		return Cubic, nil
	}
	return 0, fmt.Errorf("interpolation %q: want linear or cubic", s)
}

func (i Interp) String() string {
	if i == Cubic {
		return "cubic"
	}
	return "linear"
}

// Config tunes a Beamformer.
type Config struct {
	// FNumber is the receive F-number: element j takes part for a pixel at
	// depth d when its distance along the array from the pixel is at most
	// d / (2 FNumber). 0 uses the whole array.
	FNumber float64
	// Window tapers the receive aperture (boxcar, Hann, Tukey).
	Window dsp.Window
	// MaxAngleDeg is the element directivity cut-off: elements that see the
	// pixel more than this far off their normal are left out. 0 derives it
	// from the element width (the -6 dB angle of sinc(w sin(theta)/lambda)),
	// or no cut-off when the width is unknown; a negative value disables it.
	MaxAngleDeg float64
	Interp      Interp
	// ApertureDepthScale, when positive, multiplies the pixel depth that the
	// F-number rule uses. A speed sweep that moves its pixels with the echoes
	// (depth scaled by c / c_ref) sets it to c_ref / c, so that each echo is
	// summed over the same elements whatever speed is assumed.
	ApertureDepthScale float64
	// Events selects the events to compound; nil means all.
	Events []int
	// Workers is the size of the worker pool; 0 means GOMAXPROCS.
	Workers int
}

// tileShape returns the rows and columns of a tile: the pixels of a block,
// column by column, each column's rows in order down the column, so that one
// element's samples are read in order. The vector kernel gains from long
// runs and from several neighbouring columns per tile, which read nearly the
// same stretch of every channel while it is in cache; the scalar loop and
// its element pairs do best at 64 x 1. The shape does not change any sum:
// each pixel adds its events and elements in the same order whatever the
// tiling.
func tileShape() (rows, cols int) {
	if haveVector {
		return 64, 4
	}
	return 64, 1
}

type tile struct {
	pix []int32     // pixel indices
	rx  []float32   // [element][k] receive delay in samples
	w   []complex64 // [element][k] apodisation * exp(j 2 pi fd tau_rx)
	k0  []int32     // [element] first active pixel of the tile
	k1  []int32     // [element] one past the last active pixel
	tx  []float32   // [event][k] (tau_tx - t0) * fs
	txw []complex64 // [event][k] transmit apodisation * exp(j 2 pi fd tau_tx)
	on  []bool      // [event] whether any pixel of the tile sees the event
}

// Beamformer is a delay-and-sum plan for one acquisition geometry, grid and
// delay model: its delay tables are computed once, and Form can then run
// many times (for example over frames or sweeps) without allocating.
type Beamformer struct {
	Grid   *Grid
	Model  DelayModel
	cfg    Config
	events []int
	ne, nn int
	ns     int
	fs, t0 float64
	fd     float64
	tiles  []tile
}

// NewBeamformer builds the delay tables for acquisition a (its header: probe,
// events, sampling) on grid g with delay model m.
func NewBeamformer(a *acq.Acquisition, g *Grid, m DelayModel, cfg Config) (*Beamformer, error) {
	if err := a.ValidateHeader(); err != nil {
		return nil, err
	}
	if g.Len() == 0 {
		return nil, errors.New("beamformer: empty grid")
	}
	if len(m.Elements()) != a.NumElements() {
		return nil, fmt.Errorf("beamformer: delay model has %d elements, acquisition %d", len(m.Elements()), a.NumElements())
	}
	if cfg.ApertureDepthScale < 0 || math.IsNaN(cfg.ApertureDepthScale) || math.IsInf(cfg.ApertureDepthScale, 0) {
		return nil, fmt.Errorf("beamformer: aperture depth scale must be finite and non-negative")
	}
	if cfg.FNumber < 0 || math.IsNaN(cfg.FNumber) || math.IsInf(cfg.FNumber, 0) {
		return nil, fmt.Errorf("beamformer: F-number must be finite and non-negative, got %g", cfg.FNumber)
	}
	bf := &Beamformer{Grid: g, Model: m, cfg: cfg, ne: a.NumEvents(), nn: a.NumElements(), ns: a.NumSamples,
		fs: a.SamplingRateHz, t0: a.StartTimeS}
	if a.Kind == acq.IQ {
		bf.fd = a.DemodulationHz
	} else {
		bf.fd = a.Probe.CenterFrequencyHz
	}
	if cfg.Events == nil {
		for e := range bf.ne {
			bf.events = append(bf.events, e)
		}
	} else {
		for _, e := range cfg.Events {
			if e < 0 || e >= bf.ne {
				return nil, fmt.Errorf("beamformer: event %d outside 0..%d", e, bf.ne-1)
			}
		}
		bf.events = append([]int(nil), cfg.Events...)
	}
	if len(bf.events) == 0 {
		return nil, errors.New("beamformer: no events to form")
	}
	tables := int64(g.Len()) * (int64(bf.nn)*12 + int64(len(bf.events))*12)
	if tables > 8<<30 {
		return nil, fmt.Errorf("beamformer: delay tables would need %d MiB; use a coarser grid or fewer events", tables>>20)
	}
	waves := make([]*Wave, len(bf.events))
	for i, e := range bf.events {
		waves[i] = NewWave(m, &a.Events[e], a.Probe.CenterFrequencyHz)
	}
	bf.makeTiles()
	aperture := newApodizer(&a.Probe, cfg, m.FaceSpeed())
	bf.parallelTiles(func(t *tile) {
		bf.fillTile(t, waves, aperture)
	})
	return bf, nil
}

// Events returns the events the beamformer compounds.
func (bf *Beamformer) Events() []int { return bf.events }

func (bf *Beamformer) workers() int {
	if bf.cfg.Workers > 0 {
		return bf.cfg.Workers
	}
	return runtime.GOMAXPROCS(0)
}

func (bf *Beamformer) makeTiles() {
	g := bf.Grid
	// Tiles at the same depth in neighbouring columns read nearly the same
	// stretch of every channel, so they are made (and run) one after the
	// other, while those samples are still in cache.
	tr, tc := tileShape()
	if g.Rows == 1 {
		// a single row of points: tile along the row instead
		tr, tc = 1, tr*tc
	}
	for r0 := 0; r0 < g.Rows; r0 += tr {
		for c0 := 0; c0 < g.Cols; c0 += tc {
			t := tile{}
			for c := c0; c < min(c0+tc, g.Cols); c++ {
				for r := r0; r < min(r0+tr, g.Rows); r++ {
					t.pix = append(t.pix, int32(r*g.Cols+c))
				}
			}
			bf.tiles = append(bf.tiles, t)
		}
	}
}

func (bf *Beamformer) parallelTiles(f func(t *tile)) {
	var next int
	var mu sync.Mutex
	var wg sync.WaitGroup
	for range min(bf.workers(), len(bf.tiles)) {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for {
				mu.Lock()
				i := next
				next++
				mu.Unlock()
				if i >= len(bf.tiles) {
					return
				}
				f(&bf.tiles[i])
			}
		}()
	}
	wg.Wait()
}

// phasor returns exp(j 2 pi fd t).
func phasor(fd, t float64) complex64 { return dsp.Phasor(fd * t) }

func (bf *Beamformer) fillTile(t *tile, waves []*Wave, ap *apodizer) {
	g := bf.Grid
	n := len(t.pix)
	t.rx = make([]float32, bf.nn*n)
	t.w = make([]complex64, bf.nn*n)
	t.k0 = make([]int32, bf.nn)
	t.k1 = make([]int32, bf.nn)
	cm, _ := bf.Model.(*Corrected)
	// A corrected model with a field cache takes the base model's receive
	// delays and the weights from it: they do not change from one profile
	// to the next (Corrected.Receive is the base delay plus the element's
	// correction, summed the same way here).
	var rc *rxTerms
	np := g.Len()
	if cm != nil && cm.Field.Cache != nil {
		rc = cm.Field.Cache.receive(g, ap)
		for _, p := range t.pix {
			if rc.done[p] {
				continue
			}
			x, z := g.PX[p], g.PZ[p]
			for j := range bf.nn {
				i := j*np + int(p)
				rc.wt[i] = ap.weight(j, x, z)
				if rc.wt[i] != 0 {
					rc.tau[i] = cm.Base.Receive(j, x, z)
				}
			}
			rc.done[p] = true
		}
	}
	for j := range bf.nn {
		lo, hi := n, 0
		for k, p := range t.pix {
			var wt, tau float64
			if rc != nil {
				i := j*np + int(p)
				wt = rc.wt[i]
				if wt == 0 {
					continue
				}
				tau = rc.tau[i] + cm.Profile[j]
			} else {
				x, z := g.PX[p], g.PZ[p]
				wt = ap.weight(j, x, z)
				if wt == 0 {
					continue
				}
				tau = bf.Model.Receive(j, x, z)
			}
			if math.IsInf(tau, 0) || math.IsNaN(tau) {
				continue
			}
			t.rx[j*n+k] = float32(tau * bf.fs)
			t.w[j*n+k] = complex(float32(wt), 0) * phasor(bf.fd, tau)
			lo, hi = min(lo, k), max(hi, k+1)
		}
		if lo >= hi {
			lo, hi = 0, 0
		}
		t.k0[j], t.k1[j] = int32(lo), int32(hi)
	}
	ne := len(waves)
	t.tx = make([]float32, ne*n)
	t.txw = make([]complex64, ne*n)
	t.on = make([]bool, ne)
	for i, w := range waves {
		single := w.Front.Kind == acq.KindSingleElement
		var slots []*fieldTerms
		if cm != nil {
			slots = cm.fieldSlots(bf.Grid, w)
		}
		for k, p := range t.pix {
			x, z := g.PX[p], g.PZ[p]
			t.tx[i*n+k] = -1e9 // never inside the record
			wt := 1.0
			if single {
				// synthetic transmit aperture: the same F-number rule as on receive
				wt = ap.weight(w.Front.Element, x, z)
				if wt == 0 {
					continue
				}
			}
			var tau float64
			if slots != nil {
				tau = cm.transmitPixel(w, bf.Grid, int(p), slots)
			} else {
				tau, _ = bf.Model.Transmit(w, x, z)
			}
			if math.IsInf(tau, 0) || math.IsNaN(tau) {
				continue
			}
			t.tx[i*n+k] = float32((tau - bf.t0) * bf.fs)
			t.txw[i*n+k] = complex(float32(wt), 0) * phasor(bf.fd, tau)
			t.on[i] = true
		}
	}
}

func (bf *Beamformer) check(ch *Channels) error {
	if ch.NE != bf.ne || ch.NN != bf.nn || ch.NS != bf.ns {
		return fmt.Errorf("beamformer: channel data %dx%dx%d does not match the plan's %dx%dx%d", ch.NE, ch.NN, ch.NS, bf.ne, bf.nn, bf.ns)
	}
	if ch.FS != bf.fs || ch.T0 != bf.t0 || ch.FD != bf.fd {
		return errors.New("beamformer: channel data sampling or demodulation does not match the plan")
	}
	return nil
}

// Form beamforms ch and returns the compounded complex image, one value per
// grid pixel, in dst (allocated when nil or too short).
//
//	I(p) = sum_e exp(j w_d tau_tx) sum_j a_pj exp(j w_d tau_rx) iq_ej(tau_tx + tau_rx)
//
// where iq is the baseband data, w_d = 2 pi f_d and a_pj the apodisation:
// the analytic signal of the RF summed at the delays, coherently over events.
func (bf *Beamformer) Form(dst []complex64, ch *Channels) ([]complex64, error) {
	return bf.FormEvents(dst, ch, nil)
}

// FormEvents is Form over a subset of the plan's events (indices into
// Events()); nil means all.
func (bf *Beamformer) FormEvents(dst []complex64, ch *Channels, subset []int) ([]complex64, error) {
	if err := bf.check(ch); err != nil {
		return nil, err
	}
	idx, err := bf.subset(subset)
	if err != nil {
		return nil, err
	}
	np := bf.Grid.Len()
	if cap(dst) < np {
		dst = make([]complex64, np)
	}
	dst = dst[:np]
	clear(dst)
	kern := kernelLinear
	pair := kernelLinearPair
	if haveVector {
		// the vector kernel is faster one element at a time
		pair = nil
	}
	if bf.cfg.Interp == Cubic {
		kern = kernelCubic
		pair = nil
	}
	var pool sync.Pool
	bf.parallelTiles(func(t *tile) {
		n := len(t.pix)
		accp, _ := pool.Get().(*[]complex64)
		if accp == nil || cap(*accp) < n {
			a := make([]complex64, n)
			accp = &a
		}
		acc := (*accp)[:n]
		for _, i := range idx {
			if !t.on[i] {
				continue
			}
			e := bf.events[i]
			clear(acc)
			tx := t.tx[i*n : (i+1)*n]
			one := func(j int, k0, k1 int32) {
				if k0 < k1 {
					kern(acc[k0:k1], ch.Row(e, j), tx[k0:k1], t.rx[j*n+int(k0):j*n+int(k1)], t.w[j*n+int(k0):j*n+int(k1)])
				}
			}
			j := 0
			if pair != nil {
				for ; j+1 < bf.nn; j += 2 {
					a0, a1, b0, b1 := t.k0[j], t.k1[j], t.k0[j+1], t.k1[j+1]
					lo, hi := max(a0, b0), min(a1, b1)
					if lo >= hi {
						one(j, a0, a1)
						one(j+1, b0, b1)
						continue
					}
					// each pixel still adds element j before j+1
					one(j, a0, lo)
					one(j+1, b0, lo)
					pair(acc[lo:hi], ch.Row(e, j), ch.Row(e, j+1), tx[lo:hi],
						t.rx[j*n+int(lo):j*n+int(hi)], t.rx[(j+1)*n+int(lo):(j+1)*n+int(hi)],
						t.w[j*n+int(lo):j*n+int(hi)], t.w[(j+1)*n+int(lo):(j+1)*n+int(hi)])
					one(j, hi, a1)
					one(j+1, hi, b1)
				}
			}
			for ; j < bf.nn; j++ {
				one(j, t.k0[j], t.k1[j])
			}
			txw := t.txw[i*n : (i+1)*n]
			for k, p := range t.pix {
				dst[p] += txw[k] * acc[k]
			}
		}
		pool.Put(accp)
	})
	return dst, nil
}

// EventSums forms the image of each of the plan's events on its own and
// returns, for every pixel, their coherent sum sum_e I_e (Form's value, in
// complex128) and their summed power sum_e |I_e|^2: the ingredients of the
// coherence across transmit events, |sum_e I_e|^2 / (E sum_e |I_e|^2).
func (bf *Beamformer) EventSums(ch *Channels) (sum []complex128, power []float64, err error) {
	np := bf.Grid.Len()
	sum = make([]complex128, np)
	power = make([]float64, np)
	img := make([]complex64, np)
	for i := range bf.events {
		if img, err = bf.FormEvents(img, ch, []int{i}); err != nil {
			return nil, nil, err
		}
		for p, v := range img {
			sum[p] += complex128(v)
			power[p] += float64(real(v))*float64(real(v)) + float64(imag(v))*float64(imag(v))
		}
	}
	return sum, power, nil
}

func (bf *Beamformer) subset(s []int) ([]int, error) {
	if s == nil {
		out := make([]int, len(bf.events))
		for i := range out {
			out[i] = i
		}
		return out, nil
	}
	for _, i := range s {
		if i < 0 || i >= len(bf.events) {
			return nil, fmt.Errorf("beamformer: event subset index %d outside 0..%d", i, len(bf.events)-1)
		}
	}
	return s, nil
}

// kernelLinear accumulates, for a run of pixels, one element's contribution
// acc[k] += w[k] * iq(tx[k] + rx[k]) with linear interpolation; samples
// outside the record contribute nothing.
func kernelLinear(acc, row []complex64, tx, rx []float32, w []complex64) {
	n := len(acc)
	tx, rx, w = tx[:n], rx[:n], w[:n]
	lim := float32(len(row) - 1)
	k0 := 0
	if haveVector && n >= 4 && len(row) >= 2 {
		k0 = n &^ 3
		linearVector(&acc[0], &row[0], &tx[0], &rx[0], &w[0], k0, lim)
	}
	for k := k0; k < n; k++ {
		s := tx[k] + rx[k]
		if !(s >= 0 && s < lim) {
			continue
		}
		i := int(s)
		f := s - float32(i)
		r := row[i : i+2 : i+2]
		a, b := r[0], r[1]
		vr := real(a) + f*(real(b)-real(a))
		vi := imag(a) + f*(imag(b)-imag(a))
		wr, wi := real(w[k]), imag(w[k])
		acc[k] += complex(vr*wr-vi*wi, vr*wi+vi*wr)
	}
}

// kernelLinearPair is kernelLinear for two elements a and b over the same
// run of pixels: acc[k] = (acc[k] + wa[k] iq_a) + wb[k] iq_b, the same sums in
// the same order as two calls, with half the loads and stores of acc.
func kernelLinearPair(acc, rowA, rowB []complex64, tx, rxA, rxB []float32, wA, wB []complex64) {
	n := len(acc)
	tx, rxA, rxB, wA, wB = tx[:n], rxA[:n], rxB[:n], wA[:n], wB[:n]
	limA, limB := float32(len(rowA)-1), float32(len(rowB)-1)
	for k := range acc {
		v := acc[k]
		t := tx[k]
		if s := t + rxA[k]; s >= 0 && s < limA {
			i := int(s)
			f := s - float32(i)
			r := rowA[i : i+2 : i+2]
			a, b := r[0], r[1]
			vr := real(a) + f*(real(b)-real(a))
			vi := imag(a) + f*(imag(b)-imag(a))
			wr, wi := real(wA[k]), imag(wA[k])
			v += complex(vr*wr-vi*wi, vr*wi+vi*wr)
		}
		if s := t + rxB[k]; s >= 0 && s < limB {
			i := int(s)
			f := s - float32(i)
			r := rowB[i : i+2 : i+2]
			a, b := r[0], r[1]
			vr := real(a) + f*(real(b)-real(a))
			vi := imag(a) + f*(imag(b)-imag(a))
			wr, wi := real(wB[k]), imag(wB[k])
			v += complex(vr*wr-vi*wi, vr*wi+vi*wr)
		}
		acc[k] = v
	}
}

// kernelCubic is kernelLinear with Keys cubic convolution (a = -0.5).
func kernelCubic(acc, row []complex64, tx, rx []float32, w []complex64) {
	n := len(acc)
	tx, rx, w = tx[:n], rx[:n], w[:n]
	lim := float32(len(row) - 2)
	for k := range acc {
		s := tx[k] + rx[k]
		if !(s >= 1 && s < lim) {
			if s >= 0 && s <= float32(len(row)-1) {
				v := dsp.Cubic(row, s)
				acc[k] += v * w[k]
			}
			continue
		}
		i := int(s)
		f := s - float32(i)
		r := row[i-1 : i+3 : i+3]
		// Catmull-Rom weights
		f2 := f * f
		f3 := f2 * f
		c0 := -0.5*f3 + f2 - 0.5*f
		c1 := 1.5*f3 - 2.5*f2 + 1
		c2 := -1.5*f3 + 2*f2 + 0.5*f
		c3 := 0.5*f3 - 0.5*f2
		vr := c0*real(r[0]) + c1*real(r[1]) + c2*real(r[2]) + c3*real(r[3])
		vi := c0*imag(r[0]) + c1*imag(r[1]) + c2*imag(r[2]) + c3*imag(r[3])
		wr, wi := real(w[k]), imag(w[k])
		acc[k] += complex(vr*wr-vi*wi, vr*wi+vi*wr)
	}
}

// Aperture returns the aperture-domain data: for every grid pixel and
// element, the delayed, apodised, phase-aligned signal before the sum over
// elements (compounded over the events in subset, nil meaning all), shaped
// [pixel][element] in dst. Summing a pixel's row gives Form's value.
func (bf *Beamformer) Aperture(dst []complex64, ch *Channels, subset []int) ([]complex64, error) {
	if err := bf.check(ch); err != nil {
		return nil, err
	}
	idx, err := bf.subset(subset)
	if err != nil {
		return nil, err
	}
	np := bf.Grid.Len()
	size := np * bf.nn
	if cap(dst) < size {
		dst = make([]complex64, size)
	}
	dst = dst[:size]
	clear(dst)
	cubic := bf.cfg.Interp == Cubic
	nn := bf.nn
	bf.parallelTiles(func(t *tile) {
		n := len(t.pix)
		for _, i := range idx {
			if !t.on[i] {
				continue
			}
			e := bf.events[i]
			tx := t.tx[i*n : (i+1)*n]
			txw := t.txw[i*n : (i+1)*n]
			for j := range nn {
				row := ch.Row(e, j)
				for k := t.k0[j]; k < t.k1[j]; k++ {
					w := t.w[j*n+int(k)]
					if w == 0 {
						continue
					}
					s := tx[k] + t.rx[j*n+int(k)]
					var v complex64
					if cubic {
						v = dsp.Cubic(row, s)
					} else {
						v = dsp.Linear(row, s)
					}
					dst[int(t.pix[k])*nn+j] += txw[k] * w * v
				}
			}
		}
	})
	return dst, nil
}

// ApertureMask returns, for every pixel and element, whether the element
// takes part (non-zero apodisation), shaped [pixel][element].
func (bf *Beamformer) ApertureMask() []bool {
	out := make([]bool, bf.Grid.Len()*bf.nn)
	for ti := range bf.tiles {
		t := &bf.tiles[ti]
		n := len(t.pix)
		for j := range bf.nn {
			for k := t.k0[j]; k < t.k1[j]; k++ {
				if t.w[j*n+int(k)] != 0 {
					out[int(t.pix[k])*bf.nn+j] = true
				}
			}
		}
	}
	return out
}
