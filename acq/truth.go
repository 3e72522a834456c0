package acq

import (
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"strings"

	"celerity/internal/atomicfile"
	"celerity/internal/npy"
	"celerity/internal/strictyaml"
)

// Truth file names and format identifier.
const (
	TruthName       = "truth.yaml"
	TruthFormatV1   = "celerity.truth/1"
	TruthScreenName = "truth_screen.npy"
)

// Layer is one horizontal layer of the medium, from the array face down.
// The last layer has no thickness (it extends to infinity).
type Layer struct {
	ThicknessM float64 `json:"thickness_m"` // 0 for the last layer
	SpeedMPS   float64 `json:"speed_mps"`
}

// Screen is a near-field phase screen: a per-element arrival-time error added
// to every path that leaves or enters the element. A positive value delays
// the echo.
type Screen struct {
	DelaysS []float64 // one per element
	// RMSS and CorrelationLengthM describe the statistics it was drawn from
	// (0 when given explicitly).
	RMSS               float64
	CorrelationLengthM float64
}

// Inclusion is a circular region whose scatterers are scaled by ContrastDB.
type Inclusion struct {
	CenterM    [2]float64
	RadiusM    float64
	ContrastDB float64
}

// Truth is the ground truth of a simulated acquisition.
type Truth struct {
	Seed uint64
	// SpeedMPS is the speed of a homogeneous medium; 0 when Layers is set.
	SpeedMPS float64
	Layers   []Layer
	Screen   *Screen
	TargetsM [][2]float64
	// Inclusions lists circular inclusions.
	Inclusions []Inclusion
	// NoiseSNRDB is the channel SNR; nil for noise-free data.
	NoiseSNRDB *float64
	// AttenuationDBPerCmMHz is the medium's attenuation slope; 0 if none.
	AttenuationDBPerCmMHz float64
	// Description is free text.
	Description string
}

// SpeedAt returns the true speed at depth z (the layer containing z).
func (t *Truth) SpeedAt(z float64) float64 {
	if len(t.Layers) == 0 {
		return t.SpeedMPS
	}
	top := 0.0
	for i, l := range t.Layers {
		if i == len(t.Layers)-1 || z < top+l.ThicknessM {
			return l.SpeedMPS
		}
		top += l.ThicknessM
	}
	return t.Layers[len(t.Layers)-1].SpeedMPS
}

// MeanSpeed returns the time-averaged (harmonic mean) speed over depth 0..z
// along a vertical path, the "average speed" of a layered medium.
func (t *Truth) MeanSpeed(z float64) float64 {
	if len(t.Layers) == 0 {
		return t.SpeedMPS
	}
	if z <= 0 {
		return t.Layers[0].SpeedMPS
	}
	time, top := 0.0, 0.0
	for i, l := range t.Layers {
		bottom := top + l.ThicknessM
		if i == len(t.Layers)-1 || bottom > z {
			bottom = z
		}
		time += (bottom - top) / l.SpeedMPS
		top = bottom
		if top >= z {
			break
		}
	}
	return z / time
}

// Validate checks the truth for an array of n elements.
func (t *Truth) Validate(n int) error {
	okSpeed := func(v float64) bool { return v >= 100 && v <= 10000 }
	if len(t.Layers) == 0 {
		if !okSpeed(t.SpeedMPS) {
			return fmt.Errorf("truth: speed_mps: must be between 100 and 10000 m/s, got %g", t.SpeedMPS)
		}
	} else {
		if t.SpeedMPS != 0 {
			return fmt.Errorf("truth: exactly one of speed_mps and layers")
		}
		for i, l := range t.Layers {
			if !okSpeed(l.SpeedMPS) {
				return fmt.Errorf("truth: layers[%d].speed_mps: must be between 100 and 10000 m/s, got %g", i, l.SpeedMPS)
			}
			last := i == len(t.Layers)-1
			if !last && !(l.ThicknessM > 0 && l.ThicknessM < 10) {
				return fmt.Errorf("truth: layers[%d].thickness_m: must be positive, got %g", i, l.ThicknessM)
			}
			if last && l.ThicknessM != 0 {
				return fmt.Errorf("truth: layers[%d].thickness_m: the last layer has no thickness", i)
			}
		}
	}
	if t.Screen != nil {
		if len(t.Screen.DelaysS) != n {
			return fmt.Errorf("truth: screen.file: %d values for %d elements", len(t.Screen.DelaysS), n)
		}
		for i, v := range t.Screen.DelaysS {
			if math.IsNaN(v) || math.IsInf(v, 0) || math.Abs(v) > 1e-4 {
				return fmt.Errorf("truth: screen.file: value %d must be finite and within 100 us, got %g", i, v)
			}
		}
		if !finiteNonNeg(t.Screen.RMSS) || !finiteNonNeg(t.Screen.CorrelationLengthM) {
			return fmt.Errorf("truth: screen: rms_s and correlation_length_m must be finite and not negative")
		}
	}
	for i, p := range t.TargetsM {
		if !finite(p[0]) || !finite(p[1]) {
			return fmt.Errorf("truth: targets_m[%d]: must be finite, got %v", i, p)
		}
	}
	for i, in := range t.Inclusions {
		if !finite(in.CenterM[0]) || !finite(in.CenterM[1]) {
			return fmt.Errorf("truth: inclusions[%d].center_m: must be finite, got %v", i, in.CenterM)
		}
		if !(in.RadiusM > 0) || math.IsInf(in.RadiusM, 0) {
			return fmt.Errorf("truth: inclusions[%d].radius_m: must be positive, got %g", i, in.RadiusM)
		}
		if !finite(in.ContrastDB) {
			return fmt.Errorf("truth: inclusions[%d].contrast_db: must be finite, got %g", i, in.ContrastDB)
		}
	}
	if t.NoiseSNRDB != nil && !finite(*t.NoiseSNRDB) {
		return fmt.Errorf("truth: noise_snr_db: must be finite, got %g", *t.NoiseSNRDB)
	}
	if !finiteNonNeg(t.AttenuationDBPerCmMHz) {
		return fmt.Errorf("truth: attenuation_db_cm_mhz: must be finite and not negative, got %g", t.AttenuationDBPerCmMHz)
	}
	return nil
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

func finiteNonNeg(v float64) bool { return v >= 0 && !math.IsInf(v, 0) }

// LoadTruth reads truth.yaml (and its screen file) from dir. It returns
// (nil, nil) when the folder has no truth.yaml.
func LoadTruth(dir string) (*Truth, error) {
	path := filepath.Join(dir, TruthName)
	if _, err := os.Stat(path); os.IsNotExist(err) {
		return nil, nil
	}
	return LoadTruthFile(path)
}

// LoadTruthFile reads a truth file; a screen file it names is read from the
// same folder.
func LoadTruthFile(path string) (*Truth, error) {
	data, err := readSmall(path, maxManifest)
	if err != nil {
		return nil, err
	}
	root, err := strictyaml.Parse(path, data)
	if err != nil {
		return nil, err
	}
	format, err := root.String("format")
	if err != nil {
		return nil, err
	}
	if format != TruthFormatV1 {
		return nil, root.Errorf("format", "unsupported format %q (this version reads %q)", format, TruthFormatV1)
	}
	t := &Truth{}
	if t.Seed, _, err = root.OptUint64("seed", 0); err != nil {
		return nil, err
	}
	if t.Description, _, err = root.OptString("description", ""); err != nil {
		return nil, err
	}
	hasSpeed, hasLayers := root.Has("speed_mps"), root.Has("layers")
	if hasSpeed == hasLayers {
		return nil, root.Errorf("", "exactly one of speed_mps and layers is required")
	}
	if hasSpeed {
		if t.SpeedMPS, err = root.Float("speed_mps"); err != nil {
			return nil, err
		}
	} else {
		lms, err := root.Maps("layers", true)
		if err != nil {
			return nil, err
		}
		if len(lms) == 0 {
			return nil, root.Errorf("layers", "must list at least one layer")
		}
		for i, lm := range lms {
			var l Layer
			if l.SpeedMPS, err = lm.Float("speed_mps"); err != nil {
				return nil, err
			}
			if i < len(lms)-1 {
				if l.ThicknessM, err = lm.Float("thickness_m"); err != nil {
					return nil, err
				}
			} else if lm.Has("thickness_m") {
				return nil, lm.Errorf("thickness_m", "the last layer has no thickness (it extends downwards without end)")
			}
			if err := lm.Done(); err != nil {
				return nil, err
			}
			t.Layers = append(t.Layers, l)
		}
	}
	if sm, err := root.OptMap("screen"); err != nil {
		return nil, err
	} else if sm != nil {
		s := &Screen{}
		name, err := localName(sm, "file", true)
		if err != nil {
			return nil, err
		}
		if s.RMSS, _, err = sm.OptFloat("rms_s", 0); err != nil {
			return nil, err
		}
		if s.CorrelationLengthM, _, err = sm.OptFloat("correlation_length_m", 0); err != nil {
			return nil, err
		}
		if err := sm.Done(); err != nil {
			return nil, err
		}
		spath := filepath.Join(filepath.Dir(path), name)
		v, h, err := readFloat64Array(spath, "screen.file", 1, 1<<24)
		if err != nil {
			return nil, err
		}
		_ = h
		s.DelaysS = v
		t.Screen = s
	}
	if t.TargetsM, err = root.Points("targets_m", false); err != nil {
		return nil, err
	}
	ims, err := root.Maps("inclusions", false)
	if err != nil {
		return nil, err
	}
	for _, im := range ims {
		var in Inclusion
		if in.CenterM, err = im.Pair("center_m"); err != nil {
			return nil, err
		}
		if in.RadiusM, err = im.Float("radius_m"); err != nil {
			return nil, err
		}
		if in.ContrastDB, err = im.Float("contrast_db"); err != nil {
			return nil, err
		}
		if err := im.Done(); err != nil {
			return nil, err
		}
		t.Inclusions = append(t.Inclusions, in)
	}
	if v, ok, err := root.OptFloat("noise_snr_db", 0); err != nil {
		return nil, err
	} else if ok {
		t.NoiseSNRDB = &v
	}
	if t.AttenuationDBPerCmMHz, _, err = root.OptFloat("attenuation_db_cm_mhz", 0); err != nil {
		return nil, err
	}
	if err := root.Done(); err != nil {
		return nil, err
	}
	n := 0
	if t.Screen != nil {
		n = len(t.Screen.DelaysS)
	}
	if err := t.Validate(n); err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return t, nil
}

// YAML renders truth.yaml.
func (t *Truth) YAML() string {
	var b strings.Builder
	fmt.Fprintf(&b, "format: %s\n", TruthFormatV1)
	if t.Description != "" {
		fmt.Fprintf(&b, "description: %s\n", quote(t.Description))
	}
	fmt.Fprintf(&b, "seed: %d\n", t.Seed)
	if len(t.Layers) == 0 {
		fmt.Fprintf(&b, "speed_mps: %s\n", fmtFloat(t.SpeedMPS))
	} else {
		b.WriteString("layers:\n")
		for i, l := range t.Layers {
			if i < len(t.Layers)-1 {
				fmt.Fprintf(&b, "  - {thickness_m: %s, speed_mps: %s}\n", fmtFloat(l.ThicknessM), fmtFloat(l.SpeedMPS))
			} else {
				fmt.Fprintf(&b, "  - {speed_mps: %s}\n", fmtFloat(l.SpeedMPS))
			}
		}
	}
	if t.Screen != nil {
		b.WriteString("screen:\n")
		fmt.Fprintf(&b, "  file: %s\n", TruthScreenName)
		fmt.Fprintf(&b, "  rms_s: %s\n", fmtFloat(t.Screen.RMSS))
		fmt.Fprintf(&b, "  correlation_length_m: %s\n", fmtFloat(t.Screen.CorrelationLengthM))
	}
	if len(t.TargetsM) > 0 {
		b.WriteString("targets_m:\n")
		for _, q := range t.TargetsM {
			fmt.Fprintf(&b, "  - [%s, %s]\n", fmtFloat(q[0]), fmtFloat(q[1]))
		}
	}
	if len(t.Inclusions) > 0 {
		b.WriteString("inclusions:\n")
		for _, in := range t.Inclusions {
			fmt.Fprintf(&b, "  - {center_m: [%s, %s], radius_m: %s, contrast_db: %s}\n",
				fmtFloat(in.CenterM[0]), fmtFloat(in.CenterM[1]), fmtFloat(in.RadiusM), fmtFloat(in.ContrastDB))
		}
	}
	if t.NoiseSNRDB != nil {
		fmt.Fprintf(&b, "noise_snr_db: %s\n", fmtFloat(*t.NoiseSNRDB))
	}
	if t.AttenuationDBPerCmMHz > 0 {
		fmt.Fprintf(&b, "attenuation_db_cm_mhz: %s\n", fmtFloat(t.AttenuationDBPerCmMHz))
	}
	return b.String()
}

// write writes truth.yaml and truth_screen.npy into dir.
func (t *Truth) write(dir string) error {
	if err := atomicfile.WriteBytes(filepath.Join(dir, TruthName), true, []byte(t.YAML())); err != nil {
		return err
	}
	if t.Screen != nil {
		return writeNpy(filepath.Join(dir, TruthScreenName), func(w io.Writer) error {
			return npy.WriteFloat64(w, []int{len(t.Screen.DelaysS)}, t.Screen.DelaysS)
		})
	}
	return nil
}

// WriteTruth writes truth.yaml (and its screen file) into an existing folder.
func WriteTruth(dir string, t *Truth) error { return t.write(dir) }
