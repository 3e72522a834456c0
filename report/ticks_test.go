package report

import (
	"slices"
	"testing"
)

func TestNiceTicks(t *testing.T) {
	t.Parallel()
	tests := []struct {
		lo, hi float64
		max    int
		want   []string // labelled ticks, worked out by hand from the rule
	}{
		{-20, 20, 7, []string{"-20", "-10", "0", "10", "20"}},
		{5, 60, 8, []string{"10", "20", "30", "40", "50", "60"}},
		{2, 14, 7, []string{"2", "4", "6", "8", "10", "12", "14"}},
		{2, 14, 3, []string{"5", "10"}},
		{0, 1, 6, []string{"0.0", "0.2", "0.4", "0.6", "0.8", "1.0"}},
		{1420, 1620, 9, []string{"1450", "1500", "1550", "1600"}},
		{1420, 1620, 11, []string{"1420", "1440", "1460", "1480", "1500", "1520", "1540", "1560", "1580", "1600", "1620"}},
		{0, 2e-9, 3, []string{"0", "1e-09", "2e-09"}},
	}
	for _, tc := range tests {
		var got []string
		for _, tk := range (niceTicks{max: tc.max}).Ticks(tc.lo, tc.hi) {
			if tk.Label != "" {
				got = append(got, tk.Label)
			}
		}
		if !slices.Equal(got, tc.want) {
			t.Errorf("[%g, %g] max %d: %q, want %q", tc.lo, tc.hi, tc.max, got, tc.want)
		}
	}
	if got := (niceTicks{max: 5}).Ticks(1, 1); got != nil {
		t.Errorf("empty range: %v", got)
	}
}
