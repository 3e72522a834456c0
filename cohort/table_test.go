package cohort

import (
	"bytes"
	"encoding/json"
	"math"
	"strings"
	"testing"

	"celerity/internal/jobs"
	"celerity/internal/jsonx"
)

func TestQuantileAndStats(t *testing.T) {
	t.Parallel()
	v := []float64{4, 1, 3, 2}
	// Hyndman & Fan definition 7, h = (n - 1) p: worked out by hand
	// (1 + 0.75, 2.5, 3 + 0.25); R's and numpy's default quantiles agree.
	for _, c := range []struct{ p, want float64 }{{0, 1}, {0.25, 1.75}, {0.5, 2.5}, {0.75, 3.25}, {1, 4}} {
		if got := Quantile(v, c.p); got != c.want {
			t.Errorf("Quantile(%v) = %g, want %g", c.p, got, c.want)
		}
	}
	if !math.IsNaN(Quantile(nil, 0.5)) {
		t.Error("Quantile of nothing is not NaN")
	}
	s := StatsOf([]float64{1500, 1520, 1510})
	// mean 1510; sample sd sqrt((100 + 100 + 0) / 2) = 10, exactly
	if s.N != 3 || s.MeanMPS != 1510 || s.SDMPS != 10 || s.MedianMPS != 1510 || s.MinMPS != 1500 || s.MaxMPS != 1520 {
		t.Errorf("StatsOf: %+v", s)
	}
	if one := StatsOf([]float64{1500}); !math.IsNaN(float64(one.SDMPS)) || one.MeanMPS != 1500 {
		t.Errorf("StatsOf one value: %+v", one)
	}
}

// synthetic builds a table from hand-made records: speeds for ok rows,
// "fail" for a failure, "stale" for a record under another key and
// "none" for no record.
func synthetic(t *testing.T, cells map[string]string) (*RunInfo, []jobs.Record) {
	t.Helper()
	s := Settings{Steps: []Step{StepSpeed}}
	if err := s.Normalize(); err != nil {
		t.Fatal(err)
	}
	info := &RunInfo{Format: runFormatV1, Columns: []string{"group"}, Settings: s, Key: s.Key()}
	var recs []jobs.Record
	for _, id := range sortedKeys(cells) {
		m := Member{ID: id, Dir: "/data/" + id, Meta: []string{id[:1]}, Key: "k-" + id}
		info.Members = append(info.Members, m)
		r := jobs.Record{Format: jobs.RecordFormat, ID: id, Key: m.Key, Status: jobs.OK, Seconds: 1}
		switch v := cells[id]; v {
		case "none":
			continue
		case "fail":
			r.Status, r.Error = jobs.Failed, "channels.npy: truncated"
		case "stale":
			r.Key = "old"
			fallthrough
		default:
			res := newResult(id)
			var sp float64
			if err := json.Unmarshal([]byte(v), &sp); err != nil && v != "stale" {
				t.Fatal(err)
			}
			res.Method, res.Confidence = MethodSweep, "high"
			res.SpeedMPS, res.CI95LoMPS, res.CI95HiMPS = jsonx.Float(sp), jsonx.Float(sp-5), jsonx.Float(sp+5)
			b, err := json.Marshal(res)
			if err != nil {
				t.Fatal(err)
			}
			r.Result = b
		}
		recs = append(recs, r)
	}
	return info, recs
}

// TestCollectAndCSV: statuses, Tukey's fences and the table's format.
func TestCollectAndCSV(t *testing.T) {
	t.Parallel()
	info, recs := synthetic(t, map[string]string{
		"a1": "1500", "a2": "1502.5", "b1": "1504", "b2": "1506", "b3": "1600",
		"c1": "fail", "c2": "none", "c3": "stale",
	})
	tab, err := Collect(info, recs, jobs.Shard{})
	if err != nil {
		t.Fatal(err)
	}
	if tab.Count(StatusOK) != 5 || tab.Count(StatusFailed) != 1 || tab.Count(StatusMissing) != 2 {
		t.Fatalf("ok %d, failed %d, missing %d; want 5, 1, 2", tab.Count(StatusOK), tab.Count(StatusFailed), tab.Count(StatusMissing))
	}
	// speeds 1500, 1502.5, 1504, 1506, 1600: q1 1502.5, q3 1506 (definition
	// 7), fences 1502.5 - 5.25 = 1497.25 and 1506 + 5.25 = 1511.25: 1600 is
	// a high outlier, nothing is low
	var out []string
	for _, r := range tab.Rows {
		if r.Outlier != "" {
			out = append(out, r.Member.ID+":"+r.Outlier)
		}
	}
	if strings.Join(out, ",") != "b3:high" {
		t.Errorf("outliers %v, want b3:high", out)
	}
	var buf bytes.Buffer
	if err := WriteCSV(&buf, tab); err != nil {
		t.Fatal(err)
	}
	want := `id,group,status,method,speed_mps,ci95_lo_mps,ci95_hi_mps,confidence,aberration_compensated,outlier,error
a1,a,ok,sweep,1500.000,1495.000,1505.000,high,false,,
a2,a,ok,sweep,1502.500,1497.500,1507.500,high,false,,
b1,b,ok,sweep,1504.000,1499.000,1509.000,high,false,,
b2,b,ok,sweep,1506.000,1501.000,1511.000,high,false,,
b3,b,ok,sweep,1600.000,1595.000,1605.000,high,false,high,
c1,c,failed,,,,,,,,channels.npy: truncated
c2,c,missing,,,,,,,,no result
c3,c,missing,,,,,,,,no result
`
	if buf.String() != want {
		t.Errorf("cohort.csv:\n%s\nwant\n%s", buf.String(), want)
	}
	sum := Summarize(tab, "group", "", "caution")
	if sum.OK != 5 || sum.Failed != 1 || sum.Missing != 2 || len(sum.Groups) != 3 || sum.Groups[1].Stats.N != 3 || len(sum.Outliers) != 1 || sum.Timing.N != 6 {
		t.Errorf("summary: %+v", sum)
	}
	// a shard holds its slice of the sorted ids
	tab2, _ := Collect(info, recs, jobs.Shard{Index: 2, Count: 3})
	var got []string
	for _, r := range tab2.Rows {
		got = append(got, r.Member.ID)
	}
	if strings.Join(got, ",") != "a2,b3,c3" {
		t.Errorf("shard 2/3: %v, want a2, b3, c3", got)
	}
}

func TestColumns(t *testing.T) {
	t.Parallel()
	info := &RunInfo{Columns: []string{"site", "group", "age", "temperature_c"}, Members: []Member{
		{ID: "a", Meta: []string{"x", "1", "40", "21.5"}},
		{ID: "b", Meta: []string{"y", "2", "", "22"}},
		{ID: "c", Meta: []string{"y", "2", "n/a", "23"}},
	}}
	tab := &Table{Info: info}
	g, x, err := Columns(tab, "", "")
	if err != nil || g != "group" || x != "temperature_c" {
		t.Errorf("defaults: %q, %q, %v; want group, temperature_c (the group is numeric but is the group; age has text)", g, x, err)
	}
	if g, x, err = Columns(tab, "site", "group"); err != nil || g != "site" || x != "group" {
		t.Errorf("named: %q %q %v", g, x, err)
	}
	for _, c := range [][2]string{{"nope", ""}, {"", "nope"}, {"", "age"}} {
		if _, _, err := Columns(tab, c[0], c[1]); err == nil {
			t.Errorf("Columns(%q, %q) accepted", c[0], c[1])
		}
	}
}
