package acq

import (
	"errors"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"

	"celerity/internal/atomicfile"
	"celerity/internal/npy"
	"celerity/internal/strictyaml"
)

// File names and format identifiers of the acquisition folder.
const (
	ManifestName = "acquisition.yaml"
	FormatV1     = "celerity.acquisition/1"
	channelsName = "channels.npy"
	delaysName   = "firing_delays.npy"
	weightsName  = "firing_weights.npy"
	maxManifest  = 8 << 20
)

// LoadOptions tune Load.
type LoadOptions struct {
	// MaxBytes caps the channel data held in memory; 0 means DefaultMaxBytes.
	MaxBytes int64
	// HeaderOnly reads the manifest and transmit arrays and checks the channel
	// file's header, but does not read the channel samples.
	HeaderOnly bool
}

// Load reads and validates the acquisition folder dir.
func Load(dir string) (*Acquisition, error) { return LoadWith(dir, LoadOptions{}) }

// LoadWith reads and validates the acquisition folder dir with options.
func LoadWith(dir string, opt LoadOptions) (*Acquisition, error) {
	if opt.MaxBytes <= 0 {
		opt.MaxBytes = DefaultMaxBytes
	}
	st, err := os.Stat(dir)
	if err != nil {
		return nil, fmt.Errorf("acquisition folder %s: %w", dir, notExistHint(err))
	}
	if !st.IsDir() {
		return nil, fmt.Errorf("acquisition folder %s: not a folder", dir)
	}
	mpath := filepath.Join(dir, ManifestName)
	data, err := readSmall(mpath, maxManifest)
	if err != nil {
		return nil, err
	}
	a, files, err := parseManifest(mpath, data)
	if err != nil {
		return nil, err
	}
	n := a.NumElements()

	// Transmit delays [E][N] float64.
	dpath := filepath.Join(dir, files.delays)
	delays, hd, err := readFloat64Array(dpath, "transmit.delays_file", 2, opt.MaxBytes)
	if err != nil {
		return nil, err
	}
	ne := hd.Shape[0]
	if hd.Shape[1] != n {
		return nil, fmt.Errorf("%s (transmit.delays_file): shape %v: second dimension must be the %d elements of the probe", dpath, hd.Shape, n)
	}
	if ne < 1 || ne > MaxEvents {
		return nil, fmt.Errorf("%s (transmit.delays_file): shape %v: must hold between 1 and %d events", dpath, hd.Shape, MaxEvents)
	}
	var weights []float64
	if files.weights != "" {
		wpath := filepath.Join(dir, files.weights)
		var hw npy.Header
		weights, hw, err = readFloat64Array(wpath, "transmit.weights_file", 2, opt.MaxBytes)
		if err != nil {
			return nil, err
		}
		if hw.Shape[0] != ne || hw.Shape[1] != n {
			return nil, fmt.Errorf("%s (transmit.weights_file): shape %v disagrees with the delays' %v", wpath, hw.Shape, hd.Shape)
		}
	}
	if files.labels != nil && len(files.labels) != ne {
		return nil, fmt.Errorf("%s: transmit.labels: %d labels for %d events in %s", mpath, len(files.labels), ne, files.delays)
	}
	a.Events = make([]Event, ne)
	for i := range a.Events {
		ev := &a.Events[i]
		ev.Delays = delays[i*n : (i+1)*n : (i+1)*n]
		if weights != nil {
			ev.Weights = weights[i*n : (i+1)*n : (i+1)*n]
		} else {
			ev.Weights = ones(n)
		}
		if files.labels != nil {
			ev.Label = files.labels[i]
		}
	}

	// Channel data: check the header before allocating.
	cpath := filepath.Join(dir, files.channels)
	f, hc, err := npy.Open(cpath, opt.MaxBytes)
	if err != nil {
		return nil, fmt.Errorf("%s (channels.file): %w", cpath, notExistHint(err))
	}
	defer f.Close()
	if len(hc.Shape) != 3 {
		return nil, fmt.Errorf("%s (channels.file): shape %v: must have 3 dimensions [event][element][sample]", cpath, hc.Shape)
	}
	if hc.Shape[0] != ne || hc.Shape[1] != n {
		return nil, fmt.Errorf("%s (channels.file): shape %v disagrees with %d events (from %s) and %d elements (from the probe)", cpath, hc.Shape, ne, files.delays, n)
	}
	a.NumSamples = hc.Shape[2]
	switch {
	case a.Kind == RF && hc.DType != npy.Float32:
		return nil, fmt.Errorf("%s (channels.file): dtype %s, but kind rf needs float32 (<f4)", cpath, hc.DType)
	case a.Kind == IQ && hc.DType != npy.Complex64:
		return nil, fmt.Errorf("%s (channels.file): dtype %s, but kind iq needs complex64 (<c8)", cpath, hc.DType)
	}
	if err := a.ValidateHeader(); err != nil {
		return nil, wrapField(dir, mpath, files, err)
	}
	if opt.HeaderOnly {
		return a, nil
	}
	cnt := int(hc.Len())
	switch a.Kind {
	case RF:
		a.RF, err = npy.ReadFloat32(f, nil, cnt)
	case IQ:
		a.IQ, err = npy.ReadComplex64(f, nil, cnt)
	}
	if err != nil {
		return nil, fmt.Errorf("%s (channels.file): %w", cpath, err)
	}
	if err := a.Validate(); err != nil {
		return nil, wrapField(dir, mpath, files, err)
	}
	return a, nil
}

// wrapField prefixes a validation error with the file it concerns: array
// fields name their array file, the rest the manifest.
func wrapField(dir, mpath string, files manifestFiles, err error) error {
	msg := err.Error()
	for _, f := range []struct{ key, name string }{
		{"channels.file", files.channels},
		{"transmit.delays_file", files.delays},
		{"transmit.weights_file", files.weights},
	} {
		if f.name != "" && strings.HasPrefix(msg, f.key) {
			return fmt.Errorf("%s: %w", filepath.Join(dir, f.name), err)
		}
	}
	return fmt.Errorf("%s: %w", mpath, err)
}

func notExistHint(err error) error {
	if errors.Is(err, os.ErrNotExist) {
		return errors.New("file or folder not found")
	}
	return err
}

func readSmall(path string, max int64) ([]byte, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, notExistHint(err))
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, max+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if int64(len(b)) > max {
		return nil, fmt.Errorf("%s: larger than %d bytes", path, max)
	}
	return b, nil
}

// readFloat64Array reads a float64 array of the given rank, checking for
// non-finite values.
func readFloat64Array(path, field string, rank int, maxBytes int64) ([]float64, npy.Header, error) {
	f, h, err := npy.Open(path, maxBytes)
	if err != nil {
		return nil, h, fmt.Errorf("%s (%s): %w", path, field, notExistHint(err))
	}
	defer f.Close()
	if h.DType != npy.Float64 {
		return nil, h, fmt.Errorf("%s (%s): dtype %s, want float64 (<f8)", path, field, h.DType)
	}
	if len(h.Shape) != rank {
		return nil, h, fmt.Errorf("%s (%s): shape %v: want %d dimensions", path, field, h.Shape, rank)
	}
	v, err := npy.ReadFloat64(f, nil, int(h.Len()))
	if err != nil {
		return nil, h, fmt.Errorf("%s (%s): %w", path, field, err)
	}
	for i, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return nil, h, fmt.Errorf("%s (%s): value %d is not finite (%g)", path, field, i, x)
		}
	}
	return v, h, nil
}

type manifestFiles struct {
	channels, delays, weights string
	labels                    []Label
}

func localName(m *strictyaml.Map, key string, required bool) (string, error) {
	var s string
	var ok bool
	var err error
	if required {
		s, err = m.String(key)
		ok = err == nil
	} else {
		s, ok, err = m.OptString(key, "")
	}
	if err != nil || !ok {
		return "", err
	}
	if s == "" || !filepath.IsLocal(s) || strings.ContainsAny(s, "\x00") {
		return "", m.Errorf(key, "must name a file inside the acquisition folder, got %q", s)
	}
	return s, nil
}

func parseManifest(path string, data []byte) (*Acquisition, manifestFiles, error) {
	var files manifestFiles
	root, err := strictyaml.Parse(path, data)
	if err != nil {
		return nil, files, err
	}
	format, err := root.String("format")
	if err != nil {
		return nil, files, err
	}
	if format != FormatV1 {
		return nil, files, root.Errorf("format", "unsupported format %q (this version reads %q)", format, FormatV1)
	}
	a := &Acquisition{}
	if a.Description, _, err = root.OptString("description", ""); err != nil {
		return nil, files, err
	}
	pm, err := root.Map("probe")
	if err != nil {
		return nil, files, err
	}
	if err := parseProbe(pm, &a.Probe); err != nil {
		return nil, files, err
	}
	if a.SamplingRateHz, err = root.Float("sampling_rate_hz"); err != nil {
		return nil, files, err
	}
	if a.SamplingRateHz <= 0 {
		return nil, files, root.Errorf("sampling_rate_hz", "must be positive, got %g", a.SamplingRateHz)
	}
	if a.StartTimeS, _, err = root.OptFloat("start_time_s", 0); err != nil {
		return nil, files, err
	}
	if a.AssumedSpeedMPS, err = root.Float("assumed_speed_mps"); err != nil {
		return nil, files, err
	}
	if a.AssumedSpeedMPS < 100 || a.AssumedSpeedMPS > 10000 {
		return nil, files, root.Errorf("assumed_speed_mps", "must be between 100 and 10000 m/s, got %g", a.AssumedSpeedMPS)
	}
	cm, err := root.Map("channels")
	if err != nil {
		return nil, files, err
	}
	if files.channels, err = localName(cm, "file", true); err != nil {
		return nil, files, err
	}
	kind, err := cm.String("kind")
	if err != nil {
		return nil, files, err
	}
	switch kind {
	case "rf":
		a.Kind = RF
		if cm.Has("demodulation_frequency_hz") {
			return nil, files, cm.Errorf("demodulation_frequency_hz", "applies to kind iq only; remove it for rf data")
		}
	case "iq":
		a.Kind = IQ
		if a.DemodulationHz, err = cm.Float("demodulation_frequency_hz"); err != nil {
			return nil, files, err
		}
		if a.DemodulationHz < 0 {
			return nil, files, cm.Errorf("demodulation_frequency_hz", "must not be negative, got %g", a.DemodulationHz)
		}
	default:
		return nil, files, cm.Errorf("kind", "must be rf or iq, got %q", kind)
	}
	if err := cm.Done(); err != nil {
		return nil, files, err
	}
	tm, err := root.Map("transmit")
	if err != nil {
		return nil, files, err
	}
	if files.delays, err = localName(tm, "delays_file", true); err != nil {
		return nil, files, err
	}
	if files.weights, err = localName(tm, "weights_file", false); err != nil {
		return nil, files, err
	}
	if tm.Has("labels") {
		lms, err := tm.Maps("labels", true)
		if err != nil {
			return nil, files, err
		}
		files.labels = make([]Label, len(lms))
		for i, lm := range lms {
			if files.labels[i], err = parseLabel(lm); err != nil {
				return nil, files, err
			}
		}
	}
	if err := tm.Done(); err != nil {
		return nil, files, err
	}
	if err := root.Done(); err != nil {
		return nil, files, err
	}
	return a, files, nil
}

func parseProbe(pm *strictyaml.Map, p *Probe) error {
	var err error
	if p.CenterFrequencyHz, err = pm.Float("center_frequency_hz"); err != nil {
		return err
	}
	if p.CenterFrequencyHz <= 0 {
		return pm.Errorf("center_frequency_hz", "must be positive, got %g", p.CenterFrequencyHz)
	}
	if p.FractionalBandwidth, _, err = pm.OptFloat("fractional_bandwidth", 0); err != nil {
		return err
	}
	if p.FractionalBandwidth < 0 || p.FractionalBandwidth > 2 {
		return pm.Errorf("fractional_bandwidth", "must be between 0 and 2, got %g", p.FractionalBandwidth)
	}
	if p.ElementWidthM, _, err = pm.OptFloat("element_width_m", 0); err != nil {
		return err
	}
	if p.ElementWidthM < 0 {
		return pm.Errorf("element_width_m", "must not be negative, got %g", p.ElementWidthM)
	}
	nGeom := 0
	for _, k := range []string{"linear", "convex", "elements_m"} {
		if pm.Has(k) {
			nGeom++
		}
	}
	if nGeom != 1 {
		return pm.Errorf("", "exactly one of linear, convex or elements_m is required, found %d", nGeom)
	}
	switch {
	case pm.Has("linear"), pm.Has("convex"):
		key := "linear"
		p.Geometry = Linear
		if pm.Has("convex") {
			key, p.Geometry = "convex", Convex
		}
		g, err := pm.Map(key)
		if err != nil {
			return err
		}
		if p.Count, err = g.Int("count"); err != nil {
			return err
		}
		if p.Count < 1 || p.Count > MaxElements {
			return g.Errorf("count", "must be between 1 and %d, got %d", MaxElements, p.Count)
		}
		if p.PitchM, err = g.Float("pitch_m"); err != nil {
			return err
		}
		if p.PitchM <= 0 {
			return g.Errorf("pitch_m", "must be positive, got %g", p.PitchM)
		}
		if p.Geometry == Convex {
			if p.RadiusM, err = g.Float("radius_m"); err != nil {
				return err
			}
			if p.RadiusM <= 0 {
				return g.Errorf("radius_m", "must be positive, got %g", p.RadiusM)
			}
		}
		if err := g.Done(); err != nil {
			return err
		}
	default:
		p.Geometry = Explicit
		if p.Positions, err = pm.Points("elements_m", true); err != nil {
			return err
		}
		if len(p.Positions) == 0 {
			return pm.Errorf("elements_m", "must list at least one element")
		}
	}
	if err := pm.Done(); err != nil {
		return err
	}
	if err := p.Validate(); err != nil {
		return fmt.Errorf("%s: %w", pm.File(), err)
	}
	return nil
}

func parseLabel(lm *strictyaml.Map) (Label, error) {
	var l Label
	keys := lm.Keys()
	if len(keys) != 1 {
		return l, lm.Errorf("", "a label has exactly one of plane_wave_deg, virtual_source_m or single_element")
	}
	switch keys[0] {
	case "plane_wave_deg":
		v, err := lm.Float("plane_wave_deg")
		if err != nil {
			return l, err
		}
		if math.Abs(v) >= 90 {
			return l, lm.Errorf("plane_wave_deg", "must be between -90 and 90, got %g", v)
		}
		l.PlaneWaveDeg = &v
	case "virtual_source_m":
		v, err := lm.Pair("virtual_source_m")
		if err != nil {
			return l, err
		}
		l.VirtualSourceM = &v
	case "single_element":
		v, err := lm.Int("single_element")
		if err != nil {
			return l, err
		}
		l.SingleElement = &v
	}
	return l, lm.Done()
}

func ones(n int) []float64 {
	v := make([]float64, n)
	for i := range v {
		v[i] = 1
	}
	return v
}

// fmtFloat formats a float for YAML so that it reads back to the same value.
func fmtFloat(v float64) string {
	s := strconv.FormatFloat(v, 'g', -1, 64)
	if !strings.ContainsAny(s, ".eEn") {
		s += ".0"
	}
	return s
}

func quote(s string) string { return strconv.Quote(s) }

// manifestYAML renders the acquisition.yaml of a.
func manifestYAML(a *Acquisition, hasWeights bool) string {
	var b strings.Builder
	fmt.Fprintf(&b, "format: %s\n", FormatV1)
	if a.Description != "" {
		fmt.Fprintf(&b, "description: %s\n", quote(a.Description))
	}
	p := &a.Probe
	b.WriteString("probe:\n")
	fmt.Fprintf(&b, "  center_frequency_hz: %s\n", fmtFloat(p.CenterFrequencyHz))
	if p.FractionalBandwidth > 0 {
		fmt.Fprintf(&b, "  fractional_bandwidth: %s\n", fmtFloat(p.FractionalBandwidth))
	}
	if p.ElementWidthM > 0 {
		fmt.Fprintf(&b, "  element_width_m: %s\n", fmtFloat(p.ElementWidthM))
	}
	switch p.Geometry {
	case Linear:
		fmt.Fprintf(&b, "  linear: {count: %d, pitch_m: %s}\n", p.Count, fmtFloat(p.PitchM))
	case Convex:
		fmt.Fprintf(&b, "  convex: {count: %d, pitch_m: %s, radius_m: %s}\n", p.Count, fmtFloat(p.PitchM), fmtFloat(p.RadiusM))
	case Explicit:
		b.WriteString("  elements_m:\n")
		for _, q := range p.Positions {
			fmt.Fprintf(&b, "    - [%s, %s]\n", fmtFloat(q[0]), fmtFloat(q[1]))
		}
	}
	fmt.Fprintf(&b, "sampling_rate_hz: %s\n", fmtFloat(a.SamplingRateHz))
	fmt.Fprintf(&b, "start_time_s: %s\n", fmtFloat(a.StartTimeS))
	fmt.Fprintf(&b, "assumed_speed_mps: %s\n", fmtFloat(a.AssumedSpeedMPS))
	b.WriteString("channels:\n")
	fmt.Fprintf(&b, "  file: %s\n", channelsName)
	fmt.Fprintf(&b, "  kind: %s\n", a.Kind)
	if a.Kind == IQ {
		fmt.Fprintf(&b, "  demodulation_frequency_hz: %s\n", fmtFloat(a.DemodulationHz))
	}
	b.WriteString("transmit:\n")
	fmt.Fprintf(&b, "  delays_file: %s\n", delaysName)
	if hasWeights {
		fmt.Fprintf(&b, "  weights_file: %s\n", weightsName)
	}
	labelled := false
	for _, ev := range a.Events {
		if !ev.Label.IsZero() {
			labelled = true
		}
	}
	if labelled {
		b.WriteString("  labels:\n")
		for _, ev := range a.Events {
			l := ev.Label
			switch {
			case l.PlaneWaveDeg != nil:
				fmt.Fprintf(&b, "    - {plane_wave_deg: %s}\n", fmtFloat(*l.PlaneWaveDeg))
			case l.VirtualSourceM != nil:
				fmt.Fprintf(&b, "    - {virtual_source_m: [%s, %s]}\n", fmtFloat(l.VirtualSourceM[0]), fmtFloat(l.VirtualSourceM[1]))
			case l.SingleElement != nil:
				fmt.Fprintf(&b, "    - {single_element: %d}\n", *l.SingleElement)
			default:
				b.WriteString("    - {}\n")
			}
		}
	}
	return b.String()
}

// Save writes a (and truth t, if not nil) as a new acquisition folder at dir.
// The folder is built under a temporary name and moved into place when
// complete; an existing dir is replaced only with force.
func Save(dir string, a *Acquisition, t *Truth, force bool) error {
	if err := a.Validate(); err != nil {
		return fmt.Errorf("save %s: %w", dir, err)
	}
	if t != nil {
		if err := t.Validate(a.NumElements()); err != nil {
			return fmt.Errorf("save %s: %w", dir, err)
		}
	}
	for _, ev := range a.Events {
		if l := ev.Label; l.IsZero() {
			for _, ev2 := range a.Events {
				if !ev2.Label.IsZero() {
					return fmt.Errorf("save %s: transmit.labels: either every event has a label or none", dir)
				}
			}
			break
		}
	}
	d, err := atomicfile.NewDir(dir, force)
	if err != nil {
		return err
	}
	defer d.Abort()
	if err := WriteArrays(d.Path(), a); err != nil {
		return err
	}
	if t != nil {
		if err := t.write(d.Path()); err != nil {
			return err
		}
	}
	return d.Commit()
}

// WriteArrays writes the manifest and arrays of a into an existing folder.
func WriteArrays(dir string, a *Acquisition) error {
	n := a.NumElements()
	ne := a.NumEvents()
	delays := make([]float64, 0, ne*n)
	weights := make([]float64, 0, ne*n)
	hasWeights := false
	for _, ev := range a.Events {
		delays = append(delays, ev.Delays...)
		weights = append(weights, ev.Weights...)
		for _, w := range ev.Weights {
			if w != 1 {
				hasWeights = true
			}
		}
	}
	if err := atomicfile.WriteBytes(filepath.Join(dir, ManifestName), true, []byte(manifestYAML(a, hasWeights))); err != nil {
		return err
	}
	if err := writeNpy(filepath.Join(dir, delaysName), func(w io.Writer) error {
		return npy.WriteFloat64(w, []int{ne, n}, delays)
	}); err != nil {
		return err
	}
	if hasWeights {
		if err := writeNpy(filepath.Join(dir, weightsName), func(w io.Writer) error {
			return npy.WriteFloat64(w, []int{ne, n}, weights)
		}); err != nil {
			return err
		}
	}
	shape := []int{ne, n, a.NumSamples}
	return writeNpy(filepath.Join(dir, channelsName), func(w io.Writer) error {
		if a.Kind == IQ {
			return npy.WriteComplex64(w, shape, a.IQ)
		}
		return npy.WriteFloat32(w, shape, a.RF)
	})
}

func writeNpy(path string, fill func(io.Writer) error) error {
	return atomicfile.Write(path, true, fill)
}
