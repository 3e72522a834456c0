package recon_test

import (
	"math"
	"testing"

	"celerity/recon"
)

func TestEnvelope(t *testing.T) {
	t.Parallel()
	got := recon.Envelope([]complex64{3 + 4i, 0, -1, 1e-30 - 1e-30i})
	want := []float64{5, 0, 1, math.Sqrt2 * 1e-30}
	for i := range want {
		if math.Abs(got[i]-want[i]) > 1e-6*want[i] {
			t.Errorf("Envelope[%d] = %g, want %g", i, got[i], want[i])
		}
	}
}

// TestLogCompress: 20 log10(env / ref), clipped below at -range; the maximum
// is the reference when ref <= 0; zeros map to the floor.
func TestLogCompress(t *testing.T) {
	t.Parallel()
	env := []float64{10, 1, 0.1, 0, 1e-6}
	for _, tc := range []struct {
		ref, dr float64
		want    []float64
	}{
		{0, 60, []float64{0, -20, -40, -60, -60}},
		{1, 40, []float64{20, 0, -20, -40, -40}},
		{-5, -30, []float64{0, -20, -30, -30, -30}}, // the range's sign is ignored
	} {
		got := recon.LogCompress(env, tc.ref, tc.dr)
		for i := range env {
			if math.Abs(got[i]-tc.want[i]) > 1e-12 {
				t.Errorf("LogCompress(ref %g, range %g)[%d] = %g, want %g", tc.ref, tc.dr, i, got[i], tc.want[i])
			}
		}
	}
	for i, v := range recon.LogCompress([]float64{0, 0}, 0, 50) {
		if v != -50 {
			t.Errorf("all-zero image, pixel %d: %g, want -50", i, v)
		}
	}
}
