package sim

import (
	"fmt"
	"math"
	"math/rand/v2"
	"os"
	"path/filepath"

	"gopkg.in/yaml.v3"

	"celerity/acq"
	"celerity/internal/strictyaml"
	"celerity/speed/refspeed"
)

// ScenarioFormatV1 identifies scenario files.
const ScenarioFormatV1 = "celerity.scenario/1"

// Scenario is a simulation described in the units people type (mm, MHz, ns).
// See docs/scenario.md for the file format.
type Scenario struct {
	Description     string
	Seed            uint64
	Probe           acq.Probe
	SamplingRateHz  float64
	AssumedSpeedMPS float64
	DepthM          float64 // deepest point recorded

	Transmit Transmit

	Layers                []acq.Layer // one layer for a homogeneous medium
	AttenuationDBPerCmMHz float64

	// Screen: either explicit values or statistics to draw from.
	ScreenValuesS  []float64
	ScreenRMSS     float64
	ScreenCorrLenM float64

	Speckle    *SpeckleSpec
	Targets    [][2]float64
	TargetAmp  float64
	Inclusions []acq.Inclusion
	NoiseSNRDB *float64
	OutputIQ   bool
}

// SpeckleSpec is diffuse speckle in a region.
type SpeckleSpec struct {
	Region  Region
	Density float64 // scatterers per resolution cell
}

// TransmitKind names a sequence kind in a scenario.
type Transmit struct {
	Kind string // plane_waves, diverging, focused, synthetic_aperture

	AnglesDeg []float64    // plane waves
	Sources   [][2]float64 // diverging virtual sources, m
	FocusM    float64      // focused: focal depth
	LinesM    []float64    // focused: lateral positions
	FNumber   float64      // focused: transmit F-number
}

// Defaults.
const (
	DefaultAssumedSpeed = 1540.0
	DefaultTargetAmp    = 100.0
	DefaultDensity      = 10.0
)

// LoadScenario reads a scenario file.
func LoadScenario(path string) (*Scenario, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("scenario %s: %w", path, err)
	}
	defer f.Close()
	buf := make([]byte, 4<<20)
	n, _ := f.Read(buf)
	if n == len(buf) {
		return nil, fmt.Errorf("%s: larger than 4 MiB", path)
	}
	return ParseScenario(filepath.Base(path), buf[:n])
}

// ParseScenario parses scenario YAML; name is used in errors.
func ParseScenario(name string, data []byte) (*Scenario, error) {
	root, err := strictyaml.Parse(name, data)
	if err != nil {
		return nil, err
	}
	return parseScenario(root)
}

// ParseScenarioNode parses a scenario held in a YAML mapping node that is part
// of a larger document (a benchmark suite's base scenario with its
// variations): errors name file, prefix.field and the node's own lines.
func ParseScenarioNode(file, prefix string, n *yaml.Node) (*Scenario, error) {
	root, err := strictyaml.FromNode(file, prefix, n)
	if err != nil {
		return nil, err
	}
	return parseScenario(root)
}

func parseScenario(root *strictyaml.Map) (*Scenario, error) {
	s := &Scenario{}
	format, err := root.String("format")
	if err != nil {
		return nil, err
	}
	if format != ScenarioFormatV1 {
		return nil, root.Errorf("format", "unsupported format %q (this version reads %q)", format, ScenarioFormatV1)
	}
	if s.Description, _, err = root.OptString("description", ""); err != nil {
		return nil, err
	}
	seed, _, err := root.OptInt("seed", 1)
	if err != nil {
		return nil, err
	}
	if seed < 0 {
		return nil, root.Errorf("seed", "must not be negative")
	}
	s.Seed = uint64(seed)

	pm, err := root.Map("probe")
	if err != nil {
		return nil, err
	}
	if err := parseScenarioProbe(pm, &s.Probe); err != nil {
		return nil, err
	}
	fsMHz, ok, err := root.OptFloat("sampling_rate_mhz", 0)
	if err != nil {
		return nil, err
	}
	if ok {
		if !(fsMHz > 0 && fsMHz <= 1000) {
			return nil, root.Errorf("sampling_rate_mhz", "must be between 0 and 1000 MHz, got %g", fsMHz)
		}
		s.SamplingRateHz = fsMHz * 1e6
	} else {
		s.SamplingRateHz = 4 * s.Probe.CenterFrequencyHz
	}
	if s.SamplingRateHz < 2*s.Probe.CenterFrequencyHz*(1+s.Probe.FractionalBandwidth/2) {
		return nil, root.Errorf("sampling_rate_mhz", "%g MHz is below the Nyquist rate of the pulse band", s.SamplingRateHz/1e6)
	}
	if s.AssumedSpeedMPS, _, err = root.OptFloat("assumed_speed_mps", DefaultAssumedSpeed); err != nil {
		return nil, err
	}
	if !(s.AssumedSpeedMPS >= 1000 && s.AssumedSpeedMPS <= 2500) {
		return nil, root.Errorf("assumed_speed_mps", "must be between 1000 and 2500 m/s, got %g", s.AssumedSpeedMPS)
	}
	depth, err := root.Float("depth_mm")
	if err != nil {
		return nil, err
	}
	if !(depth > 0 && depth <= 500) {
		return nil, root.Errorf("depth_mm", "must be between 0 and 500 mm, got %g", depth)
	}
	s.DepthM = depth * 1e-3

	tm, err := root.Map("transmit")
	if err != nil {
		return nil, err
	}
	if err := parseTransmit(tm, s); err != nil {
		return nil, err
	}
	mm, err := root.Map("medium")
	if err != nil {
		return nil, err
	}
	if err := parseMedium(mm, s); err != nil {
		return nil, err
	}
	if sm, err := root.OptMap("screen"); err != nil {
		return nil, err
	} else if sm != nil {
		if err := parseScreen(sm, s); err != nil {
			return nil, err
		}
	}
	ph, err := root.Map("phantom")
	if err != nil {
		return nil, err
	}
	if err := parsePhantom(ph, s); err != nil {
		return nil, err
	}
	if nm, err := root.OptMap("noise"); err != nil {
		return nil, err
	} else if nm != nil {
		v, err := nm.Float("snr_db")
		if err != nil {
			return nil, err
		}
		if v < -40 || v > 200 {
			return nil, nm.Errorf("snr_db", "must be between -40 and 200 dB, got %g", v)
		}
		s.NoiseSNRDB = &v
		if err := nm.Done(); err != nil {
			return nil, err
		}
	}
	if om, err := root.OptMap("output"); err != nil {
		return nil, err
	} else if om != nil {
		k, _, err := om.OptString("kind", "rf")
		if err != nil {
			return nil, err
		}
		switch k {
		case "rf":
		case "iq":
			s.OutputIQ = true
		default:
			return nil, om.Errorf("kind", "must be rf or iq, got %q", k)
		}
		if err := om.Done(); err != nil {
			return nil, err
		}
	}
	if err := root.Done(); err != nil {
		return nil, err
	}
	return s, nil
}

func parseScenarioProbe(pm *strictyaml.Map, p *acq.Probe) error {
	if pm.Has("preset") {
		name, err := pm.String("preset")
		if err != nil {
			return err
		}
		pr, err := Preset(name)
		if err != nil {
			return pm.Errorf("preset", "%v", err)
		}
		*p = pr
		return pm.Done()
	}
	f0, err := pm.Float("center_frequency_mhz")
	if err != nil {
		return err
	}
	if !(f0 > 0 && f0 <= 100) {
		return pm.Errorf("center_frequency_mhz", "must be between 0 and 100 MHz, got %g", f0)
	}
	p.CenterFrequencyHz = f0 * 1e6
	if p.FractionalBandwidth, err = pm.Float("fractional_bandwidth"); err != nil {
		return err
	}
	if !(p.FractionalBandwidth > 0.05 && p.FractionalBandwidth <= 1.5) {
		return pm.Errorf("fractional_bandwidth", "must be between 0.05 and 1.5, got %g", p.FractionalBandwidth)
	}
	w, _, err := pm.OptFloat("element_width_mm", 0)
	if err != nil {
		return err
	}
	p.ElementWidthM = w * 1e-3
	count, err := pm.Int("count")
	if err != nil {
		return err
	}
	pitch, err := pm.Float("pitch_mm")
	if err != nil {
		return err
	}
	p.Count, p.PitchM = count, pitch*1e-3
	p.Geometry = acq.Linear
	if r, ok, err := pm.OptFloat("radius_mm", 0); err != nil {
		return err
	} else if ok {
		p.Geometry = acq.Convex
		p.RadiusM = r * 1e-3
	}
	if err := pm.Done(); err != nil {
		return err
	}
	if err := p.Validate(); err != nil {
		return pm.Errorf("", "%v", err)
	}
	return nil
}

func parseTransmit(tm *strictyaml.Map, s *Scenario) error {
	kinds := []string{"plane_waves", "diverging", "focused", "synthetic_aperture"}
	n := 0
	for _, k := range kinds {
		if tm.Has(k) {
			n++
			s.Transmit.Kind = k
		}
	}
	if n != 1 {
		return tm.Errorf("", "exactly one of plane_waves, diverging, focused or synthetic_aperture is required")
	}
	m, err := tm.Map(s.Transmit.Kind)
	if err != nil {
		return err
	}
	switch s.Transmit.Kind {
	case "plane_waves":
		if m.Has("angles_deg") {
			if s.Transmit.AnglesDeg, err = m.Floats("angles_deg", true); err != nil {
				return err
			}
		} else {
			count, err := m.Int("count")
			if err != nil {
				return err
			}
			if count < 1 || count > 1024 {
				return m.Errorf("count", "must be between 1 and 1024, got %d", count)
			}
			maxDeg, _, err := m.OptFloat("max_angle_deg", 0)
			if err != nil {
				return err
			}
			s.Transmit.AnglesDeg = acq.SpreadAngles(count, maxDeg)
		}
		if len(s.Transmit.AnglesDeg) == 0 {
			return m.Errorf("angles_deg", "must list at least one angle")
		}
		for i, a := range s.Transmit.AnglesDeg {
			if math.Abs(a) >= 60 {
				return m.Errorf("angles_deg", "angle %d (%g deg) must be within +/-60 deg", i, a)
			}
		}
	case "diverging":
		if m.Has("sources_mm") {
			pts, err := m.Points("sources_mm", true)
			if err != nil {
				return err
			}
			if len(pts) == 0 {
				return m.Errorf("sources_mm", "must list at least one virtual source")
			}
			for _, q := range pts {
				if q[1] >= 0 {
					return m.Errorf("sources_mm", "virtual sources must lie behind the array (z < 0), got z = %g mm", q[1])
				}
				s.Transmit.Sources = append(s.Transmit.Sources, [2]float64{q[0] * 1e-3, q[1] * 1e-3})
			}
		} else {
			count, err := m.Int("count")
			if err != nil {
				return err
			}
			if count < 1 || count > 1024 {
				return m.Errorf("count", "must be between 1 and 1024, got %d", count)
			}
			depth, err := m.Float("depth_mm")
			if err != nil {
				return err
			}
			if !(depth > 0) {
				return m.Errorf("depth_mm", "the distance of the sources behind the array must be positive")
			}
			span, _, err := m.OptFloat("span_mm", 0)
			if err != nil {
				return err
			}
			for _, x := range spread(count, span/2) {
				s.Transmit.Sources = append(s.Transmit.Sources, [2]float64{x * 1e-3, -depth * 1e-3})
			}
		}
	case "focused":
		fz, err := m.Float("depth_mm")
		if err != nil {
			return err
		}
		if !(fz > 0) {
			return m.Errorf("depth_mm", "the focal depth must be positive")
		}
		s.Transmit.FocusM = fz * 1e-3
		lines, err := m.Int("lines")
		if err != nil {
			return err
		}
		if lines < 1 || lines > 4096 {
			return m.Errorf("lines", "must be between 1 and 4096, got %d", lines)
		}
		if s.Transmit.FNumber, _, err = m.OptFloat("fnumber", 2); err != nil {
			return err
		}
		if !(s.Transmit.FNumber >= 0) {
			return m.Errorf("fnumber", "must not be negative")
		}
		half := s.Probe.Aperture() / 2 * 1e3
		span, _, err := m.OptFloat("span_mm", 2*half)
		if err != nil {
			return err
		}
		for _, x := range spread(lines, span/2) {
			s.Transmit.LinesM = append(s.Transmit.LinesM, x*1e-3)
		}
	case "synthetic_aperture":
	}
	if err := m.Done(); err != nil {
		return err
	}
	return tm.Done()
}

func spread(n int, half float64) []float64 {
	out := make([]float64, n)
	for i := range out {
		if n > 1 {
			out[i] = -half + 2*half*float64(i)/float64(n-1)
		}
	}
	return out
}

func parseMedium(mm *strictyaml.Map, s *Scenario) error {
	n := 0
	for _, k := range []string{"speed_mps", "water_temperature_c", "layers"} {
		if mm.Has(k) {
			n++
		}
	}
	if n != 1 {
		return mm.Errorf("", "exactly one of speed_mps, water_temperature_c or layers is required")
	}
	okSpeed := func(v float64) bool { return v >= 1000 && v <= 2500 }
	switch {
	case mm.Has("speed_mps"):
		v, err := mm.Float("speed_mps")
		if err != nil {
			return err
		}
		if !okSpeed(v) {
			return mm.Errorf("speed_mps", "must be between 1000 and 2500 m/s, got %g", v)
		}
		s.Layers = []acq.Layer{{SpeedMPS: v}}
	case mm.Has("water_temperature_c"):
		tc, err := mm.Float("water_temperature_c")
		if err != nil {
			return err
		}
		v, err := refspeed.Water(tc)
		if err != nil {
			return mm.Errorf("water_temperature_c", "%v", err)
		}
		s.Layers = []acq.Layer{{SpeedMPS: v}}
	default:
		lms, err := mm.Maps("layers", true)
		if err != nil {
			return err
		}
		if len(lms) == 0 {
			return mm.Errorf("layers", "must list at least one layer")
		}
		for i, lm := range lms {
			var l acq.Layer
			if l.SpeedMPS, err = lm.Float("speed_mps"); err != nil {
				return err
			}
			if !okSpeed(l.SpeedMPS) {
				return lm.Errorf("speed_mps", "must be between 1000 and 2500 m/s, got %g", l.SpeedMPS)
			}
			if i < len(lms)-1 {
				th, err := lm.Float("thickness_mm")
				if err != nil {
					return err
				}
				if !(th > 0) {
					return lm.Errorf("thickness_mm", "must be positive, got %g", th)
				}
				l.ThicknessM = th * 1e-3
			} else if lm.Has("thickness_mm") {
				return lm.Errorf("thickness_mm", "the last layer has no thickness (it extends downwards without end)")
			}
			if err := lm.Done(); err != nil {
				return err
			}
			s.Layers = append(s.Layers, l)
		}
	}
	var err error
	if s.AttenuationDBPerCmMHz, _, err = mm.OptFloat("attenuation_db_cm_mhz", 0); err != nil {
		return err
	}
	if s.AttenuationDBPerCmMHz < 0 || s.AttenuationDBPerCmMHz > 20 {
		return mm.Errorf("attenuation_db_cm_mhz", "must be between 0 and 20, got %g", s.AttenuationDBPerCmMHz)
	}
	return mm.Done()
}

func parseScreen(sm *strictyaml.Map, s *Scenario) error {
	if sm.Has("values_ns") {
		v, err := sm.Floats("values_ns", true)
		if err != nil {
			return err
		}
		if len(v) != s.Probe.NumElements() {
			return sm.Errorf("values_ns", "%d values for %d elements", len(v), s.Probe.NumElements())
		}
		for i := range v {
			if math.Abs(v[i]) > 1e5 {
				return sm.Errorf("values_ns", "value %d (%g ns) is beyond 100 us", i, v[i])
			}
			v[i] *= 1e-9
		}
		s.ScreenValuesS = v
		return sm.Done()
	}
	rms, err := sm.Float("rms_ns")
	if err != nil {
		return err
	}
	if !(rms >= 0 && rms <= 1000) {
		return sm.Errorf("rms_ns", "must be between 0 and 1000 ns, got %g", rms)
	}
	cl, err := sm.Float("correlation_length_mm")
	if err != nil {
		return err
	}
	if !(cl > 0 && cl <= 1000) {
		return sm.Errorf("correlation_length_mm", "must be between 0 and 1000 mm, got %g", cl)
	}
	s.ScreenRMSS, s.ScreenCorrLenM = rms*1e-9, cl*1e-3
	return sm.Done()
}

func parsePhantom(pm *strictyaml.Map, s *Scenario) error {
	if sm, err := pm.OptMap("speckle"); err != nil {
		return err
	} else if sm != nil {
		r, err := sm.Floats("region_mm", true)
		if err != nil {
			return err
		}
		if len(r) != 4 || !(r[1] > r[0] && r[3] > r[2] && r[2] > 0) {
			return sm.Errorf("region_mm", "must be [x0, x1, z0, z1] with x1 > x0 and z1 > z0 > 0 (mm)")
		}
		d, _, err := sm.OptFloat("density", DefaultDensity)
		if err != nil {
			return err
		}
		if !(d > 0 && d <= 1000) {
			return sm.Errorf("density", "scatterers per resolution cell must be between 0 and 1000, got %g", d)
		}
		s.Speckle = &SpeckleSpec{Region: Region{r[0] * 1e-3, r[1] * 1e-3, r[2] * 1e-3, r[3] * 1e-3}, Density: d}
		if err := sm.Done(); err != nil {
			return err
		}
	}
	if tm, err := pm.OptMap("targets"); err != nil {
		return err
	} else if tm != nil {
		pts, err := tm.Points("positions_mm", true)
		if err != nil {
			return err
		}
		for i, q := range pts {
			if !(q[1] > 0) {
				return tm.Errorf("positions_mm", "target %d must lie below the array (z > 0)", i)
			}
			s.Targets = append(s.Targets, [2]float64{q[0] * 1e-3, q[1] * 1e-3})
		}
		if s.TargetAmp, _, err = tm.OptFloat("amplitude", DefaultTargetAmp); err != nil {
			return err
		}
		if err := tm.Done(); err != nil {
			return err
		}
	}
	ims, err := pm.Maps("inclusions", false)
	if err != nil {
		return err
	}
	for _, im := range ims {
		c, err := im.Pair("center_mm")
		if err != nil {
			return err
		}
		r, err := im.Float("radius_mm")
		if err != nil {
			return err
		}
		if !(r > 0) {
			return im.Errorf("radius_mm", "must be positive")
		}
		cdb, err := im.Float("contrast_db")
		if err != nil {
			return err
		}
		if cdb < -200 || cdb > 60 {
			return im.Errorf("contrast_db", "must be between -200 and 60 dB, got %g", cdb)
		}
		if err := im.Done(); err != nil {
			return err
		}
		s.Inclusions = append(s.Inclusions, acq.Inclusion{CenterM: [2]float64{c[0] * 1e-3, c[1] * 1e-3}, RadiusM: r * 1e-3, ContrastDB: cdb})
	}
	if s.Speckle == nil && len(s.Targets) == 0 {
		return pm.Errorf("", "needs speckle, targets or both")
	}
	if len(s.Inclusions) > 0 && s.Speckle == nil {
		return pm.Errorf("inclusions", "inclusions modulate speckle: add a speckle region")
	}
	return pm.Done()
}

// Build turns the scenario into a simulation configuration and its truth.
// The seed drives the phantom, the screen and the noise.
func (s *Scenario) Build() (*Config, *acq.Truth, error) {
	cfg := &Config{
		Description:     s.Description,
		Probe:           s.Probe,
		AssumedSpeedMPS: s.AssumedSpeedMPS,
		SamplingRateHz:  s.SamplingRateHz,
		Medium:          Medium{Layers: s.Layers, AttenuationDBPerCmMHz: s.AttenuationDBPerCmMHz},
		NoiseSNRDB:      s.NoiseSNRDB,
		Seed:            s.Seed,
	}
	p := &cfg.Probe
	switch s.Transmit.Kind {
	case "plane_waves":
		cfg.Events = acq.PlaneWaveSequence(p, s.Transmit.AnglesDeg, s.AssumedSpeedMPS)
	case "diverging":
		cfg.Events = acq.DivergingSequence(p, s.Transmit.Sources, s.AssumedSpeedMPS)
	case "focused":
		cfg.Events = acq.FocusedSequence(p, s.Transmit.LinesM, s.Transmit.FocusM, s.Transmit.FNumber, s.AssumedSpeedMPS)
	case "synthetic_aperture":
		cfg.Events = acq.SyntheticApertureSequence(p)
	default:
		return nil, nil, fmt.Errorf("scenario: unknown transmit kind %q", s.Transmit.Kind)
	}
	// Record from t = 0 to the two-way time of the deepest point at the
	// slowest speed, plus the longest firing delay and the pulse length.
	maxDelay := 0.0
	for _, ev := range cfg.Events {
		for _, d := range ev.Delays {
			maxDelay = math.Max(maxDelay, d)
		}
	}
	pulse := Pulse{CenterHz: p.CenterFrequencyHz, Bandwidth: p.FractionalBandwidth}
	vmin := cfg.Medium.MinSpeed()
	halfAp := p.Aperture() / 2
	tEnd := (s.DepthM+math.Hypot(s.DepthM, 2*halfAp))/vmin + maxDelay + 2*pulse.HalfLength()
	cfg.NumSamples = int(math.Ceil(tEnd * s.SamplingRateHz))

	truth := &acq.Truth{Seed: s.Seed, Description: s.Description, NoiseSNRDB: s.NoiseSNRDB,
		AttenuationDBPerCmMHz: s.AttenuationDBPerCmMHz}
	if len(s.Layers) == 1 {
		truth.SpeedMPS = s.Layers[0].SpeedMPS
	} else {
		truth.Layers = s.Layers
	}
	// Independent streams for phantom and screen; Simulate draws the noise.
	rngPhantom := rand.New(rand.NewPCG(s.Seed, 0x7068616e746f6d))
	rngScreen := rand.New(rand.NewPCG(s.Seed, 0x73637265656e))
	els := p.Elements()
	switch {
	case s.ScreenValuesS != nil:
		cfg.Screen = s.ScreenValuesS
		truth.Screen = &acq.Screen{DelaysS: s.ScreenValuesS}
	case s.ScreenRMSS > 0:
		xs, zs := make([]float64, len(els)), make([]float64, len(els))
		for i, e := range els {
			xs[i], zs[i] = e.X, e.Z
		}
		scr, err := DrawScreen(rngScreen, ScreenPositions(xs, zs), s.ScreenRMSS, s.ScreenCorrLenM)
		if err != nil {
			return nil, nil, err
		}
		cfg.Screen = scr
		truth.Screen = &acq.Screen{DelaysS: scr, RMSS: s.ScreenRMSS, CorrelationLengthM: s.ScreenCorrLenM}
	}
	var scat []Scatterer
	if s.Speckle != nil {
		lat, ax := ResolutionCell(pulse, cfg.Medium.MeanSpeed(s.Speckle.Region.Z1))
		sp, err := Speckle(rngPhantom, s.Speckle.Region, s.Speckle.Density, lat*ax)
		if err != nil {
			return nil, nil, err
		}
		scat = ApplyInclusions(sp, s.Inclusions)
	}
	for _, t := range s.Targets {
		scat = append(scat, Scatterer{X: t[0], Z: t[1], Amp: s.TargetAmp})
	}
	sortByDepth(scat)
	cfg.Scatterers = scat
	truth.TargetsM = s.Targets
	truth.Inclusions = s.Inclusions
	return cfg, truth, nil
}
