package bench

import (
	"context"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strings"
	"testing"
	"time"

	"celerity/acq"
)

func TestSplitCommand(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		in   string
		want []string
		ok   bool
	}{
		{"python3 est.py", []string{"python3", "est.py"}, true},
		{"  sh   -c  'echo $1'  x ", []string{"sh", "-c", "echo $1", "x"}, true},
		{`run "my est.py" --flag="a \"b\""`, []string{"run", "my est.py", `--flag=a "b"`}, true},
		{`a\ b c`, []string{"a b", "c"}, true},
		{`x ''`, []string{"x", ""}, true},
		{"x 'open", nil, false},
		{`x "open`, nil, false},
		{"   ", nil, false},
	} {
		got, err := SplitCommand(c.in)
		if (err == nil) != c.ok || !slices.Equal(got, c.want) {
			t.Errorf("SplitCommand(%q) = %q, %v; want %q (ok %v)", c.in, got, err, c.want, c.ok)
		}
	}
}

func TestParseExternal(t *testing.T) {
	t.Parallel()
	e, err := ParseExternal("mine=python3 est.py --fast", time.Minute)
	if err != nil || e.Label != "mine" || !slices.Equal(e.Args, []string{"python3", "est.py", "--fast"}) || e.Timeout != time.Minute {
		t.Fatalf("%+v, %v", e, err)
	}
	for _, bad := range []string{"python3 est.py", "=x", "Mine=x", "speed-brightness=x", "a b=x", "ok="} {
		if _, err := ParseExternal(bad, time.Minute); err == nil {
			t.Errorf("ParseExternal(%q) accepted", bad)
		}
	}
}

func TestParseAnswer(t *testing.T) {
	t.Parallel()
	good := []struct {
		in    string
		speed float64
		prof  bool
		ci    bool
	}{
		{`{"speed_mps": 1502.5}`, 1502.5, false, false},
		{"\n  {\"speed_mps\": 1502.5, \"ci95_mps\": [1490, 1510], \"confidence\": \"high\", \"notes\": [\"x\"]}\n\n", 1502.5, false, true},
		{`{"profile_s": [0, 1e-9, -2e-9]}`, math.NaN(), true, false},
		{`{"speed_mps": 1500, "profile_s": [0, 0, 0], "ci95_mps": null}`, 1500, true, false},
	}
	for _, c := range good {
		est, err := ParseAnswer([]byte(c.in), 3)
		if err != nil {
			t.Errorf("%s: %v", c.in, err)
			continue
		}
		if !(est.SpeedMPS == c.speed || math.IsNaN(c.speed) && math.IsNaN(est.SpeedMPS)) || (est.ProfileS != nil) != c.prof || finite(est.CI95MPS[0]) != c.ci {
			t.Errorf("%s: %+v", c.in, est)
		}
	}
	bad := map[string]string{
		"":           "printed nothing",
		"speed 1500": "not one JSON object",
		`[1500]`:     "not one JSON object",
		`null`:       "not one JSON object",
		`{"speed_mps": 1500} {"speed_mps": 1501}`:       "more than one JSON value",
		`{"speed_mps": 1500}trailing`:                   "more than one JSON value",
		`{"speed_mps": "1500"}`:                         "speed_mps: want a positive number",
		`{"speed_mps": -3}`:                             "speed_mps: want a positive number",
		`{"speed_ms": 1500}`:                            `unknown key "speed_ms"`,
		`{}`:                                            "neither speed_mps nor profile_s",
		`{"speed_mps": null}`:                           "neither speed_mps nor profile_s",
		`{"profile_s": [0, 0]}`:                         "2 values for 3 elements",
		`{"profile_s": [0, 0, 1]}`:                      "within 100 us",
		`{"ci95_mps": [1, 2], "profile_s": [0,0,0]}`:    "ci95_mps without speed_mps",
		`{"speed_mps": 1500, "ci95_mps": [1510, 1490]}`: "lo <= hi",
		`{"speed_mps": 1500, "ci95_mps": [1490]}`:       "want [lo, hi]",
	}
	for in, want := range bad {
		if _, err := ParseAnswer([]byte(in), 3); err == nil || !strings.Contains(err.Error(), want) {
			t.Errorf("%q: error %v, want %q", in, err, want)
		}
	}
}

// scriptInput is an Input for the test scripts: a folder with a manifest
// naming 8 elements (the scripts read nothing else).
func scriptInput(t *testing.T) *Input {
	t.Helper()
	dir := t.TempDir()
	if err := os.WriteFile(filepath.Join(dir, "acquisition.yaml"), []byte("probe:\n  linear: {count: 8, pitch_m: 0.0003}\n"), 0o644); err != nil {
		t.Fatal(err)
	}
	p := acq.NewLinear(8, 0.3e-3, 5e6)
	return &Input{Dir: dir, Acq: &acq.Acquisition{Probe: p}}
}

func script(name string) string { return filepath.Join("..", "testdata", "estimators", name) }

// TestExternalScripts runs the POSIX sh test estimators of testdata: good
// answers are read, and a timeout, garbage and a crash are errors that say
// what happened.
func TestExternalScripts(t *testing.T) {
	t.Parallel()
	if _, err := exec.LookPath("sh"); err != nil {
		t.Skip("no POSIX shell")
	}
	in := scriptInput(t)
	run := func(file string, timeout time.Duration) (*Estimate, error, time.Duration) {
		e, err := ParseExternal("t=sh "+script(file), timeout)
		if err != nil {
			t.Fatal(err)
		}
		t0 := time.Now()
		est, err := e.Estimate(context.Background(), in)
		return est, err, time.Since(t0)
	}
	est, err, _ := run("const-speed.sh", 10*time.Second)
	if err != nil || est.SpeedMPS != 1540 || est.CI95MPS != [2]float64{1530, 1550} || est.Confidence != "high" {
		t.Errorf("const-speed.sh: %+v, %v", est, err)
	}
	est, err, _ = run("zero-profile.sh", 10*time.Second)
	if err != nil || len(est.ProfileS) != 8 || !math.IsNaN(est.SpeedMPS) {
		t.Errorf("zero-profile.sh: %+v, %v", est, err)
	}
	// the sleeper is killed with its child at the limit; waiting for its
	// sleep (300 s) would take far longer than this bound
	_, err, took := run("sleepy.sh", 500*time.Millisecond)
	if err == nil || !strings.Contains(err.Error(), "timed out after 500ms") {
		t.Errorf("sleepy.sh: %v", err)
	}
	if took > 5*time.Second {
		t.Errorf("sleepy.sh took %s to stop", took)
	}
	if _, err, _ = run("garbage.sh", 10*time.Second); err == nil || !strings.Contains(err.Error(), "not one JSON object") || !strings.Contains(err.Error(), "the speed of sound is about") {
		t.Errorf("garbage.sh: %v", err)
	}
	if _, err, _ = run("crash.sh", 10*time.Second); err == nil || !strings.Contains(err.Error(), "exited with status 3") || !strings.Contains(err.Error(), "cannot read channels.npy") {
		t.Errorf("crash.sh: %v", err)
	}
	e, _ := ParseExternal("t=./no-such-estimator", time.Second)
	if _, err := e.Estimate(context.Background(), in); err == nil || !strings.Contains(err.Error(), "could not run") {
		t.Errorf("missing program: %v", err)
	}
	// a cancelled run stops the program and reports the cancellation
	e, _ = ParseExternal("t=sh "+script("sleepy.sh"), time.Minute)
	ctx, cancel := context.WithTimeout(context.Background(), 300*time.Millisecond)
	defer cancel()
	if _, err := e.Estimate(ctx, in); err != context.DeadlineExceeded {
		t.Errorf("cancelled: %v", err)
	}
}
