// Package refspeed gives reference speeds of sound: pure water against
// temperature and a small table of soft-tissue ranges for presets.
//
// Units: m/s and degrees Celsius.
//
// References:
//   - Marczak W. Water as a standard in the measurements of speed of sound in
//     liquids. JASA 102(5), 1997 (fifth-order polynomial, 0-95 C).
//   - Bilaniuk N, Wong GSK. Speed of sound in pure water as a function of
//     temperature. JASA 93, 1993 (agrees within 0.05 m/s).
//   - Goss SA, Johnston RL, Dunn F. Comprehensive compilation of empirical
//     ultrasonic properties of mammalian tissues. JASA 64, 1978; and JASA 68,
//     1980 (tissue ranges).
package refspeed

import (
	"fmt"
	"math"
	"sort"
	"strings"
)

// marczak holds the coefficients of c(T) = sum a_k T^k, T in C (Marczak 1997).
var marczak = [6]float64{1.402385e3, 5.038813, -5.799136e-2, 3.287156e-4, -1.398845e-6, 2.787860e-9}

// WaterMinC and WaterMaxC bound the validity of the water polynomial.
const (
	WaterMinC = 0.0
	WaterMaxC = 95.0
)

// Water returns the speed of sound in pure water at temperature tC (Celsius)
// at atmospheric pressure, from Marczak's fifth-order polynomial. It returns
// an error outside 0-95 C, where the fit is not valid.
func Water(tC float64) (float64, error) {
	if math.IsNaN(tC) || tC < WaterMinC || tC > WaterMaxC {
		return 0, fmt.Errorf("water temperature %g C is outside the 0-95 C range of the reference polynomial", tC)
	}
	c := 0.0
	for k := len(marczak) - 1; k >= 0; k-- {
		c = c*tC + marczak[k]
	}
	return c, nil
}

// WaterTemperature inverts Water: the temperature (C) at which pure water has
// speed c, on the rising branch below the maximum near 74 C.
func WaterTemperature(c float64) (float64, error) {
	lo, hi := WaterMinC, 74.0
	clo, _ := Water(lo)
	chi, _ := Water(hi)
	if !(c >= clo && c <= chi) {
		return 0, fmt.Errorf("speed %g m/s is outside pure water's %.1f-%.1f m/s between 0 and 74 C", c, clo, chi)
	}
	for range 100 {
		mid := (lo + hi) / 2
		v, _ := Water(mid)
		if v < c {
			lo = mid
		} else {
			hi = mid
		}
	}
	return (lo + hi) / 2, nil
}

// Tissue is a soft-tissue speed range for presets.
type Tissue struct {
	Name           string
	MinMPS, MaxMPS float64
	NominalMPS     float64 // the middle of the range
	Source         string
}

var tissues = []Tissue{
	{Name: "fat", MinMPS: 1450, MaxMPS: 1490},
	{Name: "breast", MinMPS: 1490, MaxMPS: 1530},
	{Name: "muscle", MinMPS: 1520, MaxMPS: 1600},
	{Name: "liver", MinMPS: 1555, MaxMPS: 1635},
	{Name: "kidney", MinMPS: 1530, MaxMPS: 1590},
}

func init() {
	for i := range tissues {
		tissues[i].NominalMPS = (tissues[i].MinMPS + tissues[i].MaxMPS) / 2
		tissues[i].Source = "published ranges, compilations of Goss et al. (JASA 1978, 1980) and later measurements"
	}
}

// Tissues returns the tissue table.
func Tissues() []Tissue { return append([]Tissue(nil), tissues...) }

// TissueByName returns the named tissue.
func TissueByName(name string) (Tissue, error) {
	for _, t := range tissues {
		if strings.EqualFold(t.Name, name) {
			return t, nil
		}
	}
	var names []string
	for _, t := range tissues {
		names = append(names, t.Name)
	}
	sort.Strings(names)
	return Tissue{}, fmt.Errorf("unknown tissue %q (have %s)", name, strings.Join(names, ", "))
}
