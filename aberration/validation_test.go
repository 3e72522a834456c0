package aberration_test

import (
	"fmt"
	"math"
	"os"
	"runtime"
	"strings"
	"testing"
	"time"

	"celerity/aberration"
	"celerity/internal/atomicfile"
)

// TestValidationTable runs the full validation of the profile estimators:
// a 128-element linear array (linear-128), screens of 20, 40 and 60 ns rms
// with correlation lengths of 2.5 and 6 mm, 11 compounded plane waves and
// synthetic aperture, a wire in speckle and speckle only, three seeds, each
// method in its default configuration. It is opt-in (about half an hour on
// two cores):
//
//	CELERITY_VALIDATE=1 CELERITY_VALIDATE_OUT=/tmp/aberration_validation.md \
//	    go test ./aberration -run TestValidationTable -timeout 120m -v
//
// and writes a markdown table to CELERITY_VALIDATE_OUT (rewritten after
// every acquisition, so that a partial run leaves what it measured).
func TestValidationTable(t *testing.T) {
	if os.Getenv("CELERITY_VALIDATE") != "1" {
		t.Skip("set CELERITY_VALIDATE=1 to run the validation table")
	}
	out := os.Getenv("CELERITY_VALIDATE_OUT")
	seeds := []int{1, 2, 3}
	methods := []aberration.Method{aberration.Beamsum, aberration.Pairs, aberration.Neighbour}
	var groups []*valGroup
	for _, tx := range []string{synthetic, planeWaves} {
		for _, wire := range []bool{true, false} {
			for _, corr := range []float64{2.5, 6} {
				for _, rms := range []float64{20, 40, 60} {
					for _, m := range methods {
						groups = append(groups, &valGroup{tx: tx, wire: wire, rms: rms, corr: corr, method: m})
					}
				}
			}
		}
	}
	start := time.Now()
	for gi := 0; gi < len(groups); gi += len(methods) {
		g0 := groups[gi]
		for _, seed := range seeds {
			spec := caseSpec{Seed: 1000*seed + gi, Transmit: g0.tx, RMSNS: g0.rms, CorrMM: g0.corr, Wire: g0.wire}
			f, err := build(spec)
			if err != nil {
				t.Fatalf("%v: %v", spec, err)
			}
			for k, m := range methods {
				g := groups[gi+k]
				c0, w0 := cpuSeconds(), time.Now()
				res, err := aberration.Estimate(f.a, f.ch, aberration.Config{Model: f.model(), Method: m})
				if err != nil {
					t.Fatalf("%v, %v: %v", spec, m, err)
				}
				run := valRun{wall: time.Since(w0).Seconds(), cpu: cpuSeconds() - c0, iterations: res.Iterations}
				run.err, run.corr = score(f, res.ProfileS)
				q := removeQuadratic(res.ProfileS, f.x)
				tq := removeQuadratic(f.screen, f.x)
				run.errQuad = rmsOf(diff(q, tq)) / rmsOf(tq)
				g.runs = append(g.runs, run)
				t.Logf("%v, %v: error %.1f %% (%.1f %% without quadratic), correlation %.4f, %d iterations, %.1f s (%.1f CPU s), notes %q",
					spec, m, 100*run.err, 100*run.errQuad, run.corr, run.iterations, run.wall, run.cpu, res.Notes)
			}
			runtime.GC() // the next acquisition replaces this one
		}
		if out != "" {
			if err := writeValidation(out, groups, seeds, time.Since(start)); err != nil {
				t.Fatal(err)
			}
		}
	}
	var b strings.Builder
	valMarkdown(&b, groups, seeds, time.Since(start))
	t.Log("\n" + b.String())
}

type valRun struct {
	err, errQuad, corr float64
	iterations         int
	wall, cpu          float64
}

type valGroup struct {
	tx        string
	wire      bool
	rms, corr float64
	method    aberration.Method
	runs      []valRun
}

// targets returns the targets for the group: wire <= 10 %, >= 0.95;
// speckle <= 25 %, >= 0.9.
func (g *valGroup) targets() (maxErr, minCorr float64) {
	if g.wire {
		return maxErrWire, minCorrWire
	}
	return maxErrSpeckle, minCorrSpeckle
}

func diff(a, b []float64) []float64 {
	d := make([]float64, len(a))
	for i := range a {
		d[i] = a[i] - b[i]
	}
	return d
}

func writeValidation(path string, groups []*valGroup, seeds []int, took time.Duration) error {
	var b strings.Builder
	valMarkdown(&b, groups, seeds, took)
	return atomicfile.WriteBytes(path, true, []byte(b.String()))
}

func valMarkdown(b *strings.Builder, groups []*valGroup, seeds []int, took time.Duration) {
	fmt.Fprintf(b, "Seeds per row: %d. Errors are rms differences from the true screen after removing the mean and linear trend of both, "+
		"as %% of the true (detrended) rms; \"no quad.\" also removes the quadratic. Targets: wire <= 10 %%, >= 0.95; speckle <= 25 %%, >= 0.9. "+
		"Run time %s on %d CPUs (GOMAXPROCS).\n\n", len(seeds), took.Round(time.Second), runtime.GOMAXPROCS(0))
	b.WriteString("| transmit | target | screen (ns / mm) | method | error % mean | error % worst | no quad. % mean | correlation mean | correlation worst | iterations | s per estimate | CPU s | pass |\n")
	b.WriteString("|---|---|---|---|---|---|---|---|---|---|---|---|---|\n")
	type tally struct{ pass, n int }
	sum := map[string]*tally{}
	var keys []string
	for _, g := range groups {
		if len(g.runs) == 0 {
			continue
		}
		maxErr, minCorr := g.targets()
		var em, ew, qm, cm, it, wall, cpu float64
		cw := math.Inf(1)
		pass := 0
		for _, r := range g.runs {
			em += r.err
			ew = math.Max(ew, r.err)
			qm += r.errQuad
			cm += r.corr
			if !(r.corr >= cw) { // NaN counts as worst
				cw = r.corr
			}
			it += float64(r.iterations)
			wall += r.wall
			cpu += r.cpu
			if r.err <= maxErr && r.corr >= minCorr {
				pass++
			}
		}
		n := float64(len(g.runs))
		tx := "11 plane waves"
		if g.tx == synthetic {
			tx = "synthetic aperture"
		}
		target := "speckle"
		if g.wire {
			target = "wire"
		}
		fmt.Fprintf(b, "| %s | %s | %g / %g | %s | %.1f | %.1f | %.1f | %.3f | %.3f | %.1f | %.1f | %.1f | %d/%d |\n",
			tx, target, g.rms, g.corr, g.method, 100*em/n, 100*ew, 100*qm/n, cm/n, cw, it/n, wall/n, cpu/n, pass, len(g.runs))
		k := fmt.Sprintf("| %s | %s | %s |", tx, target, g.method)
		if sum[k] == nil {
			sum[k] = &tally{}
			keys = append(keys, k)
		}
		sum[k].pass += pass
		sum[k].n += len(g.runs)
	}
	b.WriteString("\nPasses by transmit, target and method (all screens and seeds):\n\n| transmit | target | method | pass |\n|---|---|---|---|\n")
	for _, k := range keys {
		fmt.Fprintf(b, "%s %d/%d |\n", k, sum[k].pass, sum[k].n)
	}
}
