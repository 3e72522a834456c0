package cohort

import (
	"encoding/csv"
	"fmt"
	"io"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"

	"celerity/internal/jobs"
	"celerity/internal/jsonx"
)

// Row statuses.
const (
	StatusOK      = "ok"
	StatusFailed  = "failed"
	StatusMissing = "missing" // no result yet (an interrupted run, a merge without every shard)
)

// Row is one acquisition in the table.
type Row struct {
	Member Member
	Status string
	// Error is a failure's message (or why the row is missing).
	Error string
	// Seconds is the wall time of the acquisition's job (NaN when missing);
	// it is kept out of the deterministic outputs.
	Seconds float64
	// Result is nil unless Status is ok.
	Result *Result
	// Outlier is "low" or "high" when the speed lies beyond Tukey's fences
	// of the table's speeds (see Summarize), else "".
	Outlier string
}

// Speed returns the row's speed estimate, NaN when it has none.
func (r *Row) Speed() float64 {
	if r.Result == nil {
		return math.NaN()
	}
	return float64(r.Result.SpeedMPS)
}

// Table is the rows of a run or a merge, in ID order.
type Table struct {
	Info  *RunInfo
	Shard jobs.Shard
	Rows  []Row
}

// Count returns the number of rows with the status.
func (t *Table) Count(status string) int {
	n := 0
	for i := range t.Rows {
		if t.Rows[i].Status == status {
			n++
		}
	}
	return n
}

// Collect turns result records into the table of the shard's acquisitions.
// Records made under another key are treated as missing.
func Collect(info *RunInfo, recs []jobs.Record, shard jobs.Shard) (*Table, error) {
	byID := map[string]*jobs.Record{}
	for i := range recs {
		byID[recs[i].ID] = &recs[i]
	}
	t := &Table{Info: info, Shard: shard}
	for k, m := range info.Members {
		if !shard.Contains(k) {
			continue
		}
		row := Row{Member: m, Seconds: math.NaN()}
		r := byID[m.ID]
		switch {
		case r == nil || r.Key != m.Key:
			row.Status, row.Error = StatusMissing, "no result"
		case r.Status == jobs.Failed:
			row.Status, row.Error, row.Seconds = StatusFailed, r.Error, r.Seconds
		default:
			var res Result
			if err := jsonx.DecodeStrict(r.Result, &res); err != nil {
				return nil, fmt.Errorf("result of acquisition %q: %v", m.ID, err)
			}
			if res.ID != m.ID {
				return nil, fmt.Errorf("result of acquisition %q names acquisition %q", m.ID, res.ID)
			}
			row.Status, row.Seconds, row.Result = StatusOK, r.Seconds, &res
		}
		t.Rows = append(t.Rows, row)
	}
	markOutliers(t)
	return t, nil
}

// markOutliers flags the rows whose speed lies beyond Tukey's fences,
// 1.5 interquartile ranges below the first or above the third quartile of
// the table's speeds (at least 4 speeds).
func markOutliers(t *Table) {
	v := t.speeds()
	if len(v) < 4 {
		return
	}
	q1, q3 := Quantile(v, 0.25), Quantile(v, 0.75)
	lo, hi := q1-1.5*(q3-q1), q3+1.5*(q3-q1)
	for i := range t.Rows {
		r := &t.Rows[i]
		switch s := r.Speed(); {
		case !finite(s):
		case s < lo:
			r.Outlier = "low"
		case s > hi:
			r.Outlier = "high"
		}
	}
}

// speeds lists the finite speeds of the ok rows, in table order.
func (t *Table) speeds() []float64 {
	var v []float64
	for i := range t.Rows {
		if s := t.Rows[i].Speed(); finite(s) {
			v = append(v, s)
		}
	}
	return v
}

// Quantile is the p-quantile of v by linear interpolation between order
// statistics (Hyndman & Fan definition 7: h = (n - 1) p); NaN for no values.
func Quantile(v []float64, p float64) float64 {
	if len(v) == 0 {
		return math.NaN()
	}
	s := append([]float64(nil), v...)
	sort.Float64s(s)
	h := float64(len(s)-1) * p
	k := int(math.Floor(h))
	if k >= len(s)-1 {
		return s[len(s)-1]
	}
	return s[k] + (h-float64(k))*(s[k+1]-s[k])
}

// Stats summarise speeds, m/s.
type Stats struct {
	N         int         `json:"n"`
	MeanMPS   jsonx.Float `json:"mean_mps"`
	SDMPS     jsonx.Float `json:"sd_mps"`
	MedianMPS jsonx.Float `json:"median_mps"`
	Q1MPS     jsonx.Float `json:"q1_mps"`
	Q3MPS     jsonx.Float `json:"q3_mps"`
	MinMPS    jsonx.Float `json:"min_mps"`
	MaxMPS    jsonx.Float `json:"max_mps"`
}

// StatsOf computes the mean, the sample standard deviation (n - 1), the
// median and quartiles (Quantile) and the range of v.
func StatsOf(v []float64) Stats {
	nan := jsonx.Float(math.NaN())
	s := Stats{N: len(v), MeanMPS: nan, SDMPS: nan, MedianMPS: nan, Q1MPS: nan, Q3MPS: nan, MinMPS: nan, MaxMPS: nan}
	if len(v) == 0 {
		return s
	}
	m := 0.0
	for _, x := range v {
		m += x
	}
	m /= float64(len(v))
	s.MeanMPS = jsonx.Float(m)
	if len(v) > 1 {
		ss := 0.0
		for _, x := range v {
			ss += (x - m) * (x - m)
		}
		s.SDMPS = jsonx.Float(math.Sqrt(ss / float64(len(v)-1)))
	}
	s.MedianMPS, s.Q1MPS, s.Q3MPS = jsonx.Float(Quantile(v, 0.5)), jsonx.Float(Quantile(v, 0.25)), jsonx.Float(Quantile(v, 0.75))
	s.MinMPS, s.MaxMPS = jsonx.Float(slices.Min(v)), jsonx.Float(slices.Max(v))
	return s
}

// fixed formats v with d decimals; NaN and infinities give "".
func fixed(v float64, d int) string {
	if !finite(v) {
		return ""
	}
	s := strconv.FormatFloat(v, 'f', d, 64)
	if z := strconv.FormatFloat(0, 'f', d, 64); s == "-"+z {
		s = z
	}
	return s
}

// sig formats v with 4 significant digits (seconds of profiles); NaN gives "".
func sig(v float64) string {
	if !finite(v) {
		return ""
	}
	if v == 0 {
		return "0"
	}
	return strconv.FormatFloat(v, 'g', 4, 64)
}

// column is one column of cohort.csv after the id and metadata.
type column struct {
	name string
	cell func(r *Row) string
}

// fixedColumns are every result column name (for manifests' checks).
var fixedColumns = []string{"id", "status", "method", "speed_mps", "ci95_lo_mps", "ci95_hi_mps", "confidence",
	"aberration_compensated", "outlier", "depth_confidence", "profile_speed_mps", "profile_rms_s", "coherence_before",
	"coherence_after", "corrected_speed_mps", "corrected_profile_rms_s", "lateral_width_before_mm", "lateral_width_after_mm",
	"lateral_width_gain_pct", "gcnr_before", "gcnr_after", "gcnr_gain", "contrast_before_db", "contrast_after_db",
	"true_speed_mps", "speed_error_mps", "error"}

// reservedColumn reports whether a metadata column would clash with a
// result column.
func reservedColumn(name string) bool {
	return slices.Contains(fixedColumns, name) || strings.HasPrefix(name, "layer_")
}

// res returns a number of the row's result, NaN without one.
func res(f func(*Result) jsonx.Float) func(*Row) float64 {
	return func(r *Row) float64 {
		if r.Result == nil {
			return math.NaN()
		}
		return float64(f(r.Result))
	}
}

func num(name string, d int, f func(*Row) float64) column {
	return column{name, func(r *Row) string { return fixed(f(r), d) }}
}

func text(name string, f func(*Result) string) column {
	return column{name, func(r *Row) string {
		if r.Result == nil {
			return ""
		}
		return f(r.Result)
	}}
}

// columns are the result columns of t: those of the steps that ran, the
// layers when resolved by depth (as many as the most layered acquisition
// has), and the truth when some acquisition holds one.
func (t *Table) columns() []column {
	s := &t.Info.Settings
	cols := []column{{"status", func(r *Row) string { return r.Status }}}
	if s.Has(StepSpeed) {
		cols = append(cols,
			text("method", func(x *Result) string { return x.Method }),
			num("speed_mps", 3, res(func(x *Result) jsonx.Float { return x.SpeedMPS })),
			num("ci95_lo_mps", 3, res(func(x *Result) jsonx.Float { return x.CI95LoMPS })),
			num("ci95_hi_mps", 3, res(func(x *Result) jsonx.Float { return x.CI95HiMPS })),
			text("confidence", func(x *Result) string { return x.Confidence }),
			text("aberration_compensated", func(x *Result) string {
				if x.Method != MethodSweep {
					return ""
				}
				return strconv.FormatBool(x.AberrationCompensated)
			}),
			column{"outlier", func(r *Row) string { return r.Outlier }},
		)
		if s.ByDepth {
			cols = append(cols, text("depth_confidence", func(x *Result) string { return x.DepthConfidence }))
			n := 0
			for i := range t.Rows {
				if r := t.Rows[i].Result; r != nil {
					n = max(n, len(r.Layers))
				}
			}
			for k := range n {
				layer := func(f func(Layer) jsonx.Float) func(*Row) float64 {
					return func(r *Row) float64 {
						if r.Result == nil || k >= len(r.Result.Layers) {
							return math.NaN()
						}
						return float64(f(r.Result.Layers[k]))
					}
				}
				p := fmt.Sprintf("layer_%d_", k+1)
				cols = append(cols,
					num(p+"top_mm", 3, layer(func(l Layer) jsonx.Float { return l.TopMM })),
					num(p+"bottom_mm", 3, layer(func(l Layer) jsonx.Float { return l.BottomMM })),
					num(p+"speed_mps", 3, layer(func(l Layer) jsonx.Float { return l.SpeedMPS })))
			}
		}
	}
	if s.Has(StepAberration) {
		cols = append(cols,
			num("profile_speed_mps", 3, res(func(x *Result) jsonx.Float { return x.ProfileSpeedMPS })),
			column{"profile_rms_s", func(r *Row) string { return sig(res(func(x *Result) jsonx.Float { return x.ProfileRMSS })(r)) }},
			num("coherence_before", 4, res(func(x *Result) jsonx.Float { return x.CoherenceBefore })),
			num("coherence_after", 4, res(func(x *Result) jsonx.Float { return x.CoherenceAfter })))
	}
	if s.Has(StepCorrect) {
		cols = append(cols,
			num("corrected_speed_mps", 3, res(func(x *Result) jsonx.Float { return x.CorrectedSpeedMPS })),
			column{"corrected_profile_rms_s", func(r *Row) string {
				return sig(res(func(x *Result) jsonx.Float { return x.CorrectedProfileRMSS })(r))
			}},
			num("lateral_width_before_mm", 4, res(func(x *Result) jsonx.Float { return x.LateralBeforeMM })),
			num("lateral_width_after_mm", 4, res(func(x *Result) jsonx.Float { return x.LateralAfterMM })),
			num("lateral_width_gain_pct", 2, res(func(x *Result) jsonx.Float { return jsonx.Float(x.LateralGainPct()) })),
			num("gcnr_before", 4, res(func(x *Result) jsonx.Float { return x.GCNRBefore })),
			num("gcnr_after", 4, res(func(x *Result) jsonx.Float { return x.GCNRAfter })),
			num("gcnr_gain", 4, res(func(x *Result) jsonx.Float { return x.GCNRAfter - x.GCNRBefore })),
			num("contrast_before_db", 3, res(func(x *Result) jsonx.Float { return x.ContrastBeforeDB })),
			num("contrast_after_db", 3, res(func(x *Result) jsonx.Float { return x.ContrastAfterDB })))
	}
	if t.hasTruth() {
		cols = append(cols,
			num("true_speed_mps", 3, res(func(x *Result) jsonx.Float { return x.TrueSpeedMPS })),
			num("speed_error_mps", 3, res(func(x *Result) jsonx.Float { return x.SpeedMPS - x.TrueSpeedMPS })))
	}
	return append(cols, column{"error", func(r *Row) string { return r.Error }})
}

// LateralGainPct is the narrowing of the point targets' lateral width by
// the correction, 100 (before - after) / before; NaN without targets.
func (r *Result) LateralGainPct() float64 {
	b, a := float64(r.LateralBeforeMM), float64(r.LateralAfterMM)
	if !finite(b) || !finite(a) || b <= 0 {
		return math.NaN()
	}
	return 100 * (b - a) / b
}

func (t *Table) hasTruth() bool {
	for i := range t.Rows {
		if r := t.Rows[i].Result; r != nil && finite(float64(r.TrueSpeedMPS)) {
			return true
		}
	}
	return false
}

// WriteCSV writes cohort.csv: one row per acquisition in ID order: the id,
// the metadata columns, then the result columns of the steps that ran
// (speeds with 3 decimals in m/s, profile rms in s with 4 significant
// digits), and the error of a failed row. It holds no runtimes, so the same
// acquisitions and settings give the same bytes.
func WriteCSV(w io.Writer, t *Table) error {
	cw := csv.NewWriter(w)
	cols := t.columns()
	head := append([]string{"id"}, t.Info.Columns...)
	for _, c := range cols {
		head = append(head, c.name)
	}
	if err := cw.Write(head); err != nil {
		return err
	}
	for i := range t.Rows {
		r := &t.Rows[i]
		rec := append([]string{r.Member.ID}, r.Member.Meta...)
		for _, c := range cols {
			rec = append(rec, c.cell(r))
		}
		if err := cw.Write(rec); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}

// WriteTimingCSV writes timing.csv: id, status and the wall time of each
// finished acquisition's job, s (the runtimes, kept apart from the table).
func WriteTimingCSV(w io.Writer, t *Table) error {
	cw := csv.NewWriter(w)
	if err := cw.Write([]string{"id", "status", "runtime_s"}); err != nil {
		return err
	}
	for i := range t.Rows {
		r := &t.Rows[i]
		if r.Status == StatusMissing {
			continue
		}
		if err := cw.Write([]string{r.Member.ID, r.Status, fixed(r.Seconds, 3)}); err != nil {
			return err
		}
	}
	cw.Flush()
	return cw.Error()
}
