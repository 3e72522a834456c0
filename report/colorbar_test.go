package report

import (
	"slices"
	"testing"
)

func TestDBTicks(t *testing.T) {
	t.Parallel()
	tests := []struct {
		dr   float64
		max  int
		want []float64 // 0 down to -dr in the smallest round step that fits
	}{
		{60, 7, []float64{0, -10, -20, -30, -40, -50, -60}},
		{60, 4, []float64{0, -20, -40, -60}},
		{40, 7, []float64{0, -10, -20, -30, -40}},
		{0.5, 7, []float64{0}},
		{55, 7, []float64{0, -10, -20, -30, -40, -50}},
	}
	for _, tc := range tests {
		if got := dbTicks(tc.dr, tc.max); !slices.Equal(got, tc.want) {
			t.Errorf("dr %g max %d: %v, want %v", tc.dr, tc.max, got, tc.want)
		}
	}
}
