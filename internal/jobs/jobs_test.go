package jobs

import (
	"context"
	"errors"
	"fmt"
	"math/rand/v2"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"sync/atomic"
	"testing"
	"time"
)

// squares returns n jobs "job-XXX" whose result is the square of their
// number, counting calls.
func squares(n int, calls *atomic.Int64) []Job {
	var js []Job
	for i := range n {
		js = append(js, Job{ID: fmt.Sprintf("job-%03d", i), Key: "v1", Run: func(context.Context) (any, error) {
			calls.Add(1)
			return map[string]int{"square": i * i}, nil
		}})
	}
	return js
}

func TestParseShard(t *testing.T) {
	t.Parallel()
	for _, c := range []struct {
		in   string
		want Shard
		ok   bool
	}{
		{"", Shard{}, true},
		{"1/1", Shard{1, 1}, true},
		{"3/8", Shard{3, 8}, true},
		{" 2 / 4 ", Shard{2, 4}, true},
		{"0/4", Shard{}, false},
		{"5/4", Shard{}, false},
		{"1/0", Shard{}, false},
		{"-1/4", Shard{}, false},
		{"a/4", Shard{}, false},
		{"3", Shard{}, false},
	} {
		got, err := ParseShard(c.in)
		if (err == nil) != c.ok || (c.ok && got != c.want) {
			t.Errorf("ParseShard(%q) = %v, %v; want %v (ok %v)", c.in, got, err, c.want, c.ok)
		}
	}
}

// TestShardsDisjointAndComplete: for any list and any N, the N shards are
// disjoint, cover every ID, follow k mod N == I-1 in sorted order, and do not
// depend on the order the IDs were given in.
func TestShardsDisjointAndComplete(t *testing.T) {
	t.Parallel()
	rng := rand.New(rand.NewPCG(1, 2))
	for _, n := range []int{0, 1, 2, 7, 40} {
		ids := make([]string, n)
		for i := range ids {
			ids[i] = fmt.Sprintf("%08x", rng.Uint32())
		}
		sorted := slices.Sorted(slices.Values(ids))
		for _, count := range []int{1, 2, 3, 8, 50} {
			seen := map[string]int{}
			for i := 1; i <= count; i++ {
				sh := Shard{i, count}
				got := sh.Select(ids)
				shuffled := append([]string(nil), ids...)
				rng.Shuffle(len(shuffled), func(a, b int) { shuffled[a], shuffled[b] = shuffled[b], shuffled[a] })
				if again := sh.Select(shuffled); !slices.Equal(got, again) {
					t.Fatalf("shard %v depends on the input order", sh)
				}
				for _, id := range got {
					seen[id]++
					k := slices.Index(sorted, id)
					if k%count != i-1 {
						t.Errorf("%s at index %d is in shard %d/%d", id, k, i, count)
					}
				}
			}
			for _, id := range ids {
				if seen[id] != 1 {
					t.Errorf("n=%d N=%d: %s is in %d shards", n, count, id, seen[id])
				}
			}
		}
	}
}

// TestShardRunsMergeToWhole runs every shard of a job list into one folder
// and checks that the records equal those of an unsharded run.
func TestShardRunsMergeToWhole(t *testing.T) {
	t.Parallel()
	var calls atomic.Int64
	whole := t.TempDir()
	if _, err := Run(context.Background(), squares(23, &calls), Config{Dir: whole, Workers: 3}); err != nil {
		t.Fatal(err)
	}
	parts := t.TempDir()
	total := 0
	for i := 1; i <= 4; i++ {
		o, err := Run(context.Background(), squares(23, &calls), Config{Dir: parts, Workers: 2, Shard: Shard{i, 4}})
		if err != nil {
			t.Fatal(err)
		}
		if o.Skipped != 0 {
			t.Errorf("shard %d/4 skipped %d jobs of other shards", i, o.Skipped)
		}
		total += o.Ran
	}
	if total != 23 {
		t.Errorf("the shards ran %d jobs, want 23", total)
	}
	a, err := ReadRecords(whole)
	if err != nil {
		t.Fatal(err)
	}
	b, err := ReadRecords(parts)
	if err != nil {
		t.Fatal(err)
	}
	if len(a) != 23 || len(b) != 23 {
		t.Fatalf("records: %d unsharded, %d sharded", len(a), len(b))
	}
	for i := range a {
		if a[i].ID != b[i].ID || string(a[i].Result) != string(b[i].Result) || a[i].Status != b[i].Status {
			t.Errorf("record %d differs: %+v vs %+v", i, a[i], b[i])
		}
	}
}

func TestResumeSkipsFinished(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	var calls atomic.Int64
	o, err := Run(context.Background(), squares(10, &calls), Config{Dir: dir, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	if o.Ran != 10 || calls.Load() != 10 {
		t.Fatalf("first run ran %d (calls %d), want 10", o.Ran, calls.Load())
	}
	first, _ := ReadRecords(dir)
	// a rerun does nothing
	calls.Store(0)
	o, err = Run(context.Background(), squares(10, &calls), Config{Dir: dir, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	if o.Ran != 0 || o.Skipped != 10 || calls.Load() != 0 || len(o.Records) != 10 {
		t.Fatalf("rerun: ran %d, skipped %d, calls %d, records %d; want 0, 10, 0, 10", o.Ran, o.Skipped, calls.Load(), len(o.Records))
	}
	// lose three records (an interruption): only those run again
	for _, id := range []string{"job-001", "job-004", "job-009"} {
		if err := os.Remove(filepath.Join(dir, FileName(id))); err != nil {
			t.Fatal(err)
		}
	}
	o, err = Run(context.Background(), squares(10, &calls), Config{Dir: dir, Workers: 2})
	if err != nil {
		t.Fatal(err)
	}
	if o.Ran != 3 || o.Skipped != 7 || calls.Load() != 3 {
		t.Fatalf("resume: ran %d, skipped %d, calls %d; want 3, 7, 3", o.Ran, o.Skipped, calls.Load())
	}
	again, _ := ReadRecords(dir)
	for i := range first {
		if string(first[i].Result) != string(again[i].Result) {
			t.Errorf("%s: %s after resume, %s before", first[i].ID, again[i].Result, first[i].Result)
		}
	}
	// another key makes the records stale
	js := squares(10, &calls)
	for i := range js {
		js[i].Key = "v2"
	}
	calls.Store(0)
	o, err = Run(context.Background(), js, Config{Dir: dir})
	if err != nil {
		t.Fatal(err)
	}
	if o.Stale != 10 || o.Ran != 10 || calls.Load() != 10 {
		t.Errorf("new key: stale %d, ran %d; want 10, 10", o.Stale, o.Ran)
	}
}

func TestFailuresAndPanicsAreRecorded(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	var calls atomic.Int64
	js := squares(5, &calls)
	js = append(js,
		Job{ID: "bad", Run: func(context.Context) (any, error) { return nil, errors.New("the input is corrupt") }},
		Job{ID: "boom", Run: func(context.Context) (any, error) {
			var m map[string]int
			m["x"] = 1 // a programmer's mistake: assignment to a nil map
			return m, nil
		}},
		Job{ID: "unstorable", Run: func(context.Context) (any, error) { return func() {}, nil }},
	)
	o, err := Run(context.Background(), js, Config{Dir: dir, Workers: 3})
	if err != nil {
		t.Fatalf("a failing job stopped the run: %v", err)
	}
	if o.Ran != 8 || o.Failed != 3 {
		t.Fatalf("ran %d, failed %d; want 8, 3", o.Ran, o.Failed)
	}
	byID := map[string]Record{}
	for _, r := range o.Records {
		byID[r.ID] = r
	}
	if r := byID["bad"]; r.Status != Failed || r.Error != "the input is corrupt" || r.Result != nil {
		t.Errorf("bad: %+v", r)
	}
	if r := byID["boom"]; r.Status != Failed || !strings.Contains(r.Error, "panic") || !strings.Contains(r.Error, "nil map") || r.Stack == "" {
		t.Errorf("boom: %+v", r)
	}
	if r := byID["unstorable"]; r.Status != Failed || !strings.Contains(r.Error, "JSON") {
		t.Errorf("unstorable: %+v", r)
	}
	if r := byID["job-002"]; r.Status != OK || string(r.Result) != `{"square":4}` {
		t.Errorf("job-002: %+v", r)
	}
	// failures are finished jobs; RetryFailed runs them again
	o, _ = Run(context.Background(), js, Config{Dir: dir})
	if o.Ran != 0 || o.Failed != 3 {
		t.Errorf("rerun: ran %d, failed %d; want 0, 3", o.Ran, o.Failed)
	}
	o, _ = Run(context.Background(), js, Config{Dir: dir, RetryFailed: true})
	if o.Ran != 3 {
		t.Errorf("retry: ran %d, want 3", o.Ran)
	}
}

// TestCancel: a cancelled run stops dispatching, leaves the jobs in progress
// without records, and a rerun finishes the rest.
func TestCancel(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	ctx, cancel := context.WithCancel(context.Background())
	started := make(chan struct{}, 100)
	var js []Job
	for i := range 20 {
		js = append(js, Job{ID: fmt.Sprintf("j%02d", i), Run: func(ctx context.Context) (any, error) {
			started <- struct{}{}
			if i < 3 {
				return i, nil
			}
			<-ctx.Done() // a long job that honours the cancellation
			return nil, ctx.Err()
		}})
	}
	go func() {
		for range 4 {
			<-started
		}
		cancel()
	}()
	o, err := Run(ctx, js, Config{Dir: dir, Workers: 2})
	if !errors.Is(err, context.Canceled) {
		t.Fatalf("err = %v, want context.Canceled", err)
	}
	if o.Ran != 3 || o.Interrupted == 0 || o.Failed != 0 {
		t.Fatalf("ran %d, interrupted %d, failed %d; want 3, >0, 0", o.Ran, o.Interrupted, o.Failed)
	}
	recs, _ := ReadRecords(dir)
	if len(recs) != 3 {
		t.Fatalf("%d records after the interruption, want 3", len(recs))
	}
	for i := range js {
		js[i].Run = func(context.Context) (any, error) { return i, nil }
	}
	o, err = Run(context.Background(), js, Config{Dir: dir, Workers: 2})
	if err != nil || o.Ran != 17 || o.Skipped != 3 {
		t.Fatalf("resume: ran %d, skipped %d, err %v; want 17, 3", o.Ran, o.Skipped, err)
	}
}

func TestProgress(t *testing.T) {
	t.Parallel()
	var mu sync.Mutex
	var ps []Progress
	var calls atomic.Int64
	js := squares(6, &calls)
	js = append(js, Job{ID: "z-fail", Run: func(context.Context) (any, error) { return nil, errors.New("no") }})
	_, err := Run(context.Background(), js, Config{Dir: t.TempDir(), Workers: 2, Progress: func(p Progress) {
		mu.Lock()
		ps = append(ps, p)
		mu.Unlock()
	}})
	if err != nil {
		t.Fatal(err)
	}
	if len(ps) != 8 {
		t.Fatalf("%d progress reports, want 8 (start and one per job)", len(ps))
	}
	if ps[0].Done != 0 || ps[0].Remaining != 7 || ps[0].ETA != -1 || ps[0].Last != nil {
		t.Errorf("first report %+v", ps[0])
	}
	last := ps[len(ps)-1]
	if last.Done != 7 || last.Failed != 1 || last.Remaining != 0 || last.Total != 7 || last.ETA != 0 {
		t.Errorf("last report %+v", last)
	}
	lastIDs := map[string]bool{}
	for i := 1; i < len(ps); i++ {
		if ps[i].Done != i || ps[i].ETA < 0 || ps[i].Done+ps[i].Remaining != 7 || ps[i].Last == nil {
			t.Errorf("report %d: %+v", i, ps[i])
			continue
		}
		lastIDs[ps[i].Last.ID] = true
		if ps[i].Last.ID == "z-fail" && (ps[i].Last.Status != Failed || ps[i].Last.Error != "no") {
			t.Errorf("report %d: last %+v, want the failed record", i, *ps[i].Last)
		}
	}
	if len(lastIDs) != 7 {
		t.Errorf("the reports name %d distinct finished jobs, want 7", len(lastIDs))
	}
	if s := (Progress{Total: 40, Done: 12, Failed: 1, Remaining: 28, ETA: 190 * time.Second}).String(); s != "12/40 done, 1 failed, 28 left, about 3m10s" {
		t.Errorf("String: %q", s)
	}
}

func TestBadJobLists(t *testing.T) {
	t.Parallel()
	ok := func(context.Context) (any, error) { return 1, nil }
	for name, js := range map[string][]Job{
		"duplicate": {{ID: "a", Run: ok}, {ID: "a", Run: ok}},
		"empty ID":  {{ID: "", Run: ok}},
		"no Run":    {{ID: "a"}},
	} {
		if _, err := Run(context.Background(), js, Config{Dir: t.TempDir()}); err == nil {
			t.Errorf("%s: no error", name)
		}
	}
	if _, err := Run(context.Background(), nil, Config{Dir: t.TempDir(), Shard: Shard{3, 2}}); err == nil {
		t.Error("shard 3/2 accepted")
	}
}

func TestFileName(t *testing.T) {
	t.Parallel()
	if got := FileName("case-0a1b.c_2"); got != "case-0a1b.c_2.json" {
		t.Errorf("safe ID: %s", got)
	}
	odd := []string{"../etc/passwd", "a b", "subject/01", ".hidden", strings.Repeat("x", 200), "subject/01 "}
	seen := map[string]bool{}
	for _, id := range odd {
		n := FileName(id)
		if strings.ContainsAny(n, "/ ") || strings.HasPrefix(n, ".") || len(n) > 100 || seen[n] {
			t.Errorf("FileName(%q) = %q", id, n)
		}
		seen[n] = true
	}
	// a record under an odd ID round-trips
	dir := t.TempDir()
	if _, err := Run(context.Background(), []Job{{ID: "subject/01", Run: func(context.Context) (any, error) { return "x", nil }}}, Config{Dir: dir}); err != nil {
		t.Fatal(err)
	}
	recs, err := ReadRecords(dir)
	if err != nil || len(recs) != 1 || recs[0].ID != "subject/01" {
		t.Fatalf("records %+v, %v", recs, err)
	}
}

// TestUnreadableRecordRunsAgain: a record file someone edited into garbage
// is not trusted; the job runs again.
func TestUnreadableRecordRunsAgain(t *testing.T) {
	t.Parallel()
	dir := t.TempDir()
	var calls atomic.Int64
	if _, err := Run(context.Background(), squares(3, &calls), Config{Dir: dir}); err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(filepath.Join(dir, FileName("job-001")), []byte("{not json"), 0o644); err != nil {
		t.Fatal(err)
	}
	calls.Store(0)
	o, err := Run(context.Background(), squares(3, &calls), Config{Dir: dir})
	if err != nil || o.Ran != 1 || calls.Load() != 1 {
		t.Fatalf("ran %d, calls %d, err %v; want 1, 1", o.Ran, calls.Load(), err)
	}
}
