package jobs

import (
	"fmt"
	"sort"
	"strconv"
	"strings"
)

// Shard is slice Index of Count (Index from 1 to Count) of a job list. The
// zero value is the whole list.
type Shard struct{ Index, Count int }

// MaxShards bounds Count.
const MaxShards = 1 << 20

// ParseShard reads "I/N", e.g. "3/8"; "" is the whole list.
func ParseShard(s string) (Shard, error) {
	if strings.TrimSpace(s) == "" {
		return Shard{}, nil
	}
	a, b, ok := strings.Cut(s, "/")
	if !ok {
		return Shard{}, fmt.Errorf("want I/N (shard I of N, I from 1 to N), got %q", s)
	}
	i, err1 := strconv.Atoi(strings.TrimSpace(a))
	n, err2 := strconv.Atoi(strings.TrimSpace(b))
	if err1 != nil || err2 != nil {
		return Shard{}, fmt.Errorf("want I/N with whole numbers, got %q", s)
	}
	sh := Shard{Index: i, Count: n}
	return sh, sh.Validate()
}

// Validate checks 1 <= Index <= Count (or the zero value).
func (s Shard) Validate() error {
	if s == (Shard{}) {
		return nil
	}
	if s.Count < 1 || s.Count > MaxShards || s.Index < 1 || s.Index > s.Count {
		return fmt.Errorf("shard %d/%d: want I/N with 1 <= I <= N <= %d", s.Index, s.Count, MaxShards)
	}
	return nil
}

// All reports whether s selects the whole list.
func (s Shard) All() bool { return s == (Shard{}) || s.Count == 1 }

func (s Shard) String() string {
	if s == (Shard{}) {
		return "1/1"
	}
	return fmt.Sprintf("%d/%d", s.Index, s.Count)
}

// Contains reports whether the job at index k of the canonical order
// belongs to s: k mod Count == Index - 1.
func (s Shard) Contains(k int) bool {
	if s.All() {
		return true
	}
	return k%s.Count == s.Index-1
}

// Select returns the IDs of s, in canonical (sorted) order.
func (s Shard) Select(ids []string) []string {
	sorted := append([]string(nil), ids...)
	sort.Strings(sorted)
	var out []string
	for k, id := range sorted {
		if s.Contains(k) {
			out = append(out, id)
		}
	}
	return out
}
