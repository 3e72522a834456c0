package acq_test

import (
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"celerity/acq"
)

// edit changes one thing in a fixture folder.
type edit func(t *testing.T, dir string)

// replace edits the manifest by exact substring replacement; old must occur
// exactly once, so that a stale case cannot pass by testing nothing.
func replace(old, new string) edit {
	return func(t *testing.T, dir string) {
		t.Helper()
		p := filepath.Join(dir, "acquisition.yaml")
		m := string(readFile(t, p))
		if n := strings.Count(m, old); n != 1 {
			t.Fatalf("fixture manifest holds %q %d times", old, n)
		}
		writeFile(t, p, []byte(strings.Replace(m, old, new, 1)))
	}
}

// manifest replaces the whole manifest.
func manifest(text string) edit {
	return func(t *testing.T, dir string) { writeFile(t, filepath.Join(dir, "acquisition.yaml"), []byte(text)) }
}

// file replaces an array file.
func file(name string, b []byte) edit {
	return func(t *testing.T, dir string) { writeFile(t, filepath.Join(dir, name), b) }
}

func remove(name string) edit {
	return func(t *testing.T, dir string) {
		if err := os.Remove(filepath.Join(dir, name)); err != nil {
			t.Fatal(err)
		}
	}
}

// patch rewrites an existing file through f.
func patch(name string, f func([]byte) []byte) edit {
	return func(t *testing.T, dir string) {
		p := filepath.Join(dir, name)
		writeFile(t, p, f(readFile(t, p)))
	}
}

func both(es ...edit) edit {
	return func(t *testing.T, dir string) {
		for _, e := range es {
			e(t, dir)
		}
	}
}

// Fixture-shaped arrays for the npy cases.
var (
	goodF32   = f32Bytes(make([]float32, fixE*fixN*fixS)...)
	goodDelay = f64Bytes(make([]float64, fixE*fixN)...)
)

func zeros(n int) []byte { return make([]byte, n) }

func withNaN32(i int, v float32) []byte {
	x := make([]float32, fixE*fixN*fixS)
	x[i] = v
	return npyFile("<f4", false, []int{fixE, fixN, fixS}, f32Bytes(x...))
}

func f64Array(shape []int, v ...float64) []byte {
	return npyFile("<f8", false, shape, f64Bytes(v...))
}

type badCase struct {
	name string
	iq   bool // start from the IQ fixture
	edit edit
	opt  acq.LoadOptions
	want []string // substrings of the error: the file, the field, the gist
}

func badCases() []badCase {
	nan, inf := math.NaN(), math.Inf(1)
	return []badCase{
		// Malformed or incomplete YAML.
		{name: "malformed yaml", edit: manifest("format: celerity.acquisition/1\nprobe: [unclosed\n"),
			want: []string{"acquisition.yaml", "not valid YAML", "line"}},
		{name: "tab indentation", edit: replace("  kind: rf", "\tkind: rf"), want: []string{"acquisition.yaml", "not valid YAML"}},
		{name: "empty manifest", edit: manifest(""), want: []string{"acquisition.yaml", "empty"}},
		{name: "root is a list", edit: manifest("- format\n"), want: []string{"acquisition.yaml", "mapping"}},
		{name: "missing manifest", edit: remove("acquisition.yaml"), want: []string{"acquisition.yaml", "not found"}},
		{name: "missing format", edit: replace("format: celerity.acquisition/1\n", ""), want: []string{"acquisition.yaml", "format", "missing"}},
		{name: "missing probe", edit: replace("probe:\n  center_frequency_hz: 5.0e6\n  fractional_bandwidth: 0.7\n  element_width_m: 0.27e-3\n  linear:\n    count: 4\n    pitch_m: 0.3e-3\n", ""),
			want: []string{"acquisition.yaml", "probe", "missing"}},
		{name: "missing center frequency", edit: replace("  center_frequency_hz: 5.0e6\n", ""), want: []string{"acquisition.yaml", "probe.center_frequency_hz", "missing"}},
		{name: "missing sampling rate", edit: replace("sampling_rate_hz: 20.0e6\n", ""), want: []string{"acquisition.yaml", "sampling_rate_hz", "missing"}},
		{name: "missing assumed speed", edit: replace("assumed_speed_mps: 1540\n", ""), want: []string{"acquisition.yaml", "assumed_speed_mps", "missing"}},
		{name: "missing channels", edit: replace("channels:\n  file: channels.npy\n  kind: rf\n", ""), want: []string{"acquisition.yaml", "channels", "missing"}},
		{name: "missing channels.file", edit: replace("  file: channels.npy\n", ""), want: []string{"acquisition.yaml", "channels.file", "missing"}},
		{name: "missing channels.kind", edit: replace("  kind: rf\n", ""), want: []string{"acquisition.yaml", "channels.kind", "missing"}},
		{name: "missing transmit", edit: replace("transmit:\n  delays_file: firing_delays.npy\n  weights_file: firing_weights.npy\n  labels:\n    - {plane_wave_deg: -10}\n    - {virtual_source_m: [0.0, -0.02]}\n", ""),
			want: []string{"acquisition.yaml", "transmit", "missing"}},
		{name: "missing transmit.delays_file", edit: replace("  delays_file: firing_delays.npy\n", ""), want: []string{"acquisition.yaml", "transmit.delays_file", "missing"}},
		{name: "iq without demodulation frequency", iq: true, edit: replace("  demodulation_frequency_hz: 5.0e6\n", ""),
			want: []string{"acquisition.yaml", "channels.demodulation_frequency_hz", "missing"}},
		{name: "null value", edit: replace("sampling_rate_hz: 20.0e6", "sampling_rate_hz: ~"), want: []string{"acquisition.yaml", "sampling_rate_hz"}},

		// Unknown keys at every level, with the line of the key.
		{name: "unknown top-level key", edit: replace("assumed_speed_mps: 1540\n", "assumed_speed_mps: 1540\nsampling_rate_mhz: 20\n"),
			want: []string{"acquisition.yaml", "sampling_rate_mhz", "unknown key", "line 13"}},
		{name: "unknown probe key", edit: replace("  fractional_bandwidth: 0.7\n", "  fractional_bandwidth: 0.7\n  focus_m: 0.02\n"),
			want: []string{"acquisition.yaml", "probe.focus_m", "unknown key", "line 6"}},
		{name: "unknown probe.linear key", edit: replace("    pitch_m: 0.3e-3\n", "    pitch_m: 0.3e-3\n    kerf_m: 0.03e-3\n"),
			want: []string{"acquisition.yaml", "probe.linear.kerf_m", "unknown key", "line 10"}},
		{name: "unknown channels key", edit: replace("  kind: rf\n", "  kind: rf\n  scale: 2\n"), want: []string{"acquisition.yaml", "channels.scale", "unknown key"}},
		{name: "demodulation frequency for rf", edit: replace("  kind: rf\n", "  kind: rf\n  demodulation_frequency_hz: 5.0e6\n"),
			want: []string{"acquisition.yaml", "channels.demodulation_frequency_hz", "iq"}},
		{name: "unknown transmit key", edit: replace("  delays_file: firing_delays.npy\n", "  delays_file: firing_delays.npy\n  delay_file: x.npy\n"),
			want: []string{"acquisition.yaml", "transmit.delay_file", "unknown key"}},
		{name: "unknown label key", edit: replace("{plane_wave_deg: -10}", "{plane_wave: -10}"), want: []string{"acquisition.yaml", "transmit.labels[0].plane_wave", "unknown key"}},

		// Duplicates, versions, geometries, labels.
		{name: "duplicate top-level key", edit: replace("start_time_s: 0.0\n", "start_time_s: 0.0\nsampling_rate_hz: 40.0e6\n"),
			want: []string{"acquisition.yaml", "sampling_rate_hz", "twice", "line 12"}},
		{name: "duplicate nested key", edit: replace("    count: 4\n", "    count: 4\n    count: 5\n"), want: []string{"acquisition.yaml", "probe.linear.count", "twice"}},
		{name: "wrong format version", edit: replace("celerity.acquisition/1", "celerity.acquisition/2"), want: []string{"acquisition.yaml", "format", "celerity.acquisition/2"}},
		{name: "truth format in manifest", edit: replace("celerity.acquisition/1", "celerity.truth/1"), want: []string{"acquisition.yaml", "format", "unsupported"}},
		{name: "two geometries", edit: replace("  linear:\n", "  convex: {count: 4, pitch_m: 0.3e-3, radius_m: 0.05}\n  linear:\n"),
			want: []string{"acquisition.yaml", "probe", "exactly one of linear, convex or elements_m", "found 2"}},
		{name: "no geometry", edit: replace("  linear:\n    count: 4\n    pitch_m: 0.3e-3\n", ""), want: []string{"acquisition.yaml", "probe", "exactly one", "found 0"}},
		{name: "label with two keys", edit: replace("{plane_wave_deg: -10}", "{plane_wave_deg: -10, single_element: 2}"),
			want: []string{"acquisition.yaml", "transmit.labels[0]", "exactly one"}},
		{name: "empty label", edit: replace("{plane_wave_deg: -10}", "{}"), want: []string{"acquisition.yaml", "transmit.labels[0]", "exactly one"}},
		{name: "label not a mapping", edit: replace("{plane_wave_deg: -10}", "plane_wave_deg"), want: []string{"acquisition.yaml", "transmit.labels[0]", "mapping"}},
		{name: "labels not a list", edit: replace("  labels:\n    - {plane_wave_deg: -10}\n    - {virtual_source_m: [0.0, -0.02]}\n", "  labels: 3\n"),
			want: []string{"acquisition.yaml", "transmit.labels", "list"}},
		{name: "more labels than events", edit: replace("    - {virtual_source_m: [0.0, -0.02]}\n", "    - {virtual_source_m: [0.0, -0.02]}\n    - {single_element: 0}\n"),
			want: []string{"acquisition.yaml", "transmit.labels", "3 labels for 2 events", "firing_delays.npy"}},
		{name: "fewer labels than events", edit: replace("    - {virtual_source_m: [0.0, -0.02]}\n", ""), want: []string{"acquisition.yaml", "transmit.labels", "1 labels for 2 events"}},
		{name: "single element out of range", edit: replace("{plane_wave_deg: -10}", "{single_element: 4}"),
			want: []string{"acquisition.yaml", "transmit.labels[0].single_element", "outside 0..3"}},
		{name: "plane wave at 90 deg", edit: replace("{plane_wave_deg: -10}", "{plane_wave_deg: 90}"), want: []string{"acquisition.yaml", "transmit.labels[0].plane_wave_deg"}},
		{name: "virtual source triple", edit: replace("[0.0, -0.02]", "[0.0, -0.02, 1]"), want: []string{"acquisition.yaml", "transmit.labels[1].virtual_source_m", "pair"}},

		// Non-finite and out-of-range numbers.
		{name: "NaN sampling rate", edit: replace("sampling_rate_hz: 20.0e6", "sampling_rate_hz: .nan"), want: []string{"acquisition.yaml", "sampling_rate_hz", "finite"}},
		{name: "Inf pitch", edit: replace("pitch_m: 0.3e-3", "pitch_m: .inf"), want: []string{"acquisition.yaml", "probe.linear.pitch_m", "finite"}},
		{name: "-Inf centre frequency", edit: replace("center_frequency_hz: 5.0e6", "center_frequency_hz: -.Inf"), want: []string{"acquisition.yaml", "probe.center_frequency_hz", "finite"}},
		{name: "NaN label", edit: replace("{plane_wave_deg: -10}", "{plane_wave_deg: .NaN}"), want: []string{"acquisition.yaml", "transmit.labels[0].plane_wave_deg", "finite"}},
		{name: "NaN start time", edit: replace("start_time_s: 0.0", "start_time_s: .nan"), want: []string{"acquisition.yaml", "start_time_s", "finite"}},
		{name: "text for a number", edit: replace("sampling_rate_hz: 20.0e6", "sampling_rate_hz: 20 MHz"), want: []string{"acquisition.yaml", "sampling_rate_hz", "number"}},
		{name: "zero sampling rate", edit: replace("sampling_rate_hz: 20.0e6", "sampling_rate_hz: 0"), want: []string{"acquisition.yaml", "sampling_rate_hz", "positive"}},
		{name: "negative sampling rate", edit: replace("sampling_rate_hz: 20.0e6", "sampling_rate_hz: -20.0e6"), want: []string{"acquisition.yaml", "sampling_rate_hz", "positive"}},
		{name: "absurd sampling rate", edit: replace("sampling_rate_hz: 20.0e6", "sampling_rate_hz: 1e12"), want: []string{"acquisition.yaml", "sampling_rate_hz", "at most 1e11"}},
		{name: "zero centre frequency", edit: replace("center_frequency_hz: 5.0e6", "center_frequency_hz: 0"), want: []string{"acquisition.yaml", "probe.center_frequency_hz", "positive"}},
		{name: "negative demodulation frequency", iq: true, edit: replace("demodulation_frequency_hz: 5.0e6", "demodulation_frequency_hz: -1"),
			want: []string{"acquisition.yaml", "channels.demodulation_frequency_hz", "negative"}},
		{name: "zero pitch", edit: replace("pitch_m: 0.3e-3", "pitch_m: 0"), want: []string{"acquisition.yaml", "probe.linear.pitch_m", "positive"}},
		{name: "negative pitch", edit: replace("pitch_m: 0.3e-3", "pitch_m: -0.3e-3"), want: []string{"acquisition.yaml", "probe.linear.pitch_m", "positive"}},
		{name: "zero count", edit: replace("count: 4", "count: 0"), want: []string{"acquisition.yaml", "probe.linear.count", "between 1 and"}},
		{name: "negative count", edit: replace("count: 4", "count: -4"), want: []string{"acquisition.yaml", "probe.linear.count", "between 1 and"}},
		{name: "fractional count", edit: replace("count: 4", "count: 4.5"), want: []string{"acquisition.yaml", "probe.linear.count", "whole number"}},
		{name: "huge count", edit: replace("count: 4", "count: 99999999999"), want: []string{"acquisition.yaml", "probe.linear.count"}},
		{name: "zero convex radius", edit: replace("  linear:\n    count: 4\n    pitch_m: 0.3e-3\n", "  convex: {count: 4, pitch_m: 0.3e-3, radius_m: 0}\n"),
			want: []string{"acquisition.yaml", "probe.convex.radius_m", "positive"}},
		{name: "convex without radius", edit: replace("  linear:\n    count: 4\n    pitch_m: 0.3e-3\n", "  convex: {count: 4, pitch_m: 0.3e-3}\n"),
			want: []string{"acquisition.yaml", "probe.convex.radius_m", "missing"}},
		{name: "convex full circle", edit: replace("  linear:\n    count: 4\n    pitch_m: 0.3e-3\n", "  convex: {count: 4, pitch_m: 0.05, radius_m: 0.01}\n"),
			want: []string{"acquisition.yaml", "probe.convex", "full circle"}},
		{name: "negative element width", edit: replace("element_width_m: 0.27e-3", "element_width_m: -1"), want: []string{"acquisition.yaml", "probe.element_width_m"}},
		{name: "bandwidth above 2", edit: replace("fractional_bandwidth: 0.7", "fractional_bandwidth: 2.5"), want: []string{"acquisition.yaml", "probe.fractional_bandwidth"}},
		{name: "assumed speed in km/s", edit: replace("assumed_speed_mps: 1540", "assumed_speed_mps: 1.54"), want: []string{"acquisition.yaml", "assumed_speed_mps", "between 100 and 10000"}},
		{name: "start time of an hour", edit: replace("start_time_s: 0.0", "start_time_s: 3600"), want: []string{"acquisition.yaml", "start_time_s"}},
		{name: "unknown kind", edit: replace("kind: rf", "kind: RF"), want: []string{"acquisition.yaml", "channels.kind", "rf or iq"}},
		{name: "description as a mapping", edit: replace(`description: "error-case fixture"`, "description: {a: 1}"), want: []string{"acquisition.yaml", "description", "text"}},
		{name: "explicit positions: empty", edit: replace("  linear:\n    count: 4\n    pitch_m: 0.3e-3\n", "  elements_m: []\n"),
			want: []string{"acquisition.yaml", "probe.elements_m", "at least one"}},
		{name: "explicit positions: bad pair", edit: replace("  linear:\n    count: 4\n    pitch_m: 0.3e-3\n", "  elements_m: [[0, 0], [1e-3, 0, 0], [2e-3, 0], [3e-3, 0]]\n"),
			want: []string{"acquisition.yaml", "probe.elements_m[1]", "pair"}},
		{name: "explicit positions: NaN", edit: replace("  linear:\n    count: 4\n    pitch_m: 0.3e-3\n", "  elements_m: [[0, 0], [1e-3, .nan], [2e-3, 0], [3e-3, 0]]\n"),
			want: []string{"acquisition.yaml", "probe.elements_m[1][1]", "finite"}},
		{name: "explicit positions: 5 m away", edit: replace("  linear:\n    count: 4\n    pitch_m: 0.3e-3\n", "  elements_m: [[0, 0], [5, 0], [2e-3, 0], [3e-3, 0]]\n"),
			want: []string{"acquisition.yaml", "probe.elements_m[1][0]", "within 1 m"}},

		// File names that leave the folder.
		{name: "channels file ../x.npy", edit: replace("file: channels.npy", "file: ../x.npy"), want: []string{"acquisition.yaml", "channels.file", "inside the acquisition folder", "../x.npy"}},
		{name: "channels file absolute", edit: replace("file: channels.npy", "file: /tmp/channels.npy"), want: []string{"acquisition.yaml", "channels.file", "inside the acquisition folder"}},
		{name: "delays file ../x.npy", edit: replace("delays_file: firing_delays.npy", "delays_file: sub/../../x.npy"), want: []string{"acquisition.yaml", "transmit.delays_file", "inside"}},
		{name: "weights file absolute", edit: replace("weights_file: firing_weights.npy", "weights_file: /etc/passwd"), want: []string{"acquisition.yaml", "transmit.weights_file", "inside"}},
		{name: "empty file name", edit: replace("file: channels.npy", `file: ""`), want: []string{"acquisition.yaml", "channels.file", "inside"}},
		{name: "file name is a list", edit: replace("file: channels.npy", `file: [channels.npy]`), want: []string{"acquisition.yaml", "channels.file", "text"}},

		// Missing arrays.
		{name: "missing channels.npy", edit: remove("channels.npy"), want: []string{"channels.npy", "channels.file", "not found"}},
		{name: "missing firing_delays.npy", edit: remove("firing_delays.npy"), want: []string{"firing_delays.npy", "transmit.delays_file", "not found"}},
		{name: "missing firing_weights.npy", edit: remove("firing_weights.npy"), want: []string{"firing_weights.npy", "transmit.weights_file", "not found"}},
		{name: "channels file is a folder", edit: both(remove("channels.npy"), func(t *testing.T, dir string) { os.Mkdir(filepath.Join(dir, "channels.npy"), 0o755) }),
			want: []string{"channels.npy", "channels.file", "directory"}},

		// .npy problems: magic, version, byte order, dtype, order, rank.
		{name: "bad magic", edit: patch("channels.npy", func(b []byte) []byte { b[1] = 'X'; return b }), want: []string{"channels.npy", "channels.file", "magic"}},
		{name: "not npy at all", edit: file("firing_delays.npy", []byte("delay,0\n")), want: []string{"firing_delays.npy", "transmit.delays_file", "not a .npy file"}},
		{name: "empty npy", edit: file("firing_weights.npy", nil), want: []string{"firing_weights.npy", "transmit.weights_file", "not a .npy file"}},
		{name: "version 4.0", edit: patch("channels.npy", func(b []byte) []byte { b[6] = 4; return b }), want: []string{"channels.npy", "channels.file", "version 4.0"}},
		{name: "version 1.1", edit: patch("firing_delays.npy", func(b []byte) []byte { b[7] = 1; return b }), want: []string{"firing_delays.npy", "transmit.delays_file", "version 1.1"}},
		{name: "big-endian channels", edit: file("channels.npy", npyFile(">f4", false, []int{fixE, fixN, fixS}, goodF32)),
			want: []string{"channels.npy", "channels.file", "big-endian", "little-endian"}},
		{name: "big-endian delays", edit: file("firing_delays.npy", npyFile(">f8", false, []int{fixE, fixN}, goodDelay)),
			want: []string{"firing_delays.npy", "transmit.delays_file", "big-endian"}},
		{name: "float64 channels", edit: file("channels.npy", npyFile("<f8", false, []int{fixE, fixN, fixS}, zeros(8*fixE*fixN*fixS))),
			want: []string{"channels.npy", "channels.file", "<f8", "float32"}},
		{name: "complex64 channels for rf", edit: file("channels.npy", npyFile("<c8", false, []int{fixE, fixN, fixS}, zeros(8*fixE*fixN*fixS))),
			want: []string{"channels.npy", "channels.file", "<c8", "kind rf"}},
		{name: "float32 channels for iq", iq: true, edit: file("channels.npy", npyFile("<f4", false, []int{fixE, fixN, fixS}, goodF32)),
			want: []string{"channels.npy", "channels.file", "<f4", "kind iq", "complex64"}},
		{name: "complex128 channels for iq", iq: true, edit: file("channels.npy", npyFile("<c16", false, []int{fixE, fixN, fixS}, zeros(16*fixE*fixN*fixS))),
			want: []string{"channels.npy", "channels.file", "<c16", "complex64"}},
		{name: "int16 channels", edit: file("channels.npy", npyFile("<i2", false, []int{fixE, fixN, fixS}, goodF32[:len(goodF32)/2])),
			want: []string{"channels.npy", "channels.file", "unsupported dtype", "<i2"}},
		{name: "float32 delays", edit: file("firing_delays.npy", npyFile("<f4", false, []int{fixE, fixN}, goodDelay[:len(goodDelay)/2])),
			want: []string{"firing_delays.npy", "transmit.delays_file", "<f4", "float64"}},
		{name: "float32 weights", edit: file("firing_weights.npy", npyFile("<f4", false, []int{fixE, fixN}, goodDelay[:len(goodDelay)/2])),
			want: []string{"firing_weights.npy", "transmit.weights_file", "<f4", "float64"}},
		{name: "Fortran-order channels", edit: file("channels.npy", npyFile("<f4", true, []int{fixE, fixN, fixS}, goodF32)),
			want: []string{"channels.npy", "channels.file", "Fortran", "C order"}},
		{name: "Fortran-order delays", edit: file("firing_delays.npy", npyFile("<f8", true, []int{fixE, fixN}, goodDelay)),
			want: []string{"firing_delays.npy", "transmit.delays_file", "Fortran"}},
		{name: "2-D channels", edit: file("channels.npy", npyFile("<f4", false, []int{fixE * fixN, fixS}, goodF32)),
			want: []string{"channels.npy", "channels.file", "3 dimensions"}},
		{name: "1-D delays", edit: file("firing_delays.npy", f64Array([]int{fixE * fixN}, make([]float64, fixE*fixN)...)),
			want: []string{"firing_delays.npy", "transmit.delays_file", "2 dimensions"}},
		{name: "3-D weights", edit: file("firing_weights.npy", f64Array([]int{fixE, fixN, 1}, make([]float64, fixE*fixN)...)),
			want: []string{"firing_weights.npy", "transmit.weights_file", "2 dimensions"}},
		{name: "scalar delays", edit: file("firing_delays.npy", f64Array([]int{}, 0)), want: []string{"firing_delays.npy", "transmit.delays_file", "2 dimensions"}},

		// Shape disagreements between channels [E][N][S], delays [E][N],
		// weights [E][N] and the probe.
		{name: "delays for 5 elements, probe has 4", edit: file("firing_delays.npy", f64Array([]int{fixE, 5}, make([]float64, fixE*5)...)),
			want: []string{"firing_delays.npy", "transmit.delays_file", "4 elements"}},
		{name: "probe count 5, arrays have 4", edit: replace("count: 4", "count: 5"), want: []string{"firing_delays.npy", "transmit.delays_file", "5 elements"}},
		{name: "delays with no events", edit: file("firing_delays.npy", f64Array([]int{0, fixN})), want: []string{"firing_delays.npy", "transmit.delays_file", "events"}},
		{name: "weights for 3 events", edit: file("firing_weights.npy", f64Array([]int{3, fixN}, make([]float64, 3*fixN)...)),
			want: []string{"firing_weights.npy", "transmit.weights_file", "[3 4]", "[2 4]"}},
		{name: "weights for 5 elements", edit: file("firing_weights.npy", f64Array([]int{fixE, 5}, make([]float64, fixE*5)...)),
			want: []string{"firing_weights.npy", "transmit.weights_file", "disagrees"}},
		{name: "channels for 3 events", edit: file("channels.npy", npyFile("<f4", false, []int{3, fixN, fixS}, f32Bytes(make([]float32, 3*fixN*fixS)...))),
			want: []string{"channels.npy", "channels.file", "2 events", "firing_delays.npy"}},
		{name: "channels for 5 elements", edit: file("channels.npy", npyFile("<f4", false, []int{fixE, 5, fixS}, f32Bytes(make([]float32, fixE*5*fixS)...))),
			want: []string{"channels.npy", "channels.file", "4 elements"}},
		{name: "channels with no samples", edit: file("channels.npy", npyFile("<f4", false, []int{fixE, fixN, 0}, nil)),
			want: []string{"channels.npy", "channels.file", "samples"}},

		// Sizes: truncation, trailing bytes, memory cap.
		{name: "truncated channels", edit: patch("channels.npy", func(b []byte) []byte { return b[:len(b)-3] }), want: []string{"channels.npy", "channels.file", "truncated"}},
		{name: "truncated delays", edit: patch("firing_delays.npy", func(b []byte) []byte { return b[:len(b)-8] }), want: []string{"firing_delays.npy", "transmit.delays_file", "truncated"}},
		{name: "truncated header", edit: patch("channels.npy", func(b []byte) []byte { return b[:40] }), want: []string{"channels.npy", "channels.file", "truncated header"}},
		{name: "trailing bytes on channels", edit: patch("channels.npy", func(b []byte) []byte { return append(b, 0, 0, 0, 0) }),
			want: []string{"channels.npy", "channels.file", "more than"}},
		{name: "trailing bytes on weights", edit: patch("firing_weights.npy", func(b []byte) []byte { return append(b, '\n') }),
			want: []string{"firing_weights.npy", "transmit.weights_file", "more than"}},
		{name: "channels over the memory cap", opt: acq.LoadOptions{MaxBytes: 200}, want: []string{"channels.npy", "channels.file", "memory cap"}},
		{name: "header claims 2^44 samples", edit: file("channels.npy", npyFile("<f4", false, []int{fixE, fixN, 1 << 41}, goodF32)),
			want: []string{"channels.npy", "channels.file", "memory cap"}},
		{name: "header claims 2^44 samples, large cap", opt: acq.LoadOptions{MaxBytes: 1 << 62}, edit: file("channels.npy", npyFile("<f4", false, []int{fixE, fixN, 1 << 41}, goodF32)),
			want: []string{"channels.npy", "channels.file", "truncated"}},
		{name: "header shape overflows", edit: file("channels.npy", npyFile("<f4", false, []int{1 << 40, 1 << 40, 1 << 40}, goodF32)),
			want: []string{"channels.npy", "channels.file", "overflows"}},

		// Values: non-finite samples, delays and weights; silent events.
		{name: "NaN in channels", edit: file("channels.npy", withNaN32(13, float32(math.NaN()))), want: []string{"channels.npy", "channels.file", "[0][1][5]", "not finite"}},
		{name: "Inf in channels", edit: file("channels.npy", withNaN32(fixE*fixN*fixS-1, float32(math.Inf(-1)))), want: []string{"channels.npy", "channels.file", "[1][3][7]", "not finite"}},
		{name: "NaN in iq channels", iq: true, edit: file("channels.npy", npyFile("<c8", false, []int{fixE, fixN, fixS}, append(c64Bytes(complex(0, float32(math.NaN()))), zeros(8*(fixE*fixN*fixS-1))...))),
			want: []string{"channels.npy", "channels.file", "[0][0][0]", "not finite"}},
		{name: "NaN in delays", edit: file("firing_delays.npy", f64Array([]int{fixE, fixN}, 0, 0, 0, 0, 0, nan, 0, 0)), want: []string{"firing_delays.npy", "transmit.delays_file", "not finite"}},
		{name: "Inf in weights", edit: file("firing_weights.npy", f64Array([]int{fixE, fixN}, 1, 1, inf, 1, 1, 1, 1, 1)), want: []string{"firing_weights.npy", "transmit.weights_file", "not finite"}},
		{name: "delay of a second", edit: file("firing_delays.npy", f64Array([]int{fixE, fixN}, 0, 0, 0, 1, 0, 0, 0, 0)),
			want: []string{"firing_delays.npy", "transmit.delays_file", "event 0 element 3", "10 ms"}},
		{name: "event fires no element", edit: file("firing_weights.npy", f64Array([]int{fixE, fixN}, 1, 1, 1, 1, 0, 0, 0, 0)),
			want: []string{"firing_weights.npy", "transmit.weights_file", "event 1", "no element"}},
	}
}

func TestLoadErrors(t *testing.T) {
	t.Parallel()
	for _, c := range badCases() {
		t.Run(c.name, func(t *testing.T) {
			t.Parallel()
			dir := t.TempDir()
			writeFixture(t, dir, c.iq)
			if c.edit != nil {
				c.edit(t, dir)
			}
			var err error
			func() {
				defer func() {
					if r := recover(); r != nil {
						t.Fatalf("Load panicked: %v", r)
					}
				}()
				_, err = acq.LoadWith(dir, c.opt)
			}()
			if err == nil {
				t.Fatalf("Load succeeded, want an error containing %q", c.want)
			}
			msg := err.Error()
			for _, w := range c.want {
				if !strings.Contains(msg, w) {
					t.Errorf("error %q does not contain %q", msg, w)
				}
			}
			// Every error names the folder the user asked for.
			if !strings.Contains(msg, dir) {
				t.Errorf("error %q does not name the folder %s", msg, dir)
			}
		})
	}
}

// TestLoadErrorsHeaderOnly checks that HeaderOnly still validates the
// manifest and the arrays' headers, only skipping the channel samples.
func TestLoadErrorsHeaderOnly(t *testing.T) {
	t.Parallel()
	for _, c := range badCases() {
		if strings.HasPrefix(c.name, "NaN in") && strings.Contains(c.name, "channels") || strings.HasPrefix(c.name, "Inf in channels") {
			continue // the samples are not read
		}
		dir := t.TempDir()
		writeFixture(t, dir, c.iq)
		if c.edit != nil {
			c.edit(t, dir)
		}
		c.opt.HeaderOnly = true
		if _, err := acq.LoadWith(dir, c.opt); err == nil {
			t.Errorf("%s: HeaderOnly load succeeded", c.name)
		}
	}
}

func TestLoadNotAFolder(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	for _, c := range []struct {
		path string
		want string
	}{
		{filepath.Join(dir, "nothing"), "not found"},
		{filepath.Join(dir, "plain"), "not a folder"},
	} {
		if strings.HasSuffix(c.path, "plain") {
			writeFile(t, c.path, nil)
		}
		_, err := acq.Load(c.path)
		if err == nil || !strings.Contains(err.Error(), c.path) || !strings.Contains(err.Error(), c.want) {
			t.Errorf("Load(%s): %v, want an error naming it and %q", c.path, err, c.want)
		}
	}
}

// TestLoadOtherFileNames checks that the manifest, not the default names,
// decides which files are read, including files in a sub-folder.
func TestLoadOtherFileNames(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	writeFixture(t, dir, false)
	if err := os.Mkdir(filepath.Join(dir, "arrays"), 0o755); err != nil {
		t.Fatal(err)
	}
	for _, n := range []string{"channels.npy", "firing_delays.npy"} {
		if err := os.Rename(filepath.Join(dir, n), filepath.Join(dir, "arrays", "x_"+n)); err != nil {
			t.Fatal(err)
		}
	}
	m := strings.NewReplacer("file: channels.npy", "file: arrays/x_channels.npy",
		"delays_file: firing_delays.npy", "delays_file: arrays/x_firing_delays.npy",
		"  weights_file: firing_weights.npy\n", "").Replace(fixtureManifest)
	writeFile(t, filepath.Join(dir, "acquisition.yaml"), []byte(m))
	a, err := acq.Load(dir)
	if err != nil {
		t.Fatal(err)
	}
	for i, ev := range a.Events {
		for k, w := range ev.Weights {
			if w != 1 {
				t.Errorf("event %d element %d: default weight %g, want 1", i, k, w)
			}
		}
	}
}
