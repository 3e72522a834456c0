package dsp

import (
	"fmt"
	"math"
	"strconv"
	"strings"
)

// WindowKind names the shape of a [Window].
type WindowKind int

// Window shapes. The zero value is Boxcar, so a zero Window is a plain
// (untapered) aperture.
const (
	// Boxcar is 1 on the whole aperture.
	Boxcar WindowKind = iota
	// Hann is 0.5 (1 + cos(pi u)): 1 at the centre, 0 at the edges.
	Hann
	// Tukey is flat in the middle and Hann-tapered over a fraction Alpha of
	// each half-aperture.
	Tukey
)

// String returns the kind's name as [ParseWindow] accepts it.
func (k WindowKind) String() string {
	switch k {
	case Boxcar:
		return "boxcar"
	case Hann:
		return "hann"
	case Tukey:
		return "tukey"
	}
	return fmt.Sprintf("WindowKind(%d)", int(k))
}

// DefaultTukeyAlpha is the taper fraction [ParseWindow] uses for a bare
// "tukey": half of each half-aperture tapered, the customary default.
const DefaultTukeyAlpha = 0.5

// Window is a receive-apodization taper evaluated at u in [-1, 1], the
// normalized position across the active aperture (u = ±1 at its edges); it is
// 0 outside. Alpha is the Tukey taper fraction in [0, 1] and is ignored by the
// other kinds.
type Window struct {
	Kind  WindowKind
	Alpha float64 // Tukey taper fraction, 0..1 (0 is Boxcar, 1 is Hann)
}

// At returns the window weight at u:
//
//	Boxcar: w(u) = 1
//	Hann:   w(u) = 0.5 (1 + cos(pi u))
//	Tukey:  w(u) = 1                                          for |u| <= 1 - alpha
//	        w(u) = 0.5 (1 + cos(pi (|u| - (1 - alpha)) / alpha)) for |u| >  1 - alpha
//
// for |u| <= 1, and 0 for |u| > 1 or NaN u. Alpha outside [0, 1] is clamped.
// At panics on an unknown Kind.
func (w Window) At(u float64) float64 {
	if !(u >= -1 && u <= 1) { // also rejects NaN
		return 0
	}
	switch w.Kind {
	case Boxcar:
		return 1
	case Hann:
		return 0.5 * (1 + math.Cos(math.Pi*u))
	case Tukey:
		a := min(max(w.Alpha, 0), 1)
		flat := 1 - a
		au := math.Abs(u)
		if au <= flat { // alpha = 0 always lands here: a boxcar
			return 1
		}
		return 0.5 * (1 + math.Cos(math.Pi*(au-flat)/a))
	}
	panic(fmt.Sprintf("dsp: Window.At: unknown kind %d", int(w.Kind)))
}

// String returns the window in the form [ParseWindow] reads: "boxcar",
// "hann" or "tukey:ALPHA".
func (w Window) String() string {
	if w.Kind == Tukey {
		return "tukey:" + strconv.FormatFloat(w.Alpha, 'g', -1, 64)
	}
	return w.Kind.String()
}

// ParseWindow reads a window name: "boxcar", "hann", "tukey" (alpha
// [DefaultTukeyAlpha]) or "tukey:ALPHA" with ALPHA in [0, 1], e.g. "tukey:0.25".
// Names are case-insensitive.
func ParseWindow(s string) (Window, error) {
	name, arg, hasArg := strings.Cut(strings.ToLower(strings.TrimSpace(s)), ":")
	var w Window
	switch name {
	case "boxcar":
		w.Kind = Boxcar
	case "hann":
		w.Kind = Hann
	case "tukey":
		w = Window{Kind: Tukey, Alpha: DefaultTukeyAlpha}
		if hasArg {
			a, err := strconv.ParseFloat(strings.TrimSpace(arg), 64)
			if err != nil || !(a >= 0 && a <= 1) {
				return Window{}, fmt.Errorf("dsp: window %q: tukey taper fraction must be a number in [0, 1]", s)
			}
			w.Alpha = a
		}
		return w, nil
	default:
		return Window{}, fmt.Errorf("dsp: window %q: unknown kind (want boxcar, hann, tukey or tukey:ALPHA)", s)
	}
	if hasArg {
		return Window{}, fmt.Errorf("dsp: window %q: %s takes no parameter", s, name)
	}
	return w, nil
}

// MarshalText implements encoding.TextMarshaler with [Window.String].
// It fails on an unknown Kind.
func (w Window) MarshalText() ([]byte, error) {
	if w.Kind < Boxcar || w.Kind > Tukey {
		return nil, fmt.Errorf("dsp: window: unknown kind %d", int(w.Kind))
	}
	return []byte(w.String()), nil
}

// UnmarshalText implements encoding.TextUnmarshaler with [ParseWindow], so a
// Window can be a YAML field or a command-line flag.
func (w *Window) UnmarshalText(b []byte) error {
	v, err := ParseWindow(string(b))
	if err != nil {
		return err
	}
	*w = v
	return nil
}
