package acq

import (
	"fmt"
	"math"
)

// DataKind is the kind of channel data.
type DataKind int

// Channel data kinds.
const (
	RF DataKind = iota + 1 // real float32 radio-frequency samples
	IQ                     // complex64 baseband samples, iq(t) = a(t) exp(-j 2 pi fd t)
)

func (k DataKind) String() string {
	switch k {
	case RF:
		return "rf"
	case IQ:
		return "iq"
	}
	return "unknown"
}

// Label is the informative description of an event. At most one field is set.
// A label never overrides the firing delays.
type Label struct {
	PlaneWaveDeg   *float64
	VirtualSourceM *[2]float64
	SingleElement  *int
}

// IsZero reports whether no label is set.
func (l Label) IsZero() bool {
	return l.PlaneWaveDeg == nil && l.VirtualSourceM == nil && l.SingleElement == nil
}

// String describes the label, e.g. "plane wave -10 deg".
func (l Label) String() string {
	switch {
	case l.PlaneWaveDeg != nil:
		return fmt.Sprintf("plane wave %g deg", *l.PlaneWaveDeg)
	case l.VirtualSourceM != nil:
		return fmt.Sprintf("virtual source (%g, %g) mm", l.VirtualSourceM[0]*1e3, l.VirtualSourceM[1]*1e3)
	case l.SingleElement != nil:
		return fmt.Sprintf("single element %d", *l.SingleElement)
	}
	return ""
}

// validate checks label i of an acquisition with n elements against the
// ranges the manifest reader accepts, so that a saved label always reads back.
func (l Label) validate(i, n int) error {
	set := 0
	if l.PlaneWaveDeg != nil {
		set++
		if v := *l.PlaneWaveDeg; !(math.Abs(v) < 90) {
			return fmt.Errorf("transmit.labels[%d].plane_wave_deg: must be between -90 and 90, got %g", i, v)
		}
	}
	if l.VirtualSourceM != nil {
		set++
		for k, v := range l.VirtualSourceM {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return fmt.Errorf("transmit.labels[%d].virtual_source_m[%d]: must be finite, got %g", i, k, v)
			}
		}
	}
	if l.SingleElement != nil {
		set++
		if k := *l.SingleElement; k < 0 || k >= n {
			return fmt.Errorf("transmit.labels[%d].single_element: %d is outside 0..%d", i, k, n-1)
		}
	}
	if set > 1 {
		return fmt.Errorf("transmit.labels[%d]: a label has exactly one of plane_wave_deg, virtual_source_m or single_element", i)
	}
	return nil
}

// PlaneWaveLabel returns a plane-wave label.
func PlaneWaveLabel(deg float64) Label { return Label{PlaneWaveDeg: &deg} }

// VirtualSourceLabel returns a virtual-source label (z < 0 diverging, z > 0 focused).
func VirtualSourceLabel(x, z float64) Label { return Label{VirtualSourceM: &[2]float64{x, z}} }

// SingleElementLabel returns a single-element label.
func SingleElementLabel(k int) Label { return Label{SingleElement: &k} }

// Event is one transmit event: what the scanner fired.
type Event struct {
	// Delays are the per-element firing delays in s, relative to the event's t = 0.
	Delays []float64
	// Weights are the per-element transmit weights; 0 means the element is silent.
	Weights []float64
	Label   Label
}

// Firing returns the indices of the elements with a non-zero weight.
func (e *Event) Firing() []int {
	var out []int
	for i, w := range e.Weights {
		if w != 0 {
			out = append(out, i)
		}
	}
	return out
}

// Acquisition is one recorded sequence of transmit events and the echoes each
// element received.
type Acquisition struct {
	Description     string
	Probe           Probe
	SamplingRateHz  float64
	StartTimeS      float64
	AssumedSpeedMPS float64
	Kind            DataKind
	// DemodulationHz is the IQ demodulation frequency (IQ data only).
	DemodulationHz float64
	Events         []Event
	// NumSamples is the number of time samples per channel.
	NumSamples int
	// RF holds float32 samples [event][element][sample] in C order (RF kind).
	RF []float32
	// IQ holds complex64 samples [event][element][sample] in C order (IQ kind).
	IQ []complex64
}

// NumEvents returns the number of transmit events.
func (a *Acquisition) NumEvents() int { return len(a.Events) }

// NumElements returns the number of probe elements.
func (a *Acquisition) NumElements() int { return a.Probe.NumElements() }

// Shape returns the channel-data shape [events, elements, samples].
func (a *Acquisition) Shape() [3]int {
	return [3]int{a.NumEvents(), a.NumElements(), a.NumSamples}
}

// RFChannel returns the RF samples of one event and element (RF kind).
func (a *Acquisition) RFChannel(event, element int) []float32 {
	o := (event*a.NumElements() + element) * a.NumSamples
	return a.RF[o : o+a.NumSamples : o+a.NumSamples]
}

// IQChannel returns the IQ samples of one event and element (IQ kind).
func (a *Acquisition) IQChannel(event, element int) []complex64 {
	o := (event*a.NumElements() + element) * a.NumSamples
	return a.IQ[o : o+a.NumSamples : o+a.NumSamples]
}

// SampleTime returns the time of sample n in s.
func (a *Acquisition) SampleTime(n float64) float64 {
	return a.StartTimeS + n/a.SamplingRateHz
}

// Duration returns the recorded time span of one channel in s.
func (a *Acquisition) Duration() float64 {
	return float64(a.NumSamples) / a.SamplingRateHz
}

// Limits on sizes accepted by Validate and the loader.
const (
	MaxEvents  = 1 << 16
	MaxSamples = 1 << 24
	// DefaultMaxBytes is the default memory cap for channel data (8 GiB).
	DefaultMaxBytes int64 = 8 << 30
)

// ValidateHeader checks everything but the channel data itself: probe,
// sampling, speeds, events and the consistency of their shapes.
func (a *Acquisition) ValidateHeader() error {
	if err := a.Probe.Validate(); err != nil {
		return err
	}
	if !(a.SamplingRateHz > 0) || math.IsInf(a.SamplingRateHz, 0) || a.SamplingRateHz > 1e11 {
		return fmt.Errorf("sampling_rate_hz: must be positive and at most 1e11, got %g", a.SamplingRateHz)
	}
	if math.IsNaN(a.StartTimeS) || math.IsInf(a.StartTimeS, 0) || math.Abs(a.StartTimeS) > 1 {
		return fmt.Errorf("start_time_s: must be finite and within 1 s, got %g", a.StartTimeS)
	}
	if !(a.AssumedSpeedMPS >= 100 && a.AssumedSpeedMPS <= 10000) {
		return fmt.Errorf("assumed_speed_mps: must be between 100 and 10000 m/s, got %g", a.AssumedSpeedMPS)
	}
	switch a.Kind {
	case RF:
	case IQ:
		if !(a.DemodulationHz >= 0) || math.IsInf(a.DemodulationHz, 0) || a.DemodulationHz > 1e11 {
			return fmt.Errorf("channels.demodulation_frequency_hz: must be finite and non-negative, got %g", a.DemodulationHz)
		}
	default:
		return fmt.Errorf("channels.kind: must be rf or iq")
	}
	ne := len(a.Events)
	if ne < 1 || ne > MaxEvents {
		return fmt.Errorf("transmit: must hold between 1 and %d events, got %d", MaxEvents, ne)
	}
	if a.NumSamples < 1 || a.NumSamples > MaxSamples {
		return fmt.Errorf("channels.file: samples per channel must be between 1 and %d, got %d", MaxSamples, a.NumSamples)
	}
	n := a.NumElements()
	for i, ev := range a.Events {
		if len(ev.Delays) != n {
			return fmt.Errorf("transmit.delays_file: event %d has %d delays for %d elements", i, len(ev.Delays), n)
		}
		if len(ev.Weights) != n {
			return fmt.Errorf("transmit.weights_file: event %d has %d weights for %d elements", i, len(ev.Weights), n)
		}
		any := false
		for k, d := range ev.Delays {
			if math.IsNaN(d) || math.IsInf(d, 0) || math.Abs(d) > 1e-2 {
				return fmt.Errorf("transmit.delays_file: event %d element %d: delay must be finite and within 10 ms, got %g", i, k, d)
			}
			w := ev.Weights[k]
			if math.IsNaN(w) || math.IsInf(w, 0) {
				return fmt.Errorf("transmit.weights_file: event %d element %d: weight must be finite, got %g", i, k, w)
			}
			if w != 0 {
				any = true
			}
		}
		if !any {
			return fmt.Errorf("transmit.weights_file: event %d fires no element (all weights are 0)", i)
		}
		if err := ev.Label.validate(i, n); err != nil {
			return err
		}
	}
	return nil
}

// Validate checks the header and that the channel data matches it and is finite.
func (a *Acquisition) Validate() error {
	if err := a.ValidateHeader(); err != nil {
		return err
	}
	want := a.NumEvents() * a.NumElements() * a.NumSamples
	switch a.Kind {
	case RF:
		if len(a.RF) != want {
			return fmt.Errorf("channels.file: holds %d samples, shape %v needs %d", len(a.RF), a.Shape(), want)
		}
		if i := firstNonFinite32(a.RF); i >= 0 {
			return fmt.Errorf("channels.file: sample %s is not finite", a.index(i))
		}
	case IQ:
		if len(a.IQ) != want {
			return fmt.Errorf("channels.file: holds %d samples, shape %v needs %d", len(a.IQ), a.Shape(), want)
		}
		for i, v := range a.IQ {
			if !finite32(real(v)) || !finite32(imag(v)) {
				return fmt.Errorf("channels.file: sample %s is not finite", a.index(i))
			}
		}
	}
	return nil
}

func (a *Acquisition) index(i int) string {
	s := a.NumSamples
	n := a.NumElements()
	return fmt.Sprintf("[%d][%d][%d]", i/(n*s), (i/s)%n, i%s)
}

func finite32(v float32) bool {
	return !math.IsNaN(float64(v)) && !math.IsInf(float64(v), 0)
}

func firstNonFinite32(v []float32) int {
	for i, x := range v {
		// x-x is NaN for NaN and ±Inf, 0 otherwise.
		if x-x != 0 {
			return i
		}
	}
	return -1
}
