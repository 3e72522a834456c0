package bench

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"time"

	"celerity/acq"
	"celerity/internal/atomicfile"
	"celerity/sim"
)

// Names inside a case's cache folder. The acquisition and the truth live in
// sibling folders: an estimator is given the acquisition folder alone.
const (
	caseFile     = "case.json"
	acqFolder    = "acquisition"
	truthFolder  = "truth"
	caseFormatV1 = "celerity.bench-case/1"
)

// caseManifest is case.json: what the folder holds.
type caseManifest struct {
	Format     string          `json:"format"`
	ID         string          `json:"id"`
	Definition json.RawMessage `json:"definition"`
}

// CasePaths are the folders of a generated case.
type CasePaths struct {
	Dir, Acquisition, Truth string
}

func casePaths(cache, id string) CasePaths {
	dir := filepath.Join(cache, id)
	return CasePaths{Dir: dir, Acquisition: filepath.Join(dir, acqFolder), Truth: filepath.Join(dir, truthFolder)}
}

// EnsureCase returns the folders of case c under cache, simulating it first
// unless a complete folder with the same definition is there. The folder is
// built under a temporary name and renamed into place, so a folder that
// exists is complete. It also returns the simulation's wall time (0 when
// the case was cached).
func EnsureCase(cache string, c *Case) (CasePaths, time.Duration, error) {
	p := casePaths(cache, c.ID)
	if ok, err := cachedCase(p, c); err != nil || ok {
		return p, 0, err
	}
	t0 := time.Now()
	d, err := atomicfile.NewDir(p.Dir, false)
	if err != nil {
		return p, 0, err
	}
	defer d.Abort()
	if err := generate(d.Path(), c); err != nil {
		return p, 0, err
	}
	if err := d.Commit(); err != nil {
		// another process may have made the same case meanwhile
		if ok, err2 := cachedCase(p, c); err2 == nil && ok {
			return p, time.Since(t0), nil
		}
		return p, 0, err
	}
	return p, time.Since(t0), nil
}

// cachedCase reports whether p holds case c.
func cachedCase(p CasePaths, c *Case) (bool, error) {
	b, err := os.ReadFile(filepath.Join(p.Dir, caseFile))
	if errors.Is(err, os.ErrNotExist) {
		if _, serr := os.Stat(p.Dir); serr == nil {
			return false, fmt.Errorf("%s: a case folder without %s; remove it to regenerate the case", p.Dir, caseFile)
		}
		return false, nil
	}
	if err != nil {
		return false, err
	}
	var m caseManifest
	if err := json.Unmarshal(b, &m); err != nil || m.Format != caseFormatV1 {
		return false, fmt.Errorf("%s: not a case manifest (%v); remove the folder to regenerate the case", filepath.Join(p.Dir, caseFile), err)
	}
	var def bytes.Buffer
	if err := json.Compact(&def, m.Definition); err != nil || m.ID != c.ID || !bytes.Equal(def.Bytes(), c.Definition) {
		return false, fmt.Errorf("%s: holds another case definition; remove the folder to regenerate the case", p.Dir)
	}
	return true, nil
}

// generate simulates c into dir.
func generate(dir string, c *Case) error {
	cfg, truth, err := c.Scenario.Build()
	if err != nil {
		return fmt.Errorf("building the scenario: %w", err)
	}
	a, err := sim.Simulate(cfg)
	if err != nil {
		return fmt.Errorf("simulating: %w", err)
	}
	if c.Scenario.OutputIQ {
		if a, err = sim.ToIQ(a, a.Probe.CenterFrequencyHz); err != nil {
			return err
		}
	}
	// The description would otherwise carry the scenario's text to the
	// estimators; the folder says only which case it is.
	a.Description = "benchmark case " + c.ID
	truth.Description = "benchmark case " + c.ID
	if err := acq.Save(filepath.Join(dir, acqFolder), a, nil, false); err != nil {
		return err
	}
	if err := os.Mkdir(filepath.Join(dir, truthFolder), 0o755); err != nil {
		return err
	}
	if err := acq.WriteTruth(filepath.Join(dir, truthFolder), truth); err != nil {
		return err
	}
	m := caseManifest{Format: caseFormatV1, ID: c.ID, Definition: c.Definition}
	b, err := json.MarshalIndent(m, "", "  ")
	if err != nil {
		return err
	}
	return atomicfile.WriteBytes(filepath.Join(dir, caseFile), false, append(b, '\n'))
}
