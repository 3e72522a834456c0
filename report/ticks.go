package report

import (
	"math"
	"strconv"

	"gonum.org/v1/plot"
	"gonum.org/v1/plot/vg"
)

// niceTicks is a plot.Ticker that puts labelled ticks at multiples of the
// smallest step of the form {1, 2, 5} x 10^k that gives at most max labels,
// with an unlabelled tick halfway between.
type niceTicks struct{ max int }

// Ticks implements plot.Ticker.
func (t niceTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || math.IsInf(hi-lo, 0) {
		return nil
	}
	step := niceStep(lo, hi, max(t.max, 2))
	var ticks []plot.Tick
	first := math.Ceil(lo/step*2-1e-9) / 2
	for k := first; k*step <= hi+step*1e-9; k += 0.5 {
		v := k * step
		if math.Abs(v) < step*1e-9 {
			v = 0
		}
		tk := plot.Tick{Value: v}
		if k == math.Trunc(k) {
			tk.Label = tickLabel(v, step)
		}
		ticks = append(ticks, tk)
	}
	return ticks
}

// tickLabel formats tick value v on an axis with label step step: fixed point
// with as many decimals as the step needs, or in exponent form for very small
// steps and very large values.
func tickLabel(v, step float64) string {
	e := math.Floor(math.Log10(step) + 1e-9)
	if e >= -3 && math.Abs(v) < 1e6 {
		return strconv.FormatFloat(v, 'f', max(0, -int(e)), 64)
	}
	if v == 0 {
		return "0"
	}
	sig := int(math.Floor(math.Log10(math.Abs(v))+1e-9)-e) + 1
	return strconv.FormatFloat(v, 'g', max(sig, 1), 64)
}

// niceStep returns the smallest step s = {1, 2, 5} x 10^k such that
// [lo, hi] holds at most n multiples of s.
func niceStep(lo, hi float64, n int) float64 {
	span := hi - lo
	s := math.Pow(10, math.Floor(math.Log10(span/float64(n)))-1)
	for {
		for _, m := range []float64{1, 2, 5} {
			st := m * s
			if math.Floor(hi/st+1e-9)-math.Ceil(lo/st-1e-9)+1 <= float64(n) {
				return st
			}
		}
		s *= 10
	}
}

// ticksFor returns how many labelled ticks fit along an axis of the given
// length, when labels need at least spacing between their positions.
func ticksFor(length, spacing vg.Length, most int) int {
	return max(2, min(most, int(length/spacing)+1))
}
