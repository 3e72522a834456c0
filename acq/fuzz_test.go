package acq_test

import (
	"path/filepath"
	"reflect"
	"strings"
	"testing"

	"celerity/acq"
)

// The seed corpora live in testdata/fuzz/FuzzManifest and
// testdata/fuzz/FuzzTruth: the fixture documents and near-valid variants
// (unknown, duplicate and missing keys, non-finite numbers, paths leaving the
// folder, aliases, flow style). Run a fuzzer with
//
//	go test ./acq -run '^$' -fuzz FuzzManifest -fuzztime 60s

// fuzzArrays writes the arrays a fuzzed manifest may name: the fixture's
// channels (RF), delays and weights, plus IQ channels, a one-event set and
// arrays with bad values.
func fuzzArrays(f *testing.F, dir string) {
	writeFixture(f, dir, false)
	iq, _, _ := fixtureArrays(true)
	writeFile(f, filepath.Join(dir, "channels_iq.npy"), iq)
	writeFile(f, filepath.Join(dir, "one_delays.npy"), f64Array([]int{1, fixN}, 0, 1e-7, 2e-7, 3e-7))
	writeFile(f, filepath.Join(dir, "one_channels.npy"), npyFile("<f4", false, []int{1, fixN, 2}, f32Bytes(1, 2, 3, 4, 5, 6, 7, 8)))
	writeFile(f, filepath.Join(dir, "silent_weights.npy"), f64Array([]int{fixE, fixN}, 1, 0, 0, 0, 0, 0, 0, 0))
	writeFile(f, filepath.Join(dir, "three_delays.npy"), f64Array([]int{fixE, 3}, 0, 0, 0, 0, 0, 0))
}

func FuzzManifest(f *testing.F) {
	dir := f.TempDir()
	fuzzArrays(f, dir)
	out := filepath.Join(f.TempDir(), "saved")
	f.Add([]byte(fixtureManifest))
	f.Fuzz(func(t *testing.T, manifest []byte) {
		writeFile(t, filepath.Join(dir, "acquisition.yaml"), manifest)
		a, err := acq.LoadWith(dir, acq.LoadOptions{MaxBytes: 1 << 16})
		if err != nil {
			if !strings.Contains(err.Error(), dir) {
				t.Fatalf("error %q does not name the folder", err)
			}
			return
		}
		if err := a.Validate(); err != nil {
			t.Fatalf("Load accepted an acquisition that fails Validate: %v", err)
		}
		// Whatever loads saves and reads back unchanged.
		if err := acq.Save(out, a, nil, true); err != nil {
			t.Fatalf("Save of a loaded acquisition: %v", err)
		}
		b, err := acq.Load(out)
		if err != nil {
			t.Fatalf("Load of a saved acquisition: %v", err)
		}
		compareAcq(t, a, b)
	})
}

func FuzzTruth(f *testing.F) {
	dir := f.TempDir()
	writeTruthFixture(f, dir, validTruth)
	writeFile(f, filepath.Join(dir, "two_screen.npy"), f64Array([]int{2}, 1e-8, -1e-8))
	writeFile(f, filepath.Join(dir, "matrix_screen.npy"), f64Array([]int{2, 2}, 0, 0, 0, 0))
	out := f.TempDir()
	f.Add([]byte(validTruth))
	f.Fuzz(func(t *testing.T, doc []byte) {
		writeFile(t, filepath.Join(dir, "truth.yaml"), doc)
		tr, err := acq.LoadTruth(dir)
		if err != nil {
			if !strings.Contains(err.Error(), dir) {
				t.Fatalf("error %q does not name the folder", err)
			}
			return
		}
		if tr == nil {
			t.Fatal("LoadTruth returned neither a truth nor an error")
		}
		n := 0
		if tr.Screen != nil {
			n = len(tr.Screen.DelaysS)
		}
		if err := tr.Validate(n); err != nil {
			t.Fatalf("LoadTruth accepted a truth that fails Validate: %v", err)
		}
		// Whatever loads writes and reads back unchanged.
		if err := acq.WriteTruth(out, tr); err != nil {
			t.Fatal(err)
		}
		back, err := acq.LoadTruth(out)
		if err != nil {
			t.Fatalf("LoadTruth of a written truth: %v\n%s", err, tr.YAML())
		}
		if !reflect.DeepEqual(tr, back) {
			t.Fatalf("truth changed on a round trip\n got %+v\nwant %+v", back, tr)
		}
	})
}
