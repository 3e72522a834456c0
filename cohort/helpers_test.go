package cohort

import (
	"fmt"
	"os"
	"path/filepath"
	"sync"
	"testing"

	"celerity/acq"
	"celerity/sim"
)

// smallScenario is a fast acquisition: a 40-element 5 MHz array, three
// plane waves over +/-6 degrees, two wires in a little speckle, 30 dB
// channel SNR; the medium's speed is filled in.
const smallScenario = `format: celerity.scenario/1
seed: 3
probe: {center_frequency_mhz: 5, fractional_bandwidth: 0.7, count: 40, pitch_mm: 0.3}
depth_mm: 20
transmit:
  plane_waves: {count: 3, max_angle_deg: 6}
medium:
  speed_mps: %g
phantom:
  speckle: {region_mm: [-5, 5, 5, 19], density: 6}
  targets:
    positions_mm: [[-2, 10], [2, 15]]
noise: {snr_db: 30}
`

// trueSpeeds are the media of the fixture's acquisitions.
var trueSpeeds = map[string]float64{"site-a/subj1460": 1460, "site-a/subj1520": 1520, "site-b/subj1580": 1580}

// brokenID is the fixture's corrupt acquisition: a copy of subj1520 whose
// channels.npy is cut short.
const brokenID = "site-b/broken"

var (
	fixtureOnce sync.Once
	fixtureDir  string
	fixtureErr  error
)

// fixture simulates the cohort once: site-a/subj1460, site-a/subj1520,
// site-b/subj1580 and site-b/broken under one root folder. Tests only read
// it.
func fixture(t *testing.T) string {
	t.Helper()
	fixtureOnce.Do(func() {
		fixtureDir, fixtureErr = os.MkdirTemp("", "celerity-cohort-")
		if fixtureErr != nil {
			return
		}
		for id, c := range trueSpeeds {
			sc, err := sim.ParseScenario("small.yaml", fmt.Appendf(nil, smallScenario, c))
			if err != nil {
				fixtureErr = err
				return
			}
			cfg, truth, err := sc.Build()
			if err != nil {
				fixtureErr = err
				return
			}
			a, err := sim.Simulate(cfg)
			if err != nil {
				fixtureErr = err
				return
			}
			if err := acq.Save(filepath.Join(fixtureDir, filepath.FromSlash(id)), a, truth, false); err != nil {
				fixtureErr = err
				return
			}
		}
		fixtureErr = copyAcquisition(filepath.Join(fixtureDir, "site-a", "subj1520"), filepath.Join(fixtureDir, filepath.FromSlash(brokenID)))
		if fixtureErr == nil {
			fixtureErr = os.Truncate(filepath.Join(fixtureDir, filepath.FromSlash(brokenID), "channels.npy"), 5000)
		}
	})
	if fixtureErr != nil {
		t.Fatal(fixtureErr)
	}
	return fixtureDir
}

// copyAcquisition copies the files of folder src into a new folder dst.
func copyAcquisition(src, dst string) error {
	if err := os.MkdirAll(dst, 0o755); err != nil {
		return err
	}
	ents, err := os.ReadDir(src)
	if err != nil {
		return err
	}
	for _, e := range ents {
		b, err := os.ReadFile(filepath.Join(src, e.Name()))
		if err != nil {
			return err
		}
		if err := os.WriteFile(filepath.Join(dst, e.Name()), b, 0o644); err != nil {
			return err
		}
	}
	return nil
}

func TestMain(m *testing.M) {
	code := m.Run()
	if fixtureDir != "" {
		os.RemoveAll(fixtureDir)
	}
	os.Exit(code)
}
