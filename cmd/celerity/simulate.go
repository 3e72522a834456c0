package main

import (
	"fmt"
	"time"

	"celerity/acq"
	"celerity/sim"
)

// SimulateCmd simulates an acquisition from a scenario file.
type SimulateCmd struct {
	Scenario string  `help:"Scenario file (YAML; see docs/scenario.md)." type:"existingfile" required:"" placeholder:"FILE.yaml"`
	Out      string  `help:"Acquisition folder to create." required:"" placeholder:"DIR"`
	Seed     *uint64 `help:"Random seed (overrides the scenario's seed)."`
	Force    bool    `help:"Replace an existing output folder."`
	JSON     bool    `name:"json" help:"Print a summary as JSON on stdout."`
}

// Help is the long help.
func (c *SimulateCmd) Help() string {
	return `Runs the forward model of the scenario: every firing element emits a Gaussian pulse at its own
firing delay (plus its screen delay), every scatterer re-radiates, every element records the sum.
The folder gets acquisition.yaml, channels.npy and firing_delays.npy, and the ground truth
(truth.yaml, truth_screen.npy). The same scenario and seed give the same bytes.`
}

// Run runs the command.
func (c *SimulateCmd) Run(g *Globals) error {
	sc, err := sim.LoadScenario(c.Scenario)
	if err != nil {
		return err
	}
	if c.Seed != nil {
		sc.Seed = *c.Seed
	}
	res, err := simulateScenario(g, sc)
	if err != nil {
		return err
	}
	if err := acq.Save(c.Out, res.acq, res.truth, c.Force); err != nil {
		return err
	}
	summary := map[string]any{
		"out":         c.Out,
		"events":      res.acq.NumEvents(),
		"elements":    res.acq.NumElements(),
		"samples":     res.acq.NumSamples,
		"scatterers":  res.scatterers,
		"seed":        sc.Seed,
		"seconds":     res.elapsed.Seconds(),
		"channels_mb": float64(res.acq.NumEvents()*res.acq.NumElements()*res.acq.NumSamples*4) / 1e6,
	}
	if c.JSON {
		return printJSON(g.stdout, summary)
	}
	fmt.Fprintf(g.stderr, "simulated %d events x %d elements x %d samples from %d scatterers in %.1f s (seed %d)\nwrote %s\n",
		res.acq.NumEvents(), res.acq.NumElements(), res.acq.NumSamples, res.scatterers, res.elapsed.Seconds(), sc.Seed, c.Out)
	return nil
}

type simResult struct {
	acq        *acq.Acquisition
	truth      *acq.Truth
	scatterers int
	elapsed    time.Duration
}

func simulateScenario(g *Globals, sc *sim.Scenario) (*simResult, error) {
	cfg, truth, err := sc.Build()
	if err != nil {
		return nil, err
	}
	bar := g.newProgress(len(cfg.Events), "simulating")
	cfg.Progress = bar.set
	t0 := time.Now()
	a, err := sim.Simulate(cfg)
	bar.finish()
	if err != nil {
		return nil, err
	}
	if sc.OutputIQ {
		a, err = sim.ToIQ(a, a.Probe.CenterFrequencyHz)
		if err != nil {
			return nil, err
		}
	}
	return &simResult{acq: a, truth: truth, scatterers: len(cfg.Scatterers), elapsed: time.Since(t0)}, nil
}
