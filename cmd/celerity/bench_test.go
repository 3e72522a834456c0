package main

import (
	"bytes"
	"encoding/csv"
	"encoding/json"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"sort"
	"strings"
	"testing"
)

// scriptSuite has four small cases whose true speeds are 1540 m/s minus 15
// and minus 10 (two seeds each), behind a screen, and no built-in
// estimators: the test scripts in testdata/estimators are scored alone.
const scriptSuite = `format: celerity.suite/1
name: scripts
base:
  probe: {center_frequency_mhz: 5, fractional_bandwidth: 0.7, count: 16, pitch_mm: 0.3}
  depth_mm: 10
  transmit:
    plane_waves: {count: 1}
  medium: {speed_mps: 1540}
  screen: {rms_ns: 10, correlation_length_mm: 1.5}
  phantom:
    speckle: {region_mm: [-2, 2, 3, 9], density: 2}
grid:
  medium.speed_mps: [1525, 1530]
seeds: [1, 2]
estimators: []
`

// estimatorsDir is testdata/estimators from this package.
var estimatorsDir = filepath.Join("..", "..", "testdata", "estimators")

func needSh(t *testing.T) {
	t.Helper()
	if _, err := exec.LookPath("sh"); err != nil {
		t.Skip("no POSIX shell for the test estimators")
	}
}

func writeSuite(t *testing.T, dir, text string) string {
	t.Helper()
	p := filepath.Join(dir, "suite.yaml")
	if err := os.WriteFile(p, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

func est(name, file string) []string {
	return []string{"--estimator", name + "=sh " + filepath.Join(estimatorsDir, file)}
}

type benchScore struct {
	Estimator   string   `json:"estimator"`
	Group       string   `json:"group"`
	Kind        string   `json:"kind"`
	Cases       int      `json:"cases"`
	Failed      int      `json:"failed"`
	FailureRate float64  `json:"failure_rate"`
	Bias        *float64 `json:"bias_mps"`
	RMS         *float64 `json:"rms_error_mps"`
	P95         *float64 `json:"p95_abs_error_mps"`
	Coverage    *float64 `json:"coverage"`
	ProfileFrac *float64 `json:"profile_error_frac"`
	ProfileCorr *float64 `json:"profile_corr"`
}

type benchSum struct {
	Cases   int          `json:"cases"`
	Scored  int          `json:"cases_scored"`
	Scores  []benchScore `json:"scores"`
	Caution string       `json:"caution"`
}

func score(t *testing.T, s benchSum, name, group string) benchScore {
	t.Helper()
	for _, sc := range s.Scores {
		if sc.Estimator == name && sc.Group == group {
			return sc
		}
	}
	t.Fatalf("no score for %s over %s", name, group)
	return benchScore{}
}

func readCSV(t *testing.T, path string) []map[string]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	recs, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	var out []map[string]string
	for _, r := range recs[1:] {
		m := map[string]string{}
		for i, h := range recs[0] {
			m[h] = r[i]
		}
		out = append(out, m)
	}
	return out
}

// TestBenchScoring checks the scoring itself with the test estimators: a
// constant answer of 1540 m/s on cases at 1540 - 15 and 1540 - 10 m/s has
// bias exactly 12.5 m/s (15 and 10 per grid point); its interval
// [1530, 1550] holds 1530 (bounds included) but not 1525, so coverage is
// exactly 0.5; a profile of zeros has an error of exactly the true rms; a
// sleeper past its limit, garbage on stdout and a crash are failures of
// their own rows, and the run succeeds.
func TestBenchScoring(t *testing.T) {
	needSh(t)
	t.Parallel()
	work := t.TempDir()
	suite := writeSuite(t, work, scriptSuite)
	out := filepath.Join(work, "out")
	args := []string{"bench", "--suite", suite, "--out", out, "--jobs", "2", "--timeout", "0.5", "--json", "-q"}
	args = append(args, est("const", "const-speed.sh")...)
	args = append(args, est("zero", "zero-profile.sh")...)
	args = append(args, est("sleepy", "sleepy.sh")...)
	args = append(args, est("garbage", "garbage.sh")...)
	args = append(args, est("crash", "crash.sh")...)
	code, stdout, stderr := runCLI(t, args...)
	if code != 0 {
		t.Fatalf("bench: exit %d\n%s", code, stderr)
	}
	var s benchSum
	if err := json.Unmarshal([]byte(stdout), &s); err != nil {
		t.Fatalf("--json: %v\n%s", err, stdout)
	}
	if s.Cases != 4 || s.Scored != 4 || !strings.Contains(s.Caution, "not a medical device") {
		t.Fatalf("cases %d, scored %d, caution %q", s.Cases, s.Scored, s.Caution)
	}
	c := score(t, s, "const", "all")
	// exact: errors are 15, 15, 10, 10 m/s (1540 - 1525, 1540 - 1530)
	if c.Failed != 0 || *c.Bias != 12.5 || *c.P95 != 15 || *c.Coverage != 0.5 {
		t.Errorf("const over all cases: bias %v, p95 %v, coverage %v, failed %d; want 12.5, 15, 0.5, 0", *c.Bias, *c.P95, *c.Coverage, c.Failed)
	}
	// rms of (15, 15, 10, 10) = sqrt(162.5); the tolerance covers rounding only
	if math.Abs(*c.RMS-math.Sqrt(162.5)) > 1e-12 {
		t.Errorf("const rms %v, want sqrt(162.5)", *c.RMS)
	}
	for _, g := range []struct {
		group    string
		bias, cv float64
	}{{"medium.speed_mps=1525", 15, 0}, {"medium.speed_mps=1530", 10, 1}} {
		sc := score(t, s, "const", g.group)
		if *sc.Bias != g.bias || *sc.Coverage != g.cv || sc.Cases != 2 {
			t.Errorf("const over %s: bias %v, coverage %v, cases %d; want %g, %g, 2", g.group, *sc.Bias, *sc.Coverage, sc.Cases, g.bias, g.cv)
		}
	}
	// a zero profile misses the whole (detrended) screen: error / rms = 1
	z := score(t, s, "zero", "all")
	if z.ProfileFrac == nil || math.Abs(*z.ProfileFrac-1) > 1e-12 || z.ProfileCorr != nil || z.Bias != nil {
		t.Errorf("zero profile: frac %v, corr %v, bias %v; want 1, null, null", z.ProfileFrac, z.ProfileCorr, z.Bias)
	}
	for _, name := range []string{"sleepy", "garbage", "crash"} {
		f := score(t, s, name, "all")
		if f.Failed != 4 || f.FailureRate != 1 || f.Bias != nil {
			t.Errorf("%s: failed %d, rate %g, bias %v; want 4, 1, null", name, f.Failed, f.FailureRate, f.Bias)
		}
	}
	rows := readCSV(t, filepath.Join(out, "results.csv"))
	if len(rows) != 20 {
		t.Fatalf("results.csv has %d rows, want 20 (4 cases x 5 estimators)", len(rows))
	}
	want := map[string]string{"sleepy": "timed out after 500ms", "garbage": "stdout is not one JSON object", "crash": "exited with status 3; stderr: estimator: cannot read channels.npy"}
	for _, r := range rows {
		if w, ok := want[r["estimator"]]; ok {
			if r["status"] != "failed" || !strings.Contains(r["error"], w) {
				t.Errorf("%s: status %s, error %q; want failed with %q", r["estimator"], r["status"], r["error"], w)
			}
		} else if r["status"] != "ok" || r["error"] != "" {
			t.Errorf("%s: %s %q", r["estimator"], r["status"], r["error"])
		}
		if r["estimator"] == "const" && (r["speed_error_mps"] != "15.000" && r["speed_error_mps"] != "10.000") {
			t.Errorf("const row: speed error %s", r["speed_error_mps"])
		}
	}
	for _, f := range []string{"summary.json", "timing.csv", "report.html", "bench.json", "suite.yaml", "plots/speed-error-vs-true-speed.png", "plots/speed-error-const.png", "plots/profile-error-zero.png"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("missing output %s", f)
		}
	}
	html, _ := os.ReadFile(filepath.Join(out, "report.html"))
	if !bytes.Contains(html, []byte("not a medical device")) || !bytes.Contains(html, []byte("timed out")) {
		t.Error("report.html lacks the caution or the failures")
	}
}

// runBench runs the script suite with the fast test estimators.
func runBench(t *testing.T, suite, out, cache string, extra ...string) (int, string) {
	t.Helper()
	args := []string{"bench", "--suite", suite, "--out", out, "--cache", cache, "-q"}
	args = append(args, est("const", "const-speed.sh")...)
	args = append(args, est("zero", "zero-profile.sh")...)
	code, _, stderr := runCLI(t, append(args, extra...)...)
	return code, stderr
}

func summaryWithoutTiming(t *testing.T, path string) map[string]any {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var m map[string]any
	if err := json.Unmarshal(b, &m); err != nil {
		t.Fatal(err)
	}
	delete(m, "timing")
	return m
}

func recordNames(t *testing.T, dir string) []string {
	t.Helper()
	ents, err := os.ReadDir(filepath.Join(dir, "results"))
	if err != nil {
		t.Fatal(err)
	}
	var out []string
	for _, e := range ents {
		if strings.HasSuffix(e.Name(), ".json") && !strings.HasPrefix(e.Name(), ".") {
			out = append(out, e.Name())
		}
	}
	sort.Strings(out)
	return out
}

// TestBenchShardsMerge: the --shard slices are disjoint and cover the suite,
// and their merge equals the unsharded run (results.csv byte for byte, the
// summary but for the runtimes).
func TestBenchShardsMerge(t *testing.T) {
	needSh(t)
	t.Parallel()
	work := t.TempDir()
	suite := writeSuite(t, work, strings.Replace(scriptSuite, "seeds: [1, 2]", "seeds: [1, 2, 3]", 1))
	cache := filepath.Join(work, "cases")
	whole := filepath.Join(work, "whole")
	if code, stderr := runBench(t, suite, whole, cache, "--jobs", "2"); code != 0 {
		t.Fatalf("unsharded: %d %s", code, stderr)
	}
	all := recordNames(t, whole)
	if len(all) != 6 {
		t.Fatalf("%d records, want 6", len(all))
	}
	seen := map[string]int{}
	var shards []string
	for _, sh := range []string{"1/4", "2/4", "3/4", "4/4"} {
		dir := filepath.Join(work, "shard-"+sh[:1])
		if code, stderr := runBench(t, suite, dir, cache, "--shard", sh); code != 0 {
			t.Fatalf("shard %s: %d %s", sh, code, stderr)
		}
		for _, n := range recordNames(t, dir) {
			seen[n]++
		}
		shards = append(shards, dir)
	}
	for _, n := range all {
		if seen[n] != 1 {
			t.Errorf("case %s is in %d shards", n, seen[n])
		}
	}
	if len(seen) != len(all) {
		t.Errorf("the shards hold %d cases, the suite %d", len(seen), len(all))
	}
	merged := filepath.Join(work, "merged")
	code, stdout, stderr := runCLI(t, append(append([]string{"bench", "merge"}, shards...), "--out", merged, "--json")...)
	if code != 0 {
		t.Fatalf("merge: %d %s", code, stderr)
	}
	if !strings.Contains(stdout, `"cases_scored": 6`) {
		t.Errorf("merge --json: %s", stdout)
	}
	a, _ := os.ReadFile(filepath.Join(whole, "results.csv"))
	b, _ := os.ReadFile(filepath.Join(merged, "results.csv"))
	if len(a) == 0 || !bytes.Equal(a, b) {
		t.Errorf("merged results.csv differs from the unsharded one:\n%s\nvs\n%s", a, b)
	}
	sa, sb := summaryWithoutTiming(t, filepath.Join(whole, "summary.json")), summaryWithoutTiming(t, filepath.Join(merged, "summary.json"))
	ja, _ := json.Marshal(sa)
	jb, _ := json.Marshal(sb)
	if !bytes.Equal(ja, jb) {
		t.Errorf("merged summary differs:\n%s\nvs\n%s", ja, jb)
	}
	// a merge that misses a shard says so and fails
	code, _, stderr = runCLI(t, "bench", "merge", shards[0], shards[1], "--out", filepath.Join(work, "partial"), "-q")
	if code != 1 || !strings.Contains(stderr, "have no result") {
		t.Errorf("partial merge: exit %d, %q", code, stderr)
	}
	// the merged folder is not overwritten without --force, and can be merged again
	if code, _, stderr = runCLI(t, "bench", "merge", shards[0], "--out", merged); code == 0 || !strings.Contains(stderr, "--force") {
		t.Errorf("merge over an existing folder: exit %d, %q", code, stderr)
	}
	if code, _, stderr = runCLI(t, "bench", "merge", merged, "--out", filepath.Join(work, "again"), "-q"); code != 0 {
		t.Errorf("merging a merged folder: exit %d, %s", code, stderr)
	}
	// folders of another suite or other estimators do not merge
	other := writeSuite(t, t.TempDir(), strings.Replace(scriptSuite, "[1525, 1530]", "[1520, 1530]", 1))
	odir := filepath.Join(work, "other")
	if code, stderr := runBench(t, other, odir, cache); code != 0 {
		t.Fatalf("other suite: %d %s", code, stderr)
	}
	if code, _, stderr = runCLI(t, "bench", "merge", whole, odir, "--out", filepath.Join(work, "mixed")); code == 0 || !strings.Contains(stderr, "another suite") {
		t.Errorf("merging two suites: exit %d, %q", code, stderr)
	}
}

// TestBenchResume: a run whose result files are partly lost (an
// interruption) continues: only the lost cases run again, and the table
// is the same.
func TestBenchResume(t *testing.T) {
	needSh(t)
	t.Parallel()
	work := t.TempDir()
	suite := writeSuite(t, work, scriptSuite)
	out := filepath.Join(work, "out")
	cache := filepath.Join(work, "cases")
	if code, stderr := runBench(t, suite, out, cache); code != 0 {
		t.Fatalf("first run: %d %s", code, stderr)
	}
	first, _ := os.ReadFile(filepath.Join(out, "results.csv"))
	names := recordNames(t, out)
	kept := map[string][]byte{}
	for i, n := range names {
		p := filepath.Join(out, "results", n)
		if i%2 == 0 {
			if err := os.Remove(p); err != nil {
				t.Fatal(err)
			}
		} else {
			kept[n], _ = os.ReadFile(p)
		}
	}
	if code, stderr := runBench(t, suite, out, cache); code != 0 {
		t.Fatalf("resumed run: %d %s", code, stderr)
	}
	again, _ := os.ReadFile(filepath.Join(out, "results.csv"))
	if !bytes.Equal(first, again) {
		t.Errorf("the resumed table differs:\n%s\nvs\n%s", first, again)
	}
	for n, b := range kept {
		// a record holds its runtime, so an unchanged file was not rerun
		if now, _ := os.ReadFile(filepath.Join(out, "results", n)); !bytes.Equal(now, b) {
			t.Errorf("finished case %s ran again", n)
		}
	}
	if got := recordNames(t, out); len(got) != len(names) {
		t.Errorf("%d records after resuming, want %d", len(got), len(names))
	}
	// other estimators make the stored results stale: every case runs again
	// (and the table gains the new estimator's rows)
	code, _, stderr := runCLI(t, "bench", "--suite", suite, "--out", out, "--cache", cache, "-q", est("const", "const-speed.sh")[0], est("const", "const-speed.sh")[1])
	if code != 0 {
		t.Fatalf("rerun with fewer estimators: %d %s", code, stderr)
	}
	if rows := readCSV(t, filepath.Join(out, "results.csv")); len(rows) != 4 {
		t.Errorf("%d rows with one estimator, want 4", len(rows))
	}
}

func TestBenchErrors(t *testing.T) {
	t.Parallel()
	work := t.TempDir()
	good := writeSuite(t, work, scriptSuite)
	badDir := t.TempDir()
	bad := writeSuite(t, badDir, strings.Replace(scriptSuite, "seeds: [1, 2]", "seeds: [1, 2]\nseed: 4", 1))
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"bench", "--suite", bad, "--out", filepath.Join(work, "a")}, "suite.yaml: seed: unknown key (line 15)"},
		{[]string{"bench", "--suite", good, "--out", filepath.Join(work, "b"), "--shard", "3/2"}, "--shard"},
		{[]string{"bench", "--suite", good, "--out", filepath.Join(work, "c"), "--shard", "1"}, "--shard"},
		{[]string{"bench", "--suite", good, "--out", filepath.Join(work, "d"), "--estimator", "no-equals-sign"}, "want NAME=COMMAND"},
		{[]string{"bench", "--suite", good, "--out", filepath.Join(work, "e"), "--estimator", "speed-brightness=sh x.sh"}, "taken by a built-in"},
		{[]string{"bench", "--suite", good, "--out", filepath.Join(work, "f"), "--estimator", "a=x", "--estimator", "a=y"}, `two estimators are named "a"`},
		{[]string{"bench", "--suite", good, "--out", filepath.Join(work, "g"), "--timeout", "0"}, "--timeout"},
		{[]string{"bench", "--suite", good, "--out", work, "--estimator", "a=x"}, "not a benchmark output folder"},
		{[]string{"bench", "--suite", good, "--out", filepath.Join(work, "i")}, "no estimators to run"},
		{[]string{"bench", "merge", work, "--out", filepath.Join(work, "h")}, "not a benchmark output folder"},
	} {
		code, _, stderr := runCLI(t, c.args...)
		if code == 0 || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want %q", c.args[1:], code, stderr, c.want)
		}
	}
	// an output folder holding another suite's run is refused
	if _, err := exec.LookPath("sh"); err == nil {
		out := filepath.Join(work, "out")
		if code, stderr := runBench(t, good, out, filepath.Join(work, "cases")); code != 0 {
			t.Fatalf("%d %s", code, stderr)
		}
		other := writeSuite(t, t.TempDir(), strings.Replace(scriptSuite, "[1525, 1530]", "[1525, 1535]", 1))
		if code, stderr := runBench(t, other, out, filepath.Join(work, "cases")); code == 0 || !strings.Contains(stderr, "holds the results of another suite") {
			t.Errorf("another suite into the same folder: exit %d, %q", code, stderr)
		}
	}
}

func TestBenchHelp(t *testing.T) {
	t.Parallel()
	for _, args := range [][]string{{"bench", "--help"}, {"bench", "run", "--help"}, {"bench", "merge", "--help"}} {
		code, out, _ := runCLI(t, args...)
		if code != 0 || !strings.Contains(out, "Usage: celerity bench") {
			t.Errorf("%v: exit %d\n%s", args, code, out)
		}
	}
	_, out, _ := runCLI(t, "bench", "--help")
	if !strings.Contains(out, "not a medical device") || !strings.Contains(out, "--shard I/N") {
		t.Errorf("bench --help lacks the caution or the usage:\n%s", out)
	}
}

// numpyPython returns a Python 3 that has numpy, or "".
func numpyPython() string {
	for _, p := range []string{"python3", "/usr/bin/python3"} {
		if path, err := exec.LookPath(p); err == nil && exec.Command(path, "-c", "import numpy").Run() == nil {
			return path
		}
	}
	return ""
}

// TestBenchPythonExample runs the worked example of docs/bench.md
// (testdata/estimators/toy_focus.py) as an external estimator, when a
// Python with numpy is at hand.
func TestBenchPythonExample(t *testing.T) {
	py := numpyPython()
	if py == "" {
		t.Skip("no python3 with numpy")
	}
	t.Parallel()
	work := t.TempDir()
	suite := writeSuite(t, work, strings.Replace(scriptSuite, "seeds: [1, 2]", "seeds: [1]", 1))
	out := filepath.Join(work, "out")
	code, _, stderr := runCLI(t, "bench", "--suite", suite, "--out", out, "-q",
		"--estimator", "toy="+py+" "+filepath.Join(estimatorsDir, "toy_focus.py"))
	if code != 0 {
		t.Fatalf("exit %d: %s", code, stderr)
	}
	for _, r := range readCSV(t, filepath.Join(out, "results.csv")) {
		if r["status"] != "ok" || r["speed_mps"] == "" {
			t.Errorf("toy on %s: %s %q", r["group"], r["status"], r["error"])
		}
	}
}
