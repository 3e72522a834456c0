package cohort

import (
	"fmt"
	"sort"
	"strconv"

	"celerity/internal/jsonx"
)

// SummaryFormat identifies cohort.json.
const SummaryFormat = "celerity.cohort/1"

// GroupStats are the speeds of one value of the group column.
type GroupStats struct {
	Group  string `json:"group"`
	Rows   int    `json:"acquisitions"`
	Failed int    `json:"failed"`
	Stats
}

// Outlier is an acquisition whose speed lies beyond Tukey's fences.
type Outlier struct {
	ID       string      `json:"id"`
	SpeedMPS jsonx.Float `json:"speed_mps"`
	Side     string      `json:"side"` // low or high
}

// Timing summarises the runtimes, s: the one part of cohort.json that
// changes from run to run.
type Timing struct {
	N       int     `json:"n"`
	TotalS  float64 `json:"total_s"`
	MeanS   float64 `json:"mean_s"`
	MedianS float64 `json:"median_s"`
	MaxS    float64 `json:"max_s"`
}

// RowJSON is one acquisition in cohort.json.
type RowJSON struct {
	ID       string            `json:"id"`
	Metadata map[string]string `json:"metadata,omitempty"`
	Status   string            `json:"status"`
	Error    string            `json:"error,omitempty"`
	Outlier  string            `json:"outlier,omitempty"`
	*Result
}

// Summary is cohort.json: what was run, the speeds over the cohort and per
// group, the outliers, every row, and the runtimes.
type Summary struct {
	Format       string   `json:"format"`
	Source       string   `json:"source"`
	Shard        string   `json:"shard"`
	Settings     Settings `json:"settings"`
	Columns      []string `json:"columns"`
	GroupColumn  string   `json:"group_column,omitempty"`
	XColumn      string   `json:"x_column,omitempty"`
	Acquisitions int      `json:"acquisitions"`
	OK           int      `json:"ok"`
	Failed       int      `json:"failed"`
	Missing      int      `json:"missing"`
	// Speed summarises the speed estimates of the ok rows.
	Speed       Stats             `json:"speed"`
	Groups      []GroupStats      `json:"groups,omitempty"`
	Outliers    []Outlier         `json:"outliers,omitempty"`
	Definitions map[string]string `json:"definitions"`
	Rows        []RowJSON         `json:"rows"`
	Timing      Timing            `json:"timing"`
	Caution     string            `json:"caution,omitempty"`
}

// Definitions say how the summary's numbers are computed (also in
// docs/cohort.md).
var Definitions = map[string]string{
	"speed":                  "the speed step's estimate: the focus sweep maximising the coherence factor, re-estimated with the arrival-time profile when a near-field aberrator is found (method sweep), or the arrival-time fit of point targets (method targets); its 95 % interval and confidence as the speed command reports them",
	"sd_mps":                 "sample standard deviation of the speeds (n - 1 in the denominator)",
	"quartiles":              "q1, median, q3 by linear interpolation between order statistics (Hyndman & Fan definition 7)",
	"outlier":                "a speed below q1 - 1.5 (q3 - q1) or above q3 + 1.5 (q3 - q1) over the table's speeds (Tukey's fences; at least 4 speeds)",
	"profile_rms_s":          "rms of the arrival-time error profile estimated at the speed step's speed, mean and linear trend removed, s",
	"coherence_before/after": "coherence factor of the aperture data of the profile's patches without and with the profile applied",
	"lateral_width_gain_pct": "100 (W_before - W_after) / W_before, W the mean -6 dB lateral width of the point targets in the image at the scanner's assumed speed (before) and after correction",
	"gcnr_gain":              "mean gCNR of the region pairs after correction minus before",
	"runtime":                "wall time of an acquisition's job (timing.csv and the timing section; the only numbers that change from run to run)",
}

// Columns resolves the group and x columns of the plots: group "" means
// the column named "group" if there is one; x "" means the first numeric
// metadata column other than the group column. A named column that is
// missing, or an x column that is not numeric, is an error.
func Columns(t *Table, group, x string) (string, string, error) {
	info := t.Info
	if group != "" && info.ColumnIndex(group) < 0 {
		return "", "", fmt.Errorf("--group %s: no such metadata column (columns: %v)", group, info.Columns)
	}
	if group == "" && info.ColumnIndex("group") >= 0 {
		group = "group"
	}
	if x != "" {
		k := info.ColumnIndex(x)
		if k < 0 {
			return "", "", fmt.Errorf("--x %s: no such metadata column (columns: %v)", x, info.Columns)
		}
		if !t.numeric(k) {
			return "", "", fmt.Errorf("--x %s: the column is not numeric", x)
		}
		return group, x, nil
	}
	for k, c := range info.Columns {
		if c != group && t.numeric(k) {
			return group, c, nil
		}
	}
	return group, "", nil
}

// ColumnIndex returns the index of a metadata column, or -1.
func (info *RunInfo) ColumnIndex(name string) int {
	for i, c := range info.Columns {
		if c == name {
			return i
		}
	}
	return -1
}

// numeric reports whether metadata column k has at least one value and
// every non-empty value is a finite number.
func (t *Table) numeric(k int) bool {
	n := 0
	for _, m := range t.Info.Members {
		v := m.Meta[k]
		if v == "" {
			continue
		}
		f, err := strconv.ParseFloat(v, 64)
		if err != nil || !finite(f) {
			return false
		}
		n++
	}
	return n > 0
}

// groups returns the distinct values of metadata column k among the rows,
// in order of first appearance after sorting (empty shown as "(none)").
func (t *Table) groups(k int) []string {
	seen := map[string]bool{}
	var out []string
	for i := range t.Rows {
		g := groupName(t.Rows[i].Member.Meta[k])
		if !seen[g] {
			seen[g] = true
			out = append(out, g)
		}
	}
	sort.Strings(out)
	return out
}

func groupName(v string) string {
	if v == "" {
		return "(none)"
	}
	return v
}

// Summarize computes cohort.json for the table with the group and x
// columns of Columns.
func Summarize(t *Table, group, x, caution string) *Summary {
	info := t.Info
	s := &Summary{Format: SummaryFormat, Source: info.Source, Shard: t.Shard.String(), Settings: info.Settings,
		Columns: info.Columns, GroupColumn: group, XColumn: x, Acquisitions: len(t.Rows),
		OK: t.Count(StatusOK), Failed: t.Count(StatusFailed), Missing: t.Count(StatusMissing),
		Speed: StatsOf(t.speeds()), Definitions: Definitions, Caution: caution, Rows: []RowJSON{}}
	if k := info.ColumnIndex(group); k >= 0 {
		for _, g := range t.groups(k) {
			gs := GroupStats{Group: g}
			var v []float64
			for i := range t.Rows {
				r := &t.Rows[i]
				if groupName(r.Member.Meta[k]) != g {
					continue
				}
				gs.Rows++
				if r.Status == StatusFailed {
					gs.Failed++
				}
				if sp := r.Speed(); finite(sp) {
					v = append(v, sp)
				}
			}
			gs.Stats = StatsOf(v)
			s.Groups = append(s.Groups, gs)
		}
	}
	var secs []float64
	for i := range t.Rows {
		r := &t.Rows[i]
		if r.Outlier != "" {
			s.Outliers = append(s.Outliers, Outlier{ID: r.Member.ID, SpeedMPS: jsonx.Float(r.Speed()), Side: r.Outlier})
		}
		rj := RowJSON{ID: r.Member.ID, Status: r.Status, Error: r.Error, Outlier: r.Outlier, Result: r.Result}
		if len(info.Columns) > 0 {
			rj.Metadata = map[string]string{}
			for k, c := range info.Columns {
				rj.Metadata[c] = r.Member.Meta[k]
			}
		}
		s.Rows = append(s.Rows, rj)
		if finite(r.Seconds) {
			secs = append(secs, r.Seconds)
		}
	}
	if len(secs) > 0 {
		tot := 0.0
		for _, v := range secs {
			tot += v
		}
		s.Timing = Timing{N: len(secs), TotalS: tot, MeanS: tot / float64(len(secs)), MedianS: Quantile(secs, 0.5), MaxS: Quantile(secs, 1)}
	}
	return s
}
