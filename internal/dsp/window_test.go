package dsp

import (
	"math"
	"testing"
)

// windowTol allows for cos(pi u) rounding in float64.
const windowTol = 1e-15

func TestWindowAt(t *testing.T) {
	t.Parallel()
	hann := Window{Kind: Hann}
	tukey := func(a float64) Window { return Window{Kind: Tukey, Alpha: a} }
	// Values from the closed forms in Window.At's doc comment.
	cases := []struct {
		name string
		w    Window
		u    float64
		want float64
	}{
		{"boxcar centre", Window{}, 0, 1},
		{"boxcar edge", Window{Kind: Boxcar}, -1, 1},
		{"boxcar outside", Window{Kind: Boxcar}, 1.0000001, 0},
		{"hann centre", hann, 0, 1},                      // 0.5 (1 + cos 0)
		{"hann right edge", hann, 1, 0},                  // 0.5 (1 + cos pi)
		{"hann left edge", hann, -1, 0},                  // symmetric
		{"hann half", hann, 0.5, 0.5},                    // 0.5 (1 + cos(pi/2))
		{"hann minus half", hann, -0.5, 0.5},             // symmetric
		{"hann quarter", hann, 0.25, 0.5 + math.Sqrt2/4}, // 0.5 (1 + cos(pi/4))
		{"hann outside", hann, 1.5, 0},
		{"hann far outside", hann, -7, 0},
		{"tukey 0.5 flat", tukey(0.5), 0.5, 1},          // |u| <= 1 - alpha
		{"tukey 0.5 mid-taper", tukey(0.5), -0.75, 0.5}, // 0.5 (1 + cos(pi 0.25/0.5))
		{"tukey 0.5 edge", tukey(0.5), 1, 0},
		{"tukey 0.25 taper", tukey(0.25), 0.875, 0.5}, // 0.5 (1 + cos(pi 0.125/0.25))
		{"tukey alpha clamped low", tukey(-3), 0.99, 1},
		{"tukey alpha clamped high", tukey(7), 0.5, 0.5},
		{"NaN", hann, math.NaN(), 0},
		{"+Inf", Window{}, math.Inf(1), 0},
		{"-Inf", tukey(0.3), math.Inf(-1), 0},
	}
	for _, tc := range cases {
		if got := tc.w.At(tc.u); math.Abs(got-tc.want) > windowTol {
			t.Errorf("%s: %v.At(%g) = %.17g, want %.17g", tc.name, tc.w, tc.u, got, tc.want)
		}
	}
}

func TestWindowLimits(t *testing.T) {
	t.Parallel()
	// Tukey(0) is the boxcar and Tukey(1) the Hann window, everywhere,
	// including outside the aperture; every window is even in u.
	boxcar, hann := Window{Kind: Boxcar}, Window{Kind: Hann}
	t0, t1 := Window{Kind: Tukey}, Window{Kind: Tukey, Alpha: 1}
	tq := Window{Kind: Tukey, Alpha: 0.3}
	for i := -1200; i <= 1200; i++ {
		u := float64(i) / 1000
		if got, want := t0.At(u), boxcar.At(u); got != want {
			t.Fatalf("Tukey(0).At(%g) = %g, boxcar %g", u, got, want)
		}
		if got, want := t1.At(u), hann.At(u); math.Abs(got-want) > windowTol {
			t.Fatalf("Tukey(1).At(%g) = %g, Hann %g", u, got, want)
		}
		for _, w := range []Window{boxcar, hann, tq} {
			if w.At(u) != w.At(-u) {
				t.Fatalf("%v not even at u=%g", w, u)
			}
			if v := w.At(u); v < 0 || v > 1 {
				t.Fatalf("%v.At(%g) = %g outside [0, 1]", w, u, v)
			}
		}
	}
}

func TestWindowUnknownKindPanics(t *testing.T) {
	t.Parallel()
	if !panics(func() { Window{Kind: 42}.At(0) }) {
		t.Error("At on an unknown kind did not panic")
	}
	if _, err := (Window{Kind: -1}).MarshalText(); err == nil {
		t.Error("MarshalText on an unknown kind: no error")
	}
}

func TestParseWindow(t *testing.T) {
	t.Parallel()
	good := []struct {
		in   string
		want Window
	}{
		{"boxcar", Window{Kind: Boxcar}},
		{"hann", Window{Kind: Hann}},
		{" Hann ", Window{Kind: Hann}},
		{"tukey", Window{Kind: Tukey, Alpha: DefaultTukeyAlpha}},
		{"tukey:0.25", Window{Kind: Tukey, Alpha: 0.25}},
		{"TUKEY: 1", Window{Kind: Tukey, Alpha: 1}},
		{"tukey:0", Window{Kind: Tukey, Alpha: 0}},
	}
	for _, tc := range good {
		got, err := ParseWindow(tc.in)
		if err != nil || got != tc.want {
			t.Errorf("ParseWindow(%q) = %v, %v; want %v", tc.in, got, err, tc.want)
		}
		// String round-trips.
		back, err := ParseWindow(got.String())
		if err != nil || back != got {
			t.Errorf("ParseWindow(%q.String() = %q) = %v, %v", tc.in, got.String(), back, err)
		}
	}
	bad := []string{"", "hamming", "hann:0.5", "boxcar:1", "tukey:", "tukey:x", "tukey:-0.1", "tukey:1.5", "tukey:NaN", "tukey:0.2:3"}
	for _, in := range bad {
		if w, err := ParseWindow(in); err == nil {
			t.Errorf("ParseWindow(%q) = %v, want an error", in, w)
		}
	}
}

func TestWindowText(t *testing.T) {
	t.Parallel()
	var w Window
	if err := w.UnmarshalText([]byte("tukey:0.1")); err != nil || w != (Window{Kind: Tukey, Alpha: 0.1}) {
		t.Fatalf("UnmarshalText: %v, %v", w, err)
	}
	b, err := w.MarshalText()
	if err != nil || string(b) != "tukey:0.1" {
		t.Fatalf("MarshalText = %q, %v", b, err)
	}
	if err := w.UnmarshalText([]byte("triangle")); err == nil {
		t.Fatal("UnmarshalText(triangle): no error")
	}
	if w != (Window{Kind: Tukey, Alpha: 0.1}) {
		t.Fatalf("failed UnmarshalText changed the window to %v", w)
	}
	for k, want := range map[WindowKind]string{Boxcar: "boxcar", Hann: "hann", Tukey: "tukey", 9: "WindowKind(9)"} {
		if k.String() != want {
			t.Errorf("WindowKind(%d).String() = %q, want %q", int(k), k.String(), want)
		}
	}
}
