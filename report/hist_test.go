package report

import (
	"bytes"
	"io"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"
)

func TestHistGolden(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(1, 2))
	vals := make([]float64, 40)
	for i := range vals {
		vals[i] = 1540 + 6*rng.NormFloat64()
	}
	vals = append(vals, math.NaN())
	var buf bytes.Buffer
	if err := HistPNG(&buf, Hist{
		Title: "Estimated speed, 40 phantoms", XLabel: "speed of sound (m/s)", Values: vals,
		WidthCM: 12, HeightCM: 8, DPI: 96,
	}); err != nil {
		t.Fatal(err)
	}
	checkGolden(t, "hist.png", buf.Bytes())
}

func TestHistDegenerate(t *testing.T) {
	t.Parallel()
	nan := math.NaN()
	tests := []struct {
		name string
		h    Hist
	}{
		{"zero value", Hist{}},
		{"all NaN", Hist{Values: []float64{nan, math.Inf(1)}}},
		{"one value", Hist{Values: []float64{1540}}},
		{"constant", Hist{Values: []float64{0, 0, 0}, Bins: 5}},
		{"many bins", Hist{Values: []float64{1, 2, 3}, Bins: 500}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			var buf bytes.Buffer
			if err := HistPNG(&buf, tc.h); err != nil {
				t.Fatal(err)
			}
			decodePNG(t, buf.Bytes())
		})
	}
}

func TestHistErrors(t *testing.T) {
	t.Parallel()
	for _, tc := range []struct {
		name   string
		h      Hist
		substr string
	}{
		{"negative bins", Hist{Bins: -1}, "Bins"},
		{"bad size", Hist{WidthCM: 1}, "WidthCM"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			err := HistPNG(io.Discard, tc.h)
			if err == nil || !strings.Contains(err.Error(), tc.substr) {
				t.Errorf("error %v, want one mentioning %q", err, tc.substr)
			}
		})
	}
}

func TestCounts(t *testing.T) {
	t.Parallel()
	tests := []struct {
		name  string
		vs    []float64 // sorted
		nbins int
		want  []int // counted by hand; the top edge falls in the last bin
	}{
		{"even", []float64{0, 1, 2, 3, 4}, 2, []int{2, 3}},
		{"edges", []float64{0, 0.5, 1}, 4, []int{1, 0, 1, 1}},
		{"constant", []float64{7, 7, 7}, 3, []int{3}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			t.Parallel()
			got := counts(tc.vs, binEdges(tc.vs, tc.nbins))
			if !slices.Equal(got, tc.want) {
				t.Errorf("counts %v, want %v", got, tc.want)
			}
		})
	}
}
