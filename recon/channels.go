package recon

import (
	"fmt"
	"math"
	"runtime"
	"sync"

	"celerity/acq"
	"celerity/internal/dsp"
)

// Channels is channel data prepared for beamforming: complex baseband
// samples with iq(t) = a(t) exp(-j 2 pi FD t), a the analytic signal and t
// the absolute sample time T0 + n / FS, shape [event][element][sample].
type Channels struct {
	NE, NN, NS int
	FS, T0, FD float64
	Data       []complex64
}

// Row returns the samples of one event and element.
func (c *Channels) Row(e, j int) []complex64 {
	o := (e*c.NN + j) * c.NS
	return c.Data[o : o+c.NS : o+c.NS]
}

// Prepare turns an acquisition's channel data into baseband: RF is made
// analytic once (FFT method) and demodulated at the probe's centre
// frequency; IQ is used as it is, with its own demodulation frequency.
func Prepare(a *acq.Acquisition) (*Channels, error) {
	if err := a.ValidateHeader(); err != nil {
		return nil, err
	}
	c := &Channels{NE: a.NumEvents(), NN: a.NumElements(), NS: a.NumSamples, FS: a.SamplingRateHz, T0: a.StartTimeS}
	switch a.Kind {
	case acq.IQ:
		if len(a.IQ) != c.NE*c.NN*c.NS {
			return nil, fmt.Errorf("channel data holds %d samples, want %d", len(a.IQ), c.NE*c.NN*c.NS)
		}
		c.FD = a.DemodulationHz
		c.Data = a.IQ
		return c, nil
	case acq.RF:
		if len(a.RF) != c.NE*c.NN*c.NS {
			return nil, fmt.Errorf("channel data holds %d samples, want %d", len(a.RF), c.NE*c.NN*c.NS)
		}
	default:
		return nil, fmt.Errorf("unknown channel data kind")
	}
	c.FD = a.Probe.CenterFrequencyHz
	c.Data = make([]complex64, len(a.RF))
	rot := make([]complex64, c.NS)
	for n := range rot {
		t := c.T0 + float64(n)/c.FS
		s, co := math.Sincos(-2 * math.Pi * math.Mod(c.FD*t, 1))
		rot[n] = complex(float32(co), float32(s))
	}
	rows := c.NE * c.NN
	workers := runtime.GOMAXPROCS(0)
	var wg sync.WaitGroup
	for w := range workers {
		wg.Add(1)
		go func() {
			defer wg.Done()
			h := dsp.NewHilbert(c.NS)
			for r := w; r < rows; r += workers {
				dst := c.Data[r*c.NS : (r+1)*c.NS]
				h.Analytic(dst, a.RF[r*c.NS:(r+1)*c.NS])
				for n := range dst {
					dst[n] *= rot[n]
				}
			}
		}()
	}
	wg.Wait()
	return c, nil
}
