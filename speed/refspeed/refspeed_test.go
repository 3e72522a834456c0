package refspeed

import (
	"math"
	"testing"
)

func TestWaterMarczak(t *testing.T) {
	t.Parallel()
	// Reference values: Marczak, JASA 102(5), 1997, as tabulated in CHECKS.md
	// (Bilaniuk & Wong 1993 agrees within 0.05 m/s).
	const tol = 0.01 // m/s: the table gives two decimals
	for _, tc := range []struct{ tC, want float64 }{
		{0, 1402.38}, {20, 1482.38}, {25, 1496.73}, {37, 1523.65},
	} {
		got, err := Water(tc.tC)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-tc.want) > tol {
			t.Errorf("Water(%g) = %.3f, want %.2f (Marczak 1997)", tc.tC, got, tc.want)
		}
		back, err := WaterTemperature(got)
		if err != nil || math.Abs(back-tc.tC) > 1e-6 {
			t.Errorf("WaterTemperature(%g) = %g, %v; want %g", got, back, err, tc.tC)
		}
	}
	for _, bad := range []float64{-1, 96, math.NaN()} {
		if _, err := Water(bad); err == nil {
			t.Errorf("Water(%g): want an out-of-range error", bad)
		}
	}
}

func TestTissues(t *testing.T) {
	t.Parallel()
	// Ranges: CHECKS.md soft-tissue table (published ranges).
	liver, err := TissueByName("Liver")
	if err != nil || liver.MinMPS != 1555 || liver.MaxMPS != 1635 {
		t.Errorf("liver = %+v, %v", liver, err)
	}
	if _, err := TissueByName("bone"); err == nil {
		t.Error("unknown tissue: want an error")
	}
}
