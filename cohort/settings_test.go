package cohort

import (
	"os"
	"path/filepath"
	"slices"
	"testing"
)

func TestParseSteps(t *testing.T) {
	t.Parallel()
	got, err := ParseSteps("correct, speed")
	if err != nil || !slices.Equal(got, []Step{StepSpeed, StepCorrect}) {
		t.Errorf("ParseSteps: %v, %v", got, err)
	}
	for _, bad := range []string{"", "speed,speed", "speed,images", "speed,"} {
		if _, err := ParseSteps(bad); err == nil {
			t.Errorf("ParseSteps(%q) accepted", bad)
		}
	}
}

func TestNormalize(t *testing.T) {
	t.Parallel()
	s := Settings{Steps: []Step{StepAberration, StepSpeed}}
	if err := s.Normalize(); err != nil {
		t.Fatal(err)
	}
	if s.Method != MethodSweep || s.MinMPS != 1400 || s.MaxMPS != 1650 || s.Seed != 1 || !slices.Equal(s.Steps, []Step{StepSpeed, StepAberration}) {
		t.Errorf("defaults: %+v", s)
	}
	d := DefaultSettings()
	if err := d.Normalize(); err != nil || d.Key() != s.Key() {
		t.Errorf("DefaultSettings: %+v, %v; key %s vs %s", d, err, d.Key(), s.Key())
	}
	for name, bad := range map[string]Settings{
		"no steps":           {},
		"by depth, no speed": {Steps: []Step{StepAberration}, ByDepth: true},
		"by depth, targets":  {Steps: []Step{StepSpeed}, ByDepth: true, Method: MethodTargets},
		"method":             {Steps: []Step{StepSpeed}, Method: "guess"},
		"range":              {Steps: []Step{StepSpeed}, MinMPS: 1600, MaxMPS: 1500},
		"regions":            {Steps: []Step{StepCorrect}, Regions: filepath.Join(t.TempDir(), "none.yaml")},
	} {
		if err := bad.Normalize(); err == nil {
			t.Errorf("%s: accepted", name)
		}
	}
	// every setting that changes a result changes the key
	base := DefaultSettings()
	base.Normalize()
	for name, f := range map[string]func(*Settings){
		"steps":  func(s *Settings) { s.Steps = []Step{StepSpeed} },
		"method": func(s *Settings) { s.Method = MethodAuto },
		"range":  func(s *Settings) { s.MaxMPS = 1700 },
		"seed":   func(s *Settings) { s.Seed = 2 },
		"depth":  func(s *Settings) { s.ByDepth = true },
		"images": func(s *Settings) { s.KeepImages = true },
	} {
		v := DefaultSettings()
		f(&v)
		if err := v.Normalize(); err != nil {
			t.Fatal(err)
		}
		if v.Key() == base.Key() {
			t.Errorf("%s: same key", name)
		}
	}
}

// TestFingerprint: the key of an acquisition follows its manifest, truth
// and array sizes and the settings, and not where the folder is.
func TestFingerprint(t *testing.T) {
	t.Parallel()
	a := mkAcq(t, t.TempDir(), "a")
	os.WriteFile(filepath.Join(a, "acquisition.yaml"), []byte("format: celerity.acquisition/1\n"), 0o644)
	os.WriteFile(filepath.Join(a, "channels.npy"), make([]byte, 100), 0o644)
	os.WriteFile(filepath.Join(a, "notes.txt"), []byte("x"), 0o644)
	b := filepath.Join(t.TempDir(), "elsewhere", "b")
	if err := copyAcquisition(a, b); err != nil {
		t.Fatal(err)
	}
	k := Fingerprint(a, "s")
	if Fingerprint(b, "s") != k {
		t.Error("a copy of the folder has another key")
	}
	if Fingerprint(a, "t") == k {
		t.Error("other settings, same key")
	}
	os.WriteFile(filepath.Join(b, "notes.txt"), []byte("edited"), 0o644)
	if Fingerprint(b, "s") != k {
		t.Error("a file that is not part of the acquisition changed the key")
	}
	for name, edit := range map[string]func(dir string){
		"manifest": func(d string) {
			os.WriteFile(filepath.Join(d, "acquisition.yaml"), []byte("format: celerity.acquisition/1\n# edited\n"), 0o644)
		},
		"truth": func(d string) { os.WriteFile(filepath.Join(d, "truth.yaml"), []byte("x"), 0o644) },
		"array": func(d string) { os.Truncate(filepath.Join(d, "channels.npy"), 50) },
	} {
		c := filepath.Join(t.TempDir(), "c")
		copyAcquisition(a, c)
		edit(c)
		if Fingerprint(c, "s") == k {
			t.Errorf("%s edited: same key", name)
		}
	}
	if g := Fingerprint(filepath.Join(t.TempDir(), "gone"), "s"); len(g) != 32 || g == k {
		t.Errorf("a missing folder: key %q", g)
	}
}
