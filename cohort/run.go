package cohort

import (
	"context"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"sort"
	"strings"

	"celerity/internal/atomicfile"
	"celerity/internal/jobs"
	"celerity/internal/jsonx"
	"celerity/metrics"
)

// Names in an output folder.
const (
	// RunFile describes what the folder holds: the settings and the
	// members.
	RunFile = "run.json"
	// ResultsDir holds one result record per acquisition (internal/jobs).
	ResultsDir = "results"
	// OutputsDir holds the per-acquisition outputs (Settings.KeepImages).
	OutputsDir  = "acquisitions"
	runFormatV1 = "celerity.cohort-run/1"
)

// RunInfo is run.json: the settings of a run and the acquisitions it
// covers (every shard's folder lists them all).
type RunInfo struct {
	Format   string   `json:"format"`
	Source   string   `json:"source"`
	Columns  []string `json:"columns"`
	Settings Settings `json:"settings"`
	// Key fingerprints the settings.
	Key     string   `json:"key"`
	Members []Member `json:"members"`
}

// NewRunInfo normalises s, fingerprints every member's acquisition under
// the settings' key, and returns the description of the run. The members
// are sorted by ID, the canonical order of the job runner.
func NewRunInfo(l *List, s Settings) (*RunInfo, error) {
	if err := s.Normalize(); err != nil {
		return nil, err
	}
	if len(l.Members) == 0 {
		return nil, errors.New("no acquisitions")
	}
	info := &RunInfo{Format: runFormatV1, Source: l.Source, Columns: append([]string{}, l.Columns...), Settings: s, Key: s.Key()}
	seen := map[string]bool{}
	for _, m := range l.Members {
		if seen[m.ID] {
			return nil, fmt.Errorf("two acquisitions have the id %q", m.ID)
		}
		seen[m.ID] = true
		if len(m.Meta) != len(l.Columns) {
			return nil, fmt.Errorf("acquisition %q has %d metadata values for %d columns", m.ID, len(m.Meta), len(l.Columns))
		}
		m.Meta = append([]string(nil), m.Meta...)
		m.Key = Fingerprint(m.Dir, info.Key)
		info.Members = append(info.Members, m)
	}
	sort.Slice(info.Members, func(a, b int) bool { return info.Members[a].ID < info.Members[b].ID })
	return info, nil
}

// ReadRunInfo reads dir/run.json.
func ReadRunInfo(dir string) (*RunInfo, error) {
	path := filepath.Join(dir, RunFile)
	b, err := os.ReadFile(path)
	if err != nil {
		return nil, err
	}
	var info RunInfo
	if err := jsonx.DecodeStrict(b, &info); err != nil {
		return nil, fmt.Errorf("%s: not a cohort run: %v", path, err)
	}
	if info.Format != runFormatV1 {
		return nil, fmt.Errorf("%s: format: want %q, got %q", path, runFormatV1, info.Format)
	}
	if !sort.SliceIsSorted(info.Members, func(a, b int) bool { return info.Members[a].ID < info.Members[b].ID }) {
		return nil, fmt.Errorf("%s: members: not sorted by id", path)
	}
	for i, m := range info.Members {
		if m.ID == "" || (i > 0 && info.Members[i-1].ID == m.ID) || len(m.Meta) != len(info.Columns) {
			return nil, fmt.Errorf("%s: members[%d]: empty or repeated id, or %d metadata values for %d columns", path, i, len(m.Meta), len(info.Columns))
		}
	}
	return &info, nil
}

// WriteRunInfo writes dir/run.json atomically, replacing an earlier one.
func WriteRunInfo(dir string, info *RunInfo) error {
	b, err := json.MarshalIndent(info, "", "  ")
	if err != nil {
		return err
	}
	return atomicfile.WriteBytes(filepath.Join(dir, RunFile), true, append(b, '\n'))
}

// Options tunes Run.
type Options struct {
	// Out is the output folder: run.json, results/ (one record per
	// acquisition) and, with Settings.KeepImages, acquisitions/. A folder
	// holding an earlier cohort run is continued: finished acquisitions
	// whose files and settings are unchanged are kept.
	Out string
	// Workers is the number of acquisitions processed at once; 0 means 1.
	// Each acquisition's estimators use every CPU on their own.
	Workers int
	// Shard selects a slice of the acquisitions (see internal/jobs).
	Shard jobs.Shard
	// RetryFailed processes again the acquisitions whose stored result is a
	// failure.
	RetryFailed bool
	// Progress, if not nil, is called before the first acquisition and
	// after each one (never concurrently).
	Progress func(jobs.Progress)
}

// prepareOut checks that out is new, empty or a cohort output folder, and
// writes run.json.
func prepareOut(out string, info *RunInfo) error {
	if st, err := os.Stat(out); err == nil {
		if !st.IsDir() {
			return fmt.Errorf("%s: exists and is not a folder", out)
		}
		_, err := ReadRunInfo(out)
		switch {
		case errors.Is(err, os.ErrNotExist):
			if ents, _ := os.ReadDir(out); len(ents) > 0 {
				return fmt.Errorf("%s: exists and is not a cohort output folder (no %s); choose another output folder", out, RunFile)
			}
		case err != nil:
			return err
		}
	}
	if err := os.MkdirAll(filepath.Join(out, ResultsDir), 0o755); err != nil {
		return err
	}
	return WriteRunInfo(out, info)
}

// outputName is the folder name of an acquisition's outputs.
func outputName(id string) string { return strings.TrimSuffix(jobs.FileName(id), ".json") }

// relativeError rewrites the acquisition's folder in an error message as
// its ID, so that the message reads the same wherever the data are.
func relativeError(err error, m Member) error {
	msg := err.Error()
	msg = strings.ReplaceAll(msg, m.Dir+string(filepath.Separator), m.ID+"/")
	msg = strings.ReplaceAll(msg, m.Dir, m.ID)
	return errors.New(msg)
}

// Run processes the acquisitions of the shard that have no current result
// in opt.Out, writing each result as soon as it is finished, and returns
// the table of the shard's acquisitions (finished in this run or an
// earlier one). A failure on one acquisition is a failed row, not an
// error; the error is for problems of the run itself, or ctx's error when
// it was cancelled (the table so far is returned with it).
func Run(ctx context.Context, l *List, s Settings, opt Options) (*Table, error) {
	if opt.Out == "" {
		return nil, errors.New("cohort: no output folder")
	}
	if err := opt.Shard.Validate(); err != nil {
		return nil, err
	}
	info, err := NewRunInfo(l, s)
	if err != nil {
		return nil, err
	}
	st := info.Settings
	st.Regions = s.Regions
	var pairs []metrics.RegionPair
	if st.Regions != "" {
		if pairs, err = metrics.LoadRegions(st.Regions); err != nil {
			return nil, err
		}
	}
	if err := prepareOut(opt.Out, info); err != nil {
		return nil, err
	}
	var js []jobs.Job
	for _, m := range info.Members {
		js = append(js, jobs.Job{ID: m.ID, Key: m.Key, Run: func(ctx context.Context) (any, error) {
			name := outputName(m.ID)
			res, err := Process(ctx, m.ID, m.Dir, &st, pairs, filepath.Join(opt.Out, OutputsDir, name), OutputsDir+"/"+name)
			if err != nil {
				if ctx.Err() != nil {
					return nil, err
				}
				return nil, relativeError(err, m)
			}
			return res, nil
		}})
	}
	resDir := filepath.Join(opt.Out, ResultsDir)
	_, runErr := jobs.Run(ctx, js, jobs.Config{Dir: resDir, Workers: opt.Workers, Shard: opt.Shard,
		RetryFailed: opt.RetryFailed, Progress: opt.Progress})
	if runErr != nil && ctx.Err() == nil {
		return nil, runErr
	}
	recs, err := jobs.ReadRecords(resDir)
	if err != nil {
		return nil, err
	}
	t, err := Collect(info, recs, opt.Shard)
	if err != nil {
		return nil, err
	}
	return t, runErr
}

// MergeInputs reads the output folders of runs of one cohort (typically one
// per shard): their description and records. The folders must hold the
// same acquisitions (ids, metadata and file fingerprints) under the same
// settings; an acquisition finished in several keeps the first folder's
// record.
func MergeInputs(dirs []string) (*RunInfo, []jobs.Record, error) {
	if len(dirs) == 0 {
		return nil, nil, errors.New("no folders to merge")
	}
	var info *RunInfo
	seen := map[string]bool{}
	var recs []jobs.Record
	for _, d := range dirs {
		di, err := ReadRunInfo(d)
		if err != nil {
			if errors.Is(err, os.ErrNotExist) {
				return nil, nil, fmt.Errorf("%s: not a cohort output folder (no %s)", d, RunFile)
			}
			return nil, nil, err
		}
		if info == nil {
			info = di
		} else if err := sameCohort(info, di); err != nil {
			return nil, nil, fmt.Errorf("%s and %s: %v", dirs[0], d, err)
		}
		rs, err := jobs.ReadRecords(filepath.Join(d, ResultsDir))
		if err != nil {
			return nil, nil, err
		}
		for _, r := range rs {
			if seen[r.ID] {
				continue
			}
			seen[r.ID] = true
			recs = append(recs, r)
		}
	}
	sort.Slice(recs, func(a, b int) bool { return recs[a].ID < recs[b].ID })
	return info, recs, nil
}

// sameCohort checks that two runs cover the same acquisitions with the same
// settings.
func sameCohort(a, b *RunInfo) error {
	if a.Key != b.Key {
		return errors.New("run with other settings (steps, method, range, seed, regions or --keep-images)")
	}
	if strings.Join(a.Columns, "\x00") != strings.Join(b.Columns, "\x00") {
		return fmt.Errorf("other metadata columns (%v against %v)", a.Columns, b.Columns)
	}
	if len(a.Members) != len(b.Members) {
		return fmt.Errorf("runs of different cohorts (%d and %d acquisitions)", len(a.Members), len(b.Members))
	}
	for i := range a.Members {
		ma, mb := a.Members[i], b.Members[i]
		switch {
		case ma.ID != mb.ID:
			return fmt.Errorf("runs of different cohorts (acquisition %q against %q)", ma.ID, mb.ID)
		case ma.Key != mb.Key:
			return fmt.Errorf("acquisition %q: its files differ", ma.ID)
		case strings.Join(ma.Meta, "\x00") != strings.Join(mb.Meta, "\x00"):
			return fmt.Errorf("acquisition %q: its metadata differ", ma.ID)
		}
	}
	return nil
}

// InitFolder writes run.json and the records into dir (a merged result's
// folder), and copies the per-acquisition outputs that the records name
// from the first of the folders in from that holds them.
func InitFolder(dir string, info *RunInfo, recs []jobs.Record, from []string) error {
	if err := os.MkdirAll(filepath.Join(dir, ResultsDir), 0o755); err != nil {
		return err
	}
	if err := WriteRunInfo(dir, info); err != nil {
		return err
	}
	for _, r := range recs {
		if err := jobs.WriteRecord(filepath.Join(dir, ResultsDir), r); err != nil {
			return err
		}
		if r.Status != jobs.OK {
			continue
		}
		var res struct {
			Outputs string `json:"outputs"`
		}
		if json.Unmarshal(r.Result, &res) != nil || res.Outputs == "" || res.Outputs != OutputsDir+"/"+outputName(r.ID) {
			continue
		}
		for _, src := range from {
			p := filepath.Join(src, filepath.FromSlash(res.Outputs))
			if st, err := os.Stat(p); err == nil && st.IsDir() {
				if err := copyTree(filepath.Join(dir, filepath.FromSlash(res.Outputs)), p); err != nil {
					return err
				}
				break
			}
		}
	}
	return nil
}

// copyTree copies the regular files of folder src (recursively) to dst,
// hard-linking where the file system allows.
func copyTree(dst, src string) error {
	return filepath.WalkDir(src, func(p string, d fs.DirEntry, err error) error {
		if err != nil {
			return err
		}
		rel, err := filepath.Rel(src, p)
		if err != nil {
			return err
		}
		target := filepath.Join(dst, rel)
		if d.IsDir() {
			return os.MkdirAll(target, 0o755)
		}
		if !d.Type().IsRegular() {
			return nil
		}
		if os.Link(p, target) == nil {
			return nil
		}
		in, err := os.Open(p)
		if err != nil {
			return err
		}
		defer in.Close()
		return atomicfile.Write(target, true, func(w io.Writer) error {
			_, err := io.Copy(w, in)
			return err
		})
	})
}
