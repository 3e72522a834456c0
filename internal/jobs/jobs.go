package jobs

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"runtime/debug"
	"sort"
	"strings"
	"sync"
	"time"

	"celerity/internal/atomicfile"
	"celerity/internal/jsonx"
)

// RecordFormat identifies record files.
const RecordFormat = "celerity.job/1"

// Job is one unit of work.
type Job struct {
	// ID names the job; it must be unique within a run and stable from one
	// run to the next (it names the record file and decides the shard).
	ID string
	// Key fingerprints the job's definition. A stored record with another
	// key is stale and the job runs again. Empty is a valid key.
	Key string
	// Run does the work. Its result is stored as JSON (json.Marshal), so it
	// must marshal deterministically for reruns to give the same bytes. It
	// should return soon after ctx is cancelled; an error returned after the
	// cancellation counts as an interruption, not a failure.
	Run func(ctx context.Context) (any, error)
}

// Status is the outcome of a finished job.
type Status string

// Statuses.
const (
	OK     Status = "ok"
	Failed Status = "failed"
)

// Record is a finished job as stored in its file.
type Record struct {
	Format string `json:"format"`
	ID     string `json:"id"`
	Key    string `json:"key,omitempty"`
	Status Status `json:"status"`
	// Error is the failure's message; Stack the goroutine stack of a panic.
	Error string `json:"error,omitempty"`
	Stack string `json:"stack,omitempty"`
	// Seconds is the wall time the job took.
	Seconds float64 `json:"seconds"`
	// Result is the job's result as JSON (absent for a failure).
	Result json.RawMessage `json:"result,omitempty"`
}

// Progress is what a run reports after each finished job (and once at the
// start).
type Progress struct {
	Total     int // jobs in the shard
	Done      int // finished jobs, in this run or an earlier one
	Failed    int // finished jobs that failed
	Skipped   int // finished jobs found from an earlier run
	Running   int // jobs in progress
	Remaining int // Total - Done
	Elapsed   time.Duration
	// ETA is the time left, estimated as Remaining x Elapsed / (jobs
	// finished in this run); -1 until a job has finished in this run.
	ETA time.Duration
	// Last is the record of the job whose end this report follows (nil in
	// the first report), e.g. for a log line per finished job.
	Last *Record
}

// String is a one-line summary, e.g. "12/40 done, 1 failed, 28 left, about 3m10s".
func (p Progress) String() string {
	s := fmt.Sprintf("%d/%d done, %d failed, %d left", p.Done, p.Total, p.Failed, p.Remaining)
	if p.ETA >= 0 && p.Remaining > 0 {
		s += ", about " + p.ETA.Round(time.Second).String()
	}
	return s
}

// Config tunes Run.
type Config struct {
	// Dir receives one record file per finished job; it is created if
	// needed.
	Dir string
	// Workers is the number of jobs run at once; 0 means 1.
	Workers int
	// Shard selects a slice of the jobs; the zero value selects all.
	Shard Shard
	// RetryFailed runs again the jobs whose stored record is a failure.
	RetryFailed bool
	// Progress, if not nil, is called (never concurrently) after each
	// finished job and once before the first.
	Progress func(Progress)
}

// Outcome is the result of Run.
type Outcome struct {
	// Records are the finished jobs of the shard in canonical order,
	// including those found from an earlier run.
	Records []Record
	// Ran jobs were run now, Skipped were found finished; Failed counts the
	// failed records; Interrupted jobs were cut short by the cancellation
	// and left without a record; Stale records were found but made from
	// another definition, and their jobs run again.
	Ran, Skipped, Failed, Interrupted, Stale int
}

// Run runs the jobs of the shard that have no current record in cfg.Dir, on
// cfg.Workers workers, and writes a record for each as it finishes. It
// returns an error only for problems of the run itself (bad IDs, a record
// that cannot be written) or ctx's error when the run was cancelled; job
// failures are records.
func Run(ctx context.Context, jobList []Job, cfg Config) (*Outcome, error) {
	if cfg.Dir == "" {
		return nil, errors.New("jobs: no results folder")
	}
	if err := cfg.Shard.Validate(); err != nil {
		return nil, err
	}
	sorted, err := canonical(jobList)
	if err != nil {
		return nil, err
	}
	if err := os.MkdirAll(cfg.Dir, 0o755); err != nil {
		return nil, err
	}
	var mine []Job
	for k, j := range sorted {
		if cfg.Shard.Contains(k) {
			mine = append(mine, j)
		}
	}
	out := &Outcome{}
	records := make([]*Record, len(mine))
	var todo []int
	for i, j := range mine {
		r, err := ReadRecord(filepath.Join(cfg.Dir, FileName(j.ID)))
		switch {
		case err != nil && !errors.Is(err, os.ErrNotExist):
			// unreadable or edited: run the job again
			todo = append(todo, i)
		case err != nil:
			todo = append(todo, i)
		case r.ID != j.ID || r.Key != j.Key:
			out.Stale++
			todo = append(todo, i)
		case r.Status == Failed && cfg.RetryFailed:
			todo = append(todo, i)
		default:
			records[i] = r
			out.Skipped++
			if r.Status == Failed {
				out.Failed++
			}
		}
	}

	workers := max(1, cfg.Workers)
	start := time.Now()
	var mu sync.Mutex
	running, ranNow := 0, 0
	report := func(last *Record) {
		// called with mu held
		if cfg.Progress == nil {
			return
		}
		done := out.Skipped + ranNow
		p := Progress{Total: len(mine), Done: done, Failed: out.Failed, Skipped: out.Skipped,
			Running: running, Remaining: len(mine) - done, Elapsed: time.Since(start), ETA: -1, Last: last}
		if ranNow > 0 {
			p.ETA = time.Duration(float64(p.Remaining) * float64(p.Elapsed) / float64(ranNow))
		}
		cfg.Progress(p)
	}
	mu.Lock()
	report(nil)
	mu.Unlock()

	queue := make(chan int)
	var writeErr error
	stop := make(chan struct{})
	var stopOnce sync.Once
	halt := func() { stopOnce.Do(func() { close(stop) }) }
	var wg sync.WaitGroup
	for w := 0; w < min(workers, max(1, len(todo))); w++ {
		wg.Add(1)
		go func() {
			defer wg.Done()
			for i := range queue {
				j := mine[i]
				mu.Lock()
				running++
				mu.Unlock()
				rec, interrupted := runOne(ctx, j)
				mu.Lock()
				running--
				if interrupted {
					out.Interrupted++
					mu.Unlock()
					continue
				}
				if err := writeRecord(cfg.Dir, rec); err != nil {
					if writeErr == nil {
						writeErr = err
					}
					halt()
					mu.Unlock()
					continue
				}
				records[i] = rec
				ranNow++
				out.Ran++
				if rec.Status == Failed {
					out.Failed++
				}
				report(rec)
				mu.Unlock()
			}
		}()
	}
dispatch:
	for _, i := range todo {
		select {
		case <-ctx.Done():
			break dispatch
		case <-stop:
			break dispatch
		case queue <- i:
		}
	}
	close(queue)
	wg.Wait()
	for _, r := range records {
		if r != nil {
			out.Records = append(out.Records, *r)
		}
	}
	if writeErr != nil {
		return out, writeErr
	}
	if err := ctx.Err(); err != nil {
		return out, err
	}
	return out, nil
}

// canonical checks the jobs and returns them sorted by ID.
func canonical(jobList []Job) ([]Job, error) {
	sorted := append([]Job(nil), jobList...)
	sort.SliceStable(sorted, func(a, b int) bool { return sorted[a].ID < sorted[b].ID })
	for k, j := range sorted {
		if j.ID == "" {
			return nil, errors.New("jobs: a job has an empty ID")
		}
		if j.Run == nil {
			return nil, fmt.Errorf("jobs: job %q has no Run function", j.ID)
		}
		if k > 0 && sorted[k-1].ID == j.ID {
			return nil, fmt.Errorf("jobs: two jobs have the ID %q", j.ID)
		}
	}
	return sorted, nil
}

// runOne runs j, turning an error or a panic into a failed record. It
// reports interrupted when the job returned an error after ctx was
// cancelled.
func runOne(ctx context.Context, j Job) (rec *Record, interrupted bool) {
	rec = &Record{Format: RecordFormat, ID: j.ID, Key: j.Key}
	t0 := time.Now()
	res, err, stack := call(ctx, j)
	rec.Seconds = time.Since(t0).Seconds()
	if err != nil && stack == "" && ctx.Err() != nil {
		return nil, true
	}
	if err == nil {
		b, merr := json.Marshal(res)
		if merr != nil {
			err = fmt.Errorf("the result cannot be stored as JSON: %w", merr)
		} else {
			rec.Result = b
		}
	}
	if err != nil {
		rec.Status = Failed
		rec.Error = err.Error()
		rec.Stack = stack
		rec.Result = nil
		return rec, false
	}
	rec.Status = OK
	return rec, false
}

// call runs j.Run and recovers a panic as an error with its stack.
func call(ctx context.Context, j Job) (res any, err error, stack string) {
	defer func() {
		if r := recover(); r != nil {
			err = fmt.Errorf("panic: %v", r)
			stack = string(debug.Stack())
			res = nil
		}
	}()
	res, err = j.Run(ctx)
	return res, err, ""
}

// safeID matches IDs used as file names as they are.
func safeID(id string) bool {
	if id == "" || len(id) > 100 || id[0] == '.' || id[0] == '-' {
		return false
	}
	for _, c := range id {
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9', c == '-', c == '_', c == '.':
		default:
			return false
		}
	}
	return true
}

// FileName is the record file of a job: the ID with ".json" when the ID is
// made of letters, digits, '-', '_' and '.' (at most 100, not starting with
// '.' or '-'); otherwise those characters of it, '~' and the first 16 hex
// digits of the SHA-256 of the ID.
func FileName(id string) string {
	if safeID(id) {
		return id + ".json"
	}
	var b strings.Builder
	for _, c := range id {
		if b.Len() >= 60 {
			break
		}
		switch {
		case c >= 'a' && c <= 'z', c >= 'A' && c <= 'Z', c >= '0' && c <= '9', c == '-', c == '_':
			b.WriteRune(c)
		default:
			b.WriteByte('_')
		}
	}
	h := sha256.Sum256([]byte(id))
	return b.String() + "~" + hex.EncodeToString(h[:8]) + ".json"
}

func writeRecord(dir string, r *Record) error {
	b, err := json.MarshalIndent(r, "", "  ")
	if err != nil {
		return err
	}
	b = append(b, '\n')
	return atomicfile.WriteBytes(filepath.Join(dir, FileName(r.ID)), true, b)
}

// maxRecordBytes bounds a record file.
const maxRecordBytes = 256 << 20

// ReadRecord reads one record file. A missing file gives an error wrapping
// os.ErrNotExist; anything else wrong names the file.
func ReadRecord(path string) (*Record, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	b, err := io.ReadAll(io.LimitReader(f, maxRecordBytes+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	if len(b) > maxRecordBytes {
		return nil, fmt.Errorf("%s: larger than %d MiB", path, maxRecordBytes>>20)
	}
	var r Record
	if err := jsonx.DecodeStrict(b, &r); err != nil {
		return nil, fmt.Errorf("%s: not a job record: %v", path, err)
	}
	if r.Format != RecordFormat {
		return nil, fmt.Errorf("%s: format: want %q, got %q", path, RecordFormat, r.Format)
	}
	if r.ID == "" {
		return nil, fmt.Errorf("%s: id: missing", path)
	}
	if r.Status != OK && r.Status != Failed {
		return nil, fmt.Errorf("%s: status: want ok or failed, got %q", path, r.Status)
	}
	if filepath.Base(path) != FileName(r.ID) {
		return nil, fmt.Errorf("%s: holds the record of job %q, whose file is %s", path, r.ID, FileName(r.ID))
	}
	return &r, nil
}

// ReadRecords reads every record file (*.json, not hidden) in dir, in
// canonical order of their IDs. A missing folder gives no records.
func ReadRecords(dir string) ([]Record, error) {
	ents, err := os.ReadDir(dir)
	if errors.Is(err, os.ErrNotExist) {
		return nil, nil
	}
	if err != nil {
		return nil, err
	}
	var out []Record
	for _, e := range ents {
		n := e.Name()
		if e.IsDir() || strings.HasPrefix(n, ".") || !strings.HasSuffix(n, ".json") {
			continue
		}
		r, err := ReadRecord(filepath.Join(dir, n))
		if err != nil {
			return nil, err
		}
		out = append(out, *r)
	}
	sort.Slice(out, func(a, b int) bool { return out[a].ID < out[b].ID })
	return out, nil
}

// WriteRecord stores r in dir, atomically (used by merges that copy records).
func WriteRecord(dir string, r Record) error { return writeRecord(dir, &r) }
