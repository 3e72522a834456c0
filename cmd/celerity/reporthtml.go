package main

import (
	"bytes"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"

	"celerity/acq"
	"celerity/correction"
	"celerity/internal/atomicfile"
	"celerity/report"
)

// version names this build in reports.
const version = "celerity (development build)"

// writeReportHTML assembles report.html from the files already written in dir.
func writeReportHTML(dir string, a *acq.Acquisition, src string, ev *correction.Evaluation, oc *correction.Outcome, res *correctOutput) error {
	fig := func(name, caption, alt string) (report.Figure, bool) {
		b, err := os.ReadFile(filepath.Join(dir, name))
		if err != nil {
			return report.Figure{}, false
		}
		return report.Figure{Caption: caption, PNG: b, Alt: alt}, true
	}
	r := report.Report{
		Title:    "Speed of sound and aberration correction",
		Subtitle: src,
		Caution:  Caution,
		Footer:   version,
	}
	r.Summary = append(r.Summary,
		report.KV{Key: "speed of sound", Value: fmt.Sprintf("%.1f m/s", res.SpeedMPS)},
		report.KV{Key: "95 % interval", Value: fmt.Sprintf("%.1f to %.1f m/s", res.CI95[0], res.CI95[1])},
		report.KV{Key: "confidence", Value: res.Confidence},
	)
	if res.ProfileS != nil {
		r.Summary = append(r.Summary, report.KV{Key: "arrival-time error profile", Value: fmt.Sprintf("%.1f ns rms", res.ProfileRMS*1e9)})
	}
	sum := acq.Summarize(a)
	var kinds []string
	for k, n := range sum.Counts {
		kinds = append(kinds, fmt.Sprintf("%d %s", n, k))
	}
	r.Inputs = []report.KV{
		{Key: "acquisition", Value: src},
		{Key: "description", Value: a.Description},
		{Key: "probe", Value: fmt.Sprintf("%s, %d elements, pitch %.3g mm, %.3g MHz", a.Probe.Geometry, a.NumElements(), a.Probe.MeanPitch()*1e3, a.Probe.CenterFrequencyHz/1e6)},
		{Key: "sequence", Value: strings.Join(kinds, ", ")},
		{Key: "channel data", Value: fmt.Sprintf("%s, %d x %d x %d at %.4g MHz", a.Kind, a.NumEvents(), a.NumElements(), a.NumSamples, a.SamplingRateHz/1e6)},
		{Key: "scanner's assumed speed", Value: fmt.Sprintf("%g m/s", a.AssumedSpeedMPS)},
	}
	r.Settings = []report.KV{
		{Key: "speed method", Value: fmt.Sprintf("focus sweep, %s criterion, region %s", oc.Speed.Criterion, oc.Speed.Region)},
		{Key: "uncertainty", Value: "block bootstrap over tiles of the region, with a 0.15 % systematic component"},
		{Key: "rounds", Value: fmt.Sprintf("%d (converged: %v)", len(oc.Rounds), oc.Converged)},
		{Key: "imaging", Value: "delay-and-sum, receive F-number 1.5, Hann window, coherent compounding"},
	}
	if oc.Layers != nil {
		var ls []string
		top := 0.0
		for i, l := range oc.Layers {
			if i < len(oc.Layers)-1 {
				ls = append(ls, fmt.Sprintf("%.1f-%.1f mm at %.1f m/s", top*1e3, (top+l.ThicknessM)*1e3, l.SpeedMPS))
				top += l.ThicknessM
			} else {
				ls = append(ls, fmt.Sprintf("below %.1f mm at %.1f m/s", top*1e3, l.SpeedMPS))
			}
		}
		r.Settings = append(r.Settings, report.KV{Key: "bulk model", Value: "layers resolved by depth (Dix): " + strings.Join(ls, "; ")})
	}
	if oc.Aberration != nil {
		r.Settings = append(r.Settings, report.KV{Key: "aberration method", Value: fmt.Sprintf("%s, %d patches, mean, trend and curvature removed", oc.Aberration.Method, len(oc.Aberration.Patches))})
	}
	// images
	imgs := report.Section{Title: "Images", Paragraphs: []string{
		"The same dB range and millimetre axes in every panel. Before: the scanner's assumed speed without correction. After: the estimated speed with the estimated profile. Ideal, when the acquisition holds ground truth: the true medium and screen.",
	}}
	if f, ok := fig("compare.png", "B-mode images before and after correction", "side-by-side B-mode images"); ok {
		imgs.Figures = append(imgs.Figures, f)
	}
	if f, ok := fig("lateral.png", "Lateral profiles through the point targets", "lateral envelope profiles"); ok {
		imgs.Figures = append(imgs.Figures, f)
	}
	r.Sections = append(r.Sections, imgs)
	// metrics table
	mt := report.Table{Caption: "Image metrics", Header: []string{"metric", "before", "after"}}
	if res.Ideal != nil {
		mt.Header = append(mt.Header, "ideal")
	}
	for _, k := range sortedKeys(res.After) {
		row := []string{k, fmt.Sprintf("%.4g", res.Before[k]), fmt.Sprintf("%.4g", res.After[k])}
		if res.Ideal != nil {
			row = append(row, fmt.Sprintf("%.4g", res.Ideal[k]))
		}
		mt.Rows = append(mt.Rows, row)
	}
	mt.Notes = []string{"Widths are -6 dB full widths of the envelope through each target's peak, averaged over the targets; contrast, CNR, gCNR and speckle SNR are measured on the envelope inside and around each region."}
	ms := report.Section{Title: "Metrics", Tables: []report.Table{mt}}
	if len(res.Recovered) > 0 {
		rt := report.Table{Caption: "Share of each loss recovered by the correction", Header: []string{"quantity", "recovered"}}
		for _, k := range sortedKeys(res.Recovered) {
			rt.Rows = append(rt.Rows, []string{k, fmt.Sprintf("%.0f %%", 100*res.Recovered[k])})
		}
		ms.Tables = append(ms.Tables, rt)
	}
	if len(res.Truth) > 0 {
		tt := report.Table{Caption: "Estimates against ground truth", Header: []string{"quantity", "value"}}
		for _, k := range sortedKeys(res.Truth) {
			tt.Rows = append(tt.Rows, []string{k, fmt.Sprintf("%.4g", res.Truth[k])})
		}
		ms.Tables = append(ms.Tables, tt)
	}
	r.Sections = append(r.Sections, ms)
	// speed
	ss := report.Section{Title: "Speed of sound"}
	rt := report.Table{Caption: "Rounds of the speed / profile alternation", Header: []string{"round", "speed (m/s)", "95 % interval (m/s)", "confidence", "profile rms (ns)", "profile change (ns)"}}
	for i, rd := range res.Rounds {
		rt.Rows = append(rt.Rows, []string{fmt.Sprint(i + 1), fmt.Sprintf("%.1f", rd.SpeedMPS), fmt.Sprintf("%.1f to %.1f", rd.CI95MPS[0], rd.CI95MPS[1]), rd.Confidence, fmt.Sprintf("%.1f", rd.ProfileRMSS*1e9), fmt.Sprintf("%.1f", rd.ProfileChangeS*1e9)})
	}
	ss.Tables = append(ss.Tables, rt)
	if f, ok := fig("criterion.png", "Focus criterion against the assumed speed (last round), with the estimate and its 95 % interval", "criterion curve"); ok {
		ss.Figures = append(ss.Figures, f)
	}
	r.Sections = append(r.Sections, ss)
	if oc.Aberration != nil {
		as := report.Section{Title: "Arrival-time error profile", Paragraphs: []string{
			fmt.Sprintf("Coherence of the patches before and after: lag-one %.3f to %.3f, coherence factor %.3f to %.3f. Patch disagreement %.0f %% of the profile rms.",
				oc.Aberration.Before.LagOneCoherence, oc.Aberration.After.LagOneCoherence, oc.Aberration.Before.CoherenceFactor, oc.Aberration.After.CoherenceFactor, 100*oc.Aberration.Disagreement),
		}}
		if f, ok := fig("profile.png", "Per-element arrival-time error (mean, trend and curvature removed), with the truth when known", "profile against element position"); ok {
			as.Figures = append(as.Figures, f)
		}
		r.Sections = append(r.Sections, as)
	}
	if len(res.Notes) > 0 {
		r.Sections = append(r.Sections, report.Section{Title: "Notes", Paragraphs: res.Notes})
	}
	var buf bytes.Buffer
	if err := report.HTML(&buf, r); err != nil {
		return err
	}
	return atomicfile.Write(filepath.Join(dir, "report.html"), true, func(w io.Writer) error {
		_, err := w.Write(buf.Bytes())
		return err
	})
}
