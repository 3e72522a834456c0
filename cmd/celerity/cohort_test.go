package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
)

// cohortScenario is a fast acquisition for the cohort command: a 32-element
// array, three plane waves, two wires in a little speckle; the medium's
// speed is filled in.
const cohortScenario = `format: celerity.scenario/1
seed: 5
probe: {center_frequency_mhz: 5, fractional_bandwidth: 0.7, count: 32, pitch_mm: 0.3}
depth_mm: 18
transmit:
  plane_waves: {count: 3, max_angle_deg: 6}
medium:
  speed_mps: %g
phantom:
  speckle: {region_mm: [-4, 4, 5, 17], density: 6}
  targets:
    positions_mm: [[-1.5, 9], [1.5, 13]]
noise: {snr_db: 30}
`

var (
	cohortOnce sync.Once
	cohortDir  string
	cohortErr  string
)

// cohortData simulates, once, a folder with acquisitions at 1470, 1530 and
// 1590 m/s and a corrupt copy of the second (channels.npy cut short).
func cohortData(t *testing.T) string {
	t.Helper()
	cohortOnce.Do(func() {
		dir, err := os.MkdirTemp("", "celerity-cohort-cli-")
		if err != nil {
			cohortErr = err.Error()
			return
		}
		for _, c := range []float64{1470, 1530, 1590} {
			sc := filepath.Join(dir, fmt.Sprintf("s%g.yaml", c))
			os.WriteFile(sc, fmt.Appendf(nil, cohortScenario, c), 0o644)
			var out, errb bytes.Buffer
			if code := run([]string{"simulate", "--scenario", sc, "--out", filepath.Join(dir, "data", fmt.Sprintf("c%g", c)), "-q"}, &out, &errb); code != 0 {
				cohortErr = errb.String()
				return
			}
			os.Remove(sc)
		}
		src, dst := filepath.Join(dir, "data", "c1530"), filepath.Join(dir, "data", "corrupt")
		os.MkdirAll(dst, 0o755)
		ents, _ := os.ReadDir(src)
		for _, e := range ents {
			b, _ := os.ReadFile(filepath.Join(src, e.Name()))
			os.WriteFile(filepath.Join(dst, e.Name()), b, 0o644)
		}
		if err := os.Truncate(filepath.Join(dst, "channels.npy"), 4000); err != nil {
			cohortErr = err.Error()
			return
		}
		cohortDir = filepath.Join(dir, "data")
	})
	if cohortErr != "" {
		t.Fatal(cohortErr)
	}
	return cohortDir
}

// TestCohortCommand runs a cohort end to end: the table, the exit status
// that counts the failure, resuming after lost results, shards and their
// merge, and a manifest with metadata.
func TestCohortCommand(t *testing.T) {
	if testing.Short() {
		t.Skip("simulates a cohort")
	}
	t.Parallel()
	data := cohortData(t)
	work := t.TempDir()
	out := filepath.Join(work, "out")
	code, stdout, stderr := runCLI(t, "cohort", data, "--out", out, "--jobs", "2", "--steps", "speed", "--json", "-q")
	if code != 1 || !strings.Contains(stderr, "1 of 4 acquisitions failed") {
		t.Fatalf("cohort: exit %d, stderr %q; want 1 and the count of failures", code, stderr)
	}
	var sum struct {
		Acquisitions, OK, Failed int
		Caution                  string
		Rows                     []struct {
			ID, Status, Error string
			SpeedMPS          *float64 `json:"speed_mps"`
			Lo                *float64 `json:"ci95_lo_mps"`
			Hi                *float64 `json:"ci95_hi_mps"`
		}
	}
	if err := json.Unmarshal([]byte(stdout), &sum); err != nil {
		t.Fatalf("--json: %v\n%s", err, stdout)
	}
	if sum.Acquisitions != 4 || sum.OK != 3 || sum.Failed != 1 || !strings.Contains(sum.Caution, "not a medical device") {
		t.Errorf("summary: %+v", sum)
	}
	for _, r := range sum.Rows {
		if r.ID == "corrupt" {
			if r.Status != "failed" || !strings.Contains(r.Error, "corrupt/channels.npy") || !strings.Contains(r.Error, "truncated") {
				t.Errorf("corrupt: %s %q", r.Status, r.Error)
			}
			continue
		}
		var c float64
		fmt.Sscanf(r.ID, "c%g", &c)
		// the sweep's 95 % interval holds the true speed (2 m/s of slack, as
		// in the cohort package's tests)
		if r.Status != "ok" || r.SpeedMPS == nil || !(*r.Lo-2 <= c && c <= *r.Hi+2) {
			t.Errorf("%s: %s, speed %v, interval %v to %v, want around %g", r.ID, r.Status, r.SpeedMPS, r.Lo, r.Hi, c)
		}
	}
	first, _ := os.ReadFile(filepath.Join(out, "cohort.csv"))
	for _, f := range []string{"cohort.json", "timing.csv", "report.html", "run.json", "plots/speed-histogram.png", "plots/speed-intervals.png"} {
		if _, err := os.Stat(filepath.Join(out, f)); err != nil {
			t.Errorf("missing output %s", f)
		}
	}
	if html, _ := os.ReadFile(filepath.Join(out, "report.html")); !bytes.Contains(html, []byte("not a medical device")) {
		t.Error("report.html lacks the caution")
	}

	// a killed run loses the results in progress: remove two, leave a
	// temporary file, and run again: the same table
	recs, _ := filepath.Glob(filepath.Join(out, "results", "*.json"))
	if len(recs) != 4 {
		t.Fatalf("%d records, want 4", len(recs))
	}
	os.Remove(filepath.Join(out, "results", "c1470.json"))
	os.Remove(filepath.Join(out, "results", "c1590.json"))
	os.WriteFile(filepath.Join(out, "results", ".c1590.json.tmp-1"), []byte("{"), 0o644)
	code, _, stderr = runCLI(t, "cohort", data, "--out", out, "--steps", "speed")
	if code != 1 || !strings.Contains(stderr, "cohort: 2/4 done, 1 failed, 2 left") || strings.Count(stderr, " ok (") != 2 {
		t.Errorf("resumed run: exit %d, progress %q", code, stderr)
	}
	if again, _ := os.ReadFile(filepath.Join(out, "cohort.csv")); !bytes.Equal(first, again) {
		t.Errorf("the resumed table differs:\n%s\nvs\n%s", again, first)
	}

	// shards, and their merge
	var shards []string
	for _, sh := range []string{"1/2", "2/2"} {
		d := filepath.Join(work, "shard-"+sh[:1])
		if code, _, stderr := runCLI(t, "cohort", data, "--out", d, "--steps", "speed", "--shard", sh, "-q"); code > 1 {
			t.Fatalf("shard %s: exit %d, %s", sh, code, stderr)
		}
		shards = append(shards, d)
	}
	merged := filepath.Join(work, "merged")
	code, stdout, stderr = runCLI(t, append(append([]string{"cohort", "merge"}, shards...), "--out", merged)...)
	if code != 1 || !strings.Contains(stderr, "1 of 4 acquisitions failed") || !strings.Contains(stdout, "4 acquisitions: 3 estimated, 1 failed") {
		t.Errorf("merge: exit %d\n%s%s", code, stdout, stderr)
	}
	if m, _ := os.ReadFile(filepath.Join(merged, "cohort.csv")); !bytes.Equal(first, m) {
		t.Errorf("the merged table differs:\n%s\nvs\n%s", m, first)
	}
	code, _, stderr = runCLI(t, "cohort", "merge", shards[0], "--out", filepath.Join(work, "partial"), "-q")
	if code != 1 || !strings.Contains(stderr, "have no result") {
		t.Errorf("partial merge: exit %d, %q", code, stderr)
	}
	if code, _, stderr = runCLI(t, "cohort", "merge", shards[0], "--out", merged); code == 0 || !strings.Contains(stderr, "--force") {
		t.Errorf("merge over an existing folder: exit %d, %q", code, stderr)
	}

	// a manifest of the good acquisitions with metadata
	man := filepath.Join(work, "cohort.csv")
	rel, _ := filepath.Rel(work, data)
	os.WriteFile(man, []byte("id,group,temperature_c\n"+rel+"/c1470,A,20\n"+rel+"/c1530,B,22.5\n"+rel+"/c1590,B,25\n"), 0o644)
	mout := filepath.Join(work, "manifest-out")
	code, stdout, stderr = runCLI(t, "cohort", "--manifest", man, "--out", mout, "--steps", "speed", "-q")
	if code != 0 || !strings.Contains(stdout, "group = B: 2 of 2 estimated") {
		t.Fatalf("manifest run: exit %d\n%s%s", code, stdout, stderr)
	}
	rows := readCSV(t, filepath.Join(mout, "cohort.csv"))
	if len(rows) != 3 || rows[0]["id"] != rel+"/c1470" || rows[0]["group"] != "A" || rows[2]["temperature_c"] != "25" || rows[1]["speed_mps"] == "" {
		t.Errorf("manifest table: %v", rows)
	}
	for _, f := range []string{"plots/speed-by-group.png", "plots/speed-vs-temperature_c.png"} {
		if _, err := os.Stat(filepath.Join(mout, f)); err != nil {
			t.Errorf("missing plot %s", f)
		}
	}
}

func TestCohortErrors(t *testing.T) {
	t.Parallel()
	work := t.TempDir()
	acqDir := filepath.Join(work, "a1")
	os.MkdirAll(acqDir, 0o755)
	os.WriteFile(filepath.Join(acqDir, "acquisition.yaml"), nil, 0o644)
	noID := filepath.Join(work, "noid.csv")
	os.WriteFile(noID, []byte("folder,group\na1,A\n"), 0o644)
	missing := filepath.Join(work, "missing.csv")
	os.WriteFile(missing, []byte("id,group\na1,A\na2,B\n"), 0o644)
	textCol := filepath.Join(work, "text.csv")
	os.WriteFile(textCol, []byte("id,site\na1,north\n"), 0o644)
	foreign := filepath.Join(work, "foreign")
	os.MkdirAll(foreign, 0o755)
	os.WriteFile(filepath.Join(foreign, "x"), nil, 0o644)
	for _, c := range []struct {
		args []string
		want string
	}{
		{[]string{"cohort", "--manifest", noID, "--out", filepath.Join(work, "o1")}, "noid.csv: line 1: no id column"},
		{[]string{"cohort", "--manifest", missing, "--out", filepath.Join(work, "o2")}, "missing.csv: line 3: id \"a2\": folder"},
		{[]string{"cohort", "--out", filepath.Join(work, "o3")}, "give the folders to search or --manifest"},
		{[]string{"cohort", work, "--manifest", noID, "--out", filepath.Join(work, "o4")}, "not both"},
		{[]string{"cohort", work, "--out", filepath.Join(work, "o5"), "--steps", "speed,images"}, `--steps: unknown step "images"`},
		{[]string{"cohort", work, "--out", filepath.Join(work, "o6"), "--by-depth", "--method", "targets"}, "--by-depth needs the sweep"},
		{[]string{"cohort", work, "--out", filepath.Join(work, "o7"), "--by-depth", "--steps", "aberration"}, "--by-depth needs the speed step"},
		{[]string{"cohort", work, "--out", filepath.Join(work, "o8"), "--shard", "3/2"}, "--shard"},
		{[]string{"cohort", work, "--out", filepath.Join(work, "o9"), "--jobs", "0"}, "--jobs"},
		{[]string{"cohort", work, "--out", filepath.Join(work, "o10"), "--group", "site"}, "--group site: no such metadata column"},
		{[]string{"cohort", "--manifest", textCol, "--out", filepath.Join(work, "o13"), "--x", "site"}, "--x site: the column is not numeric"},
		{[]string{"cohort", work, "--out", foreign}, "not a cohort output folder"},
		{[]string{"cohort", filepath.Join(work, "foreign"), "--out", filepath.Join(work, "o11")}, "no acquisition folders"},
		{[]string{"cohort", "merge", foreign, "--out", filepath.Join(work, "o12")}, "not a cohort output folder"},
	} {
		code, _, stderr := runCLI(t, c.args...)
		if code == 0 || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want %q", c.args[1:], code, stderr, c.want)
		}
	}
	for _, o := range []string{"o1", "o2", "o3", "o4", "o5", "o6", "o7", "o8", "o9", "o10", "o11", "o12", "o13"} {
		if _, err := os.Stat(filepath.Join(work, o)); err == nil {
			t.Errorf("a refused run left output %s", o)
		}
	}
}

func TestCohortHelp(t *testing.T) {
	t.Parallel()
	for _, args := range [][]string{{"cohort", "--help"}, {"cohort", "run", "--help"}, {"cohort", "merge", "--help"}} {
		code, out, _ := runCLI(t, args...)
		if code != 0 || !strings.Contains(out, "Usage: celerity cohort") {
			t.Errorf("%v: exit %d\n%s", args, code, out)
		}
	}
	_, out, _ := runCLI(t, "cohort", "--help")
	if !strings.Contains(out, "not a medical device") || !strings.Contains(out, "cohort merge DIR") {
		t.Errorf("cohort --help lacks the caution or the usage:\n%s", out)
	}
}
