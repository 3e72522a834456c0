package cohort

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"math"
	"os"
	"path/filepath"
	"slices"
	"sort"
	"strings"

	"celerity/acq"
)

// EvalVersion is part of every result's key: bump it when what a step
// computes or stores changes, so that stored results are redone.
const EvalVersion = "celerity.cohort-eval/1"

// Step is one stage of the work on an acquisition.
type Step string

// Steps, in the order they run.
const (
	// StepSpeed estimates the bulk speed of sound with its 95 % interval
	// (and, with Settings.ByDepth, the layer speeds).
	StepSpeed Step = "speed"
	// StepAberration estimates the arrival-time error profile at the
	// estimated speed (the scanner's assumed speed without StepSpeed).
	StepAberration Step = "aberration"
	// StepCorrect alternates speed and profile (correction.Run), re-forms
	// the image and measures it before and after (correction.Evaluate).
	StepCorrect Step = "correct"
)

var stepOrder = []Step{StepSpeed, StepAberration, StepCorrect}

// ParseSteps reads a comma-separated list of steps ("speed,aberration"),
// in any order, each at most once.
func ParseSteps(s string) ([]Step, error) {
	var out []Step
	for _, f := range strings.Split(s, ",") {
		st := Step(strings.TrimSpace(f))
		if !slices.Contains(stepOrder, st) {
			return nil, fmt.Errorf("unknown step %q: want a comma-separated list of speed, aberration, correct", string(st))
		}
		if slices.Contains(out, st) {
			return nil, fmt.Errorf("step %q is listed twice", string(st))
		}
		out = append(out, st)
	}
	sort.Slice(out, func(a, b int) bool { return slices.Index(stepOrder, out[a]) < slices.Index(stepOrder, out[b]) })
	return out, nil
}

// Speed methods of Settings.Method.
const (
	// MethodSweep is correction.EstimateSpeed: the focus sweep (coherence
	// factor) with its check for a near-field aberrator.
	MethodSweep = "sweep"
	// MethodTargets fits the arrival-time curves of bright point targets
	// (speed.Targets); an acquisition without usable targets fails.
	MethodTargets = "targets"
	// MethodAuto uses the point-target fit when it finds targets that fit
	// well (high confidence), and the sweep otherwise, as the speed command
	// does.
	MethodAuto = "auto"
)

// Settings say what is computed for every acquisition. They are part of
// each result's key: results made with other settings are redone.
type Settings struct {
	Steps []Step `json:"steps"`
	// Method is the speed method: sweep (default), auto or targets.
	Method string `json:"method"`
	// MinMPS and MaxMPS bound the speeds searched; default 1400 and 1650.
	MinMPS float64 `json:"min_mps"`
	MaxMPS float64 `json:"max_mps"`
	// Seed seeds the bootstrap of the sweep's interval; default 1.
	Seed uint64 `json:"seed"`
	// ByDepth also resolves the speed by depth (speed.ByDepth) into layers;
	// it needs the sweep.
	ByDepth bool `json:"by_depth"`
	// WindowMM is the depth window of ByDepth, mm; default 5.
	WindowMM float64 `json:"window_mm,omitempty"`
	// Regions is a region-pair file (metrics.LoadRegions) measured in the
	// images of the correct step; without it the pairs come from each
	// acquisition's truth (inclusions), if any.
	Regions string `json:"-"`
	// RegionsSHA256 fingerprints the regions file (set by Normalize).
	RegionsSHA256 string `json:"regions_sha256,omitempty"`
	// KeepImages writes per-acquisition outputs (criterion curve, profile,
	// before/after images) under acquisitions/ in the output folder.
	KeepImages bool `json:"keep_images"`
}

// DefaultSettings runs the speed and aberration steps with the sweep.
func DefaultSettings() Settings {
	return Settings{Steps: []Step{StepSpeed, StepAberration}, Method: MethodSweep, MinMPS: 1400, MaxMPS: 1650, Seed: 1}
}

// Has reports whether step s is to run.
func (s *Settings) Has(st Step) bool { return slices.Contains(s.Steps, st) }

// Normalize fills defaults, checks the settings and fingerprints the
// regions file.
func (s *Settings) Normalize() error {
	if len(s.Steps) == 0 {
		return fmt.Errorf("no steps to run")
	}
	for i, st := range s.Steps {
		if !slices.Contains(stepOrder, st) {
			return fmt.Errorf("unknown step %q", string(st))
		}
		if slices.Contains(s.Steps[:i], st) {
			return fmt.Errorf("step %q is listed twice", string(st))
		}
	}
	sort.Slice(s.Steps, func(a, b int) bool { return slices.Index(stepOrder, s.Steps[a]) < slices.Index(stepOrder, s.Steps[b]) })
	if s.Method == "" {
		s.Method = MethodSweep
	}
	switch s.Method {
	case MethodSweep, MethodAuto, MethodTargets:
	default:
		return fmt.Errorf("speed method %q: want sweep, auto or targets", s.Method)
	}
	if s.MinMPS == 0 && s.MaxMPS == 0 {
		s.MinMPS, s.MaxMPS = 1400, 1650
	}
	if !(s.MinMPS >= 300 && s.MaxMPS > s.MinMPS && s.MaxMPS <= 10000) {
		return fmt.Errorf("speed range %g to %g m/s: want 300 <= min < max <= 10000", s.MinMPS, s.MaxMPS)
	}
	if s.Seed == 0 {
		s.Seed = 1
	}
	if s.ByDepth {
		if !s.Has(StepSpeed) {
			return fmt.Errorf("the speed by depth needs the speed step")
		}
		if s.Method == MethodTargets {
			return fmt.Errorf("the speed by depth needs the sweep (method sweep or auto)")
		}
		if s.WindowMM == 0 {
			s.WindowMM = 5
		}
		if !(s.WindowMM > 0 && s.WindowMM < 1000) {
			return fmt.Errorf("depth window %g mm: must be positive", s.WindowMM)
		}
	} else {
		s.WindowMM = 0
	}
	s.RegionsSHA256 = ""
	if s.Regions != "" {
		b, err := os.ReadFile(s.Regions)
		if err != nil {
			return err
		}
		h := sha256.Sum256(b)
		s.RegionsSHA256 = hex.EncodeToString(h[:])
	}
	return nil
}

// Key fingerprints the settings (and EvalVersion). It panics if the
// settings cannot be marshalled, which their fields rule out.
func (s *Settings) Key() string {
	b, err := json.Marshal(struct {
		Version string `json:"version"`
		*Settings
	}{EvalVersion, s})
	if err != nil {
		panic("cohort: settings do not marshal: " + err.Error())
	}
	h := sha256.Sum256(b)
	return hex.EncodeToString(h[:16])
}

// Fingerprint is the key of one acquisition's result: the settings' key,
// the bytes of acquisition.yaml and truth.yaml and the names and sizes of
// the folder's .npy files. An acquisition exported again or edited gets a
// new key, so its stored result is redone; the fingerprint reads only the
// small files, so it is cheap for large cohorts. A file that cannot be read
// enters the fingerprint as its error; the job then fails with its own
// message.
func Fingerprint(dir, settingsKey string) string {
	h := sha256.New()
	fmt.Fprintf(h, "settings %s\n", settingsKey)
	for _, name := range []string{acq.ManifestName, acq.TruthName} {
		f, err := os.Open(filepath.Join(dir, name))
		if err != nil {
			fmt.Fprintf(h, "%s: %v\n", name, errorKind(err))
			continue
		}
		fmt.Fprintf(h, "%s:\n", name)
		_, err = io.Copy(h, io.LimitReader(f, maxManifestBytes))
		f.Close()
		if err != nil {
			fmt.Fprintf(h, "\nread error\n")
		}
		fmt.Fprintln(h)
	}
	ents, err := os.ReadDir(dir)
	if err != nil {
		fmt.Fprintf(h, "folder: %v\n", errorKind(err))
	}
	for _, e := range ents {
		n := e.Name()
		if !strings.HasSuffix(n, ".npy") || strings.HasPrefix(n, ".") {
			continue
		}
		size := int64(-1)
		if info, err := e.Info(); err == nil {
			size = info.Size()
		}
		fmt.Fprintf(h, "%s %d\n", n, size)
	}
	return hex.EncodeToString(h.Sum(nil)[:16])
}

// errorKind reduces a file error to what does not depend on where the
// folder is (so that copies of a cohort on other nodes agree).
func errorKind(err error) string {
	switch {
	case os.IsNotExist(err):
		return "absent"
	case os.IsPermission(err):
		return "not readable"
	}
	return "error"
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
