package main

import (
	"fmt"
	"math"
	"sort"
	"strings"

	"celerity/acq"
)

// InspectCmd describes an acquisition folder.
type InspectCmd struct {
	Dir  string `arg:"" help:"Acquisition folder." type:"existingdir" placeholder:"DIR"`
	JSON bool   `name:"json" help:"Print the description as JSON on stdout."`
}

// Help is the long help.
func (c *InspectCmd) Help() string {
	return `Reads and validates the folder, then prints the probe, the transmit sequence as inferred from
the firing delays (plane-wave angles, virtual sources, single elements), the array sizes, the
recorded duration and the depth range it spans at the scanner's assumed speed, and the ground
truth when the folder holds one.`
}

type inspectProbe struct {
	Geometry            string  `json:"geometry"`
	Elements            int     `json:"elements"`
	PitchMM             float64 `json:"pitch_mm"`
	ApertureMM          float64 `json:"aperture_mm"`
	RadiusMM            float64 `json:"radius_mm,omitempty"`
	CenterFrequencyMHz  float64 `json:"center_frequency_mhz"`
	FractionalBandwidth float64 `json:"fractional_bandwidth,omitempty"`
	ElementWidthMM      float64 `json:"element_width_mm,omitempty"`
}

type inspectSequence struct {
	Events         int            `json:"events"`
	Kinds          map[string]int `json:"kinds"`
	AnglesDeg      []float64      `json:"plane_wave_angles_deg,omitempty"`
	VirtualSources [][2]float64   `json:"virtual_sources_mm,omitempty"`
}

type inspectTruth struct {
	SpeedMPS      float64      `json:"speed_mps,omitempty"`
	Layers        []inspLayer  `json:"layers,omitempty"`
	ScreenRMSNS   *float64     `json:"screen_rms_ns,omitempty"`
	ScreenCorrMM  *float64     `json:"screen_correlation_length_mm,omitempty"`
	TargetsMM     [][2]float64 `json:"targets_mm,omitempty"`
	Inclusions    int          `json:"inclusions,omitempty"`
	NoiseSNRDB    *float64     `json:"noise_snr_db,omitempty"`
	Seed          uint64       `json:"seed"`
	AttenuationDB float64      `json:"attenuation_db_cm_mhz,omitempty"`
}

type inspLayer struct {
	TopMM    float64 `json:"top_mm"`
	BottomMM float64 `json:"bottom_mm,omitempty"`
	SpeedMPS float64 `json:"speed_mps"`
}

type inspectResult struct {
	Dir              string          `json:"dir"`
	Description      string          `json:"description,omitempty"`
	Probe            inspectProbe    `json:"probe"`
	Sequence         inspectSequence `json:"sequence"`
	Kind             string          `json:"kind"`
	DemodulationMHz  float64         `json:"demodulation_frequency_mhz,omitempty"`
	Shape            [3]int          `json:"shape"`
	SamplingRateMHz  float64         `json:"sampling_rate_mhz"`
	StartTimeUS      float64         `json:"start_time_us"`
	DurationUS       float64         `json:"duration_us"`
	AssumedSpeedMPS  float64         `json:"assumed_speed_mps"`
	DepthRangeMM     [2]float64      `json:"depth_range_mm"`
	ChannelDataBytes int64           `json:"channel_data_bytes"`
	Truth            *inspectTruth   `json:"truth,omitempty"`
}

// Run runs the command.
func (c *InspectCmd) Run(g *Globals) error {
	a, err := acq.Load(c.Dir)
	if err != nil {
		return err
	}
	t, err := acq.LoadTruth(c.Dir)
	if err != nil {
		return err
	}
	r := describe(c.Dir, a, t)
	if c.JSON {
		return printJSON(g.stdout, r)
	}
	fmt.Fprint(g.stdout, r.text())
	return nil
}

func round(v float64, d int) float64 {
	p := math.Pow(10, float64(d))
	return math.Round(v*p) / p
}

func describe(dir string, a *acq.Acquisition, t *acq.Truth) inspectResult {
	p := &a.Probe
	r := inspectResult{Dir: dir, Description: a.Description, Kind: a.Kind.String(), Shape: a.Shape(),
		SamplingRateMHz: a.SamplingRateHz / 1e6, StartTimeUS: a.StartTimeS * 1e6,
		DurationUS: round(a.Duration()*1e6, 3), AssumedSpeedMPS: a.AssumedSpeedMPS}
	r.Probe = inspectProbe{Geometry: p.Geometry.String(), Elements: p.NumElements(), PitchMM: round(p.MeanPitch()*1e3, 4),
		ApertureMM: round(p.Aperture()*1e3, 3), RadiusMM: p.RadiusM * 1e3, CenterFrequencyMHz: p.CenterFrequencyHz / 1e6,
		FractionalBandwidth: p.FractionalBandwidth, ElementWidthMM: p.ElementWidthM * 1e3}
	if a.Kind == acq.IQ {
		r.DemodulationMHz = a.DemodulationHz / 1e6
	}
	sum := acq.Summarize(a)
	r.Sequence = inspectSequence{Events: a.NumEvents(), Kinds: map[string]int{}}
	for k, n := range sum.Counts {
		r.Sequence.Kinds[strings.ReplaceAll(k.String(), " ", "_")] = n
	}
	for _, ang := range sum.AnglesDeg {
		r.Sequence.AnglesDeg = append(r.Sequence.AnglesDeg, round(ang, 3))
	}
	for _, s := range sum.Sources {
		r.Sequence.VirtualSources = append(r.Sequence.VirtualSources, [2]float64{round(s[0]*1e3, 3), round(s[1]*1e3, 3)})
	}
	// Depth range: two-way time at the assumed speed, allowing for the mean firing delay.
	c := a.AssumedSpeedMPS
	t0 := a.StartTimeS
	t1 := a.StartTimeS + a.Duration()
	r.DepthRangeMM = [2]float64{round(math.Max(0, c*t0/2)*1e3, 2), round(math.Max(0, c*t1/2)*1e3, 2)}
	bytesPer := int64(4)
	if a.Kind == acq.IQ {
		bytesPer = 8
	}
	r.ChannelDataBytes = int64(a.NumEvents()) * int64(a.NumElements()) * int64(a.NumSamples) * bytesPer
	if t != nil {
		it := &inspectTruth{SpeedMPS: t.SpeedMPS, TargetsMM: nil, Inclusions: len(t.Inclusions), NoiseSNRDB: t.NoiseSNRDB,
			Seed: t.Seed, AttenuationDB: t.AttenuationDBPerCmMHz}
		top := 0.0
		for i, l := range t.Layers {
			il := inspLayer{TopMM: round(top*1e3, 3), SpeedMPS: l.SpeedMPS}
			if i < len(t.Layers)-1 {
				top += l.ThicknessM
				il.BottomMM = round(top*1e3, 3)
			}
			it.Layers = append(it.Layers, il)
		}
		if t.Screen != nil {
			rms := 0.0
			for _, v := range t.Screen.DelaysS {
				rms += v * v
			}
			rms = math.Sqrt(rms/float64(len(t.Screen.DelaysS))) * 1e9
			rms = round(rms, 3)
			it.ScreenRMSNS = &rms
			if t.Screen.CorrelationLengthM > 0 {
				cl := t.Screen.CorrelationLengthM * 1e3
				it.ScreenCorrMM = &cl
			}
		}
		for _, q := range t.TargetsM {
			it.TargetsMM = append(it.TargetsMM, [2]float64{round(q[0]*1e3, 4), round(q[1]*1e3, 4)})
		}
		r.Truth = it
	}
	return r
}

func (r inspectResult) text() string {
	var b strings.Builder
	fmt.Fprintf(&b, "%s\n", r.Dir)
	if r.Description != "" {
		fmt.Fprintf(&b, "  %s\n", r.Description)
	}
	p := r.Probe
	fmt.Fprintf(&b, "probe      %s, %d elements, pitch %.4g mm, aperture %.4g mm", p.Geometry, p.Elements, p.PitchMM, p.ApertureMM)
	if p.RadiusMM > 0 {
		fmt.Fprintf(&b, ", radius %.4g mm", p.RadiusMM)
	}
	fmt.Fprintf(&b, "\n           %.4g MHz", p.CenterFrequencyMHz)
	if p.FractionalBandwidth > 0 {
		fmt.Fprintf(&b, ", %.0f %% bandwidth", p.FractionalBandwidth*100)
	}
	if p.ElementWidthMM > 0 {
		fmt.Fprintf(&b, ", element width %.4g mm", p.ElementWidthMM)
	}
	b.WriteString("\n")
	var kinds []string
	for k, n := range r.Sequence.Kinds {
		kinds = append(kinds, fmt.Sprintf("%d %s", n, strings.ReplaceAll(k, "_", " ")))
	}
	sort.Strings(kinds)
	fmt.Fprintf(&b, "sequence   %d events: %s\n", r.Sequence.Events, strings.Join(kinds, ", "))
	if len(r.Sequence.AnglesDeg) > 0 {
		fmt.Fprintf(&b, "           plane-wave angles at %g m/s: %s deg\n", r.AssumedSpeedMPS, joinFloats(r.Sequence.AnglesDeg))
	}
	if n := len(r.Sequence.VirtualSources); n > 0 {
		s := r.Sequence.VirtualSources
		fmt.Fprintf(&b, "           virtual sources (mm): (%g, %g)", s[0][0], s[0][1])
		if n > 1 {
			fmt.Fprintf(&b, " ... (%g, %g)", s[n-1][0], s[n-1][1])
		}
		b.WriteString("\n")
	}
	fmt.Fprintf(&b, "data       %s, shape %d x %d x %d (events x elements x samples), %.1f MB\n", r.Kind, r.Shape[0], r.Shape[1], r.Shape[2], float64(r.ChannelDataBytes)/1e6)
	if r.DemodulationMHz > 0 {
		fmt.Fprintf(&b, "           demodulated at %.4g MHz\n", r.DemodulationMHz)
	}
	fmt.Fprintf(&b, "sampling   %.4g MHz from %.4g us, %.4g us recorded\n", r.SamplingRateMHz, r.StartTimeUS, r.DurationUS)
	fmt.Fprintf(&b, "depth      %.1f to %.1f mm at the assumed %g m/s\n", r.DepthRangeMM[0], r.DepthRangeMM[1], r.AssumedSpeedMPS)
	if t := r.Truth; t != nil {
		b.WriteString("truth      ")
		if len(t.Layers) == 0 {
			fmt.Fprintf(&b, "homogeneous %.2f m/s", t.SpeedMPS)
		} else {
			var ls []string
			for _, l := range t.Layers {
				if l.BottomMM > 0 {
					ls = append(ls, fmt.Sprintf("%g m/s to %g mm", l.SpeedMPS, l.BottomMM))
				} else {
					ls = append(ls, fmt.Sprintf("%g m/s below", l.SpeedMPS))
				}
			}
			fmt.Fprintf(&b, "layers %s", strings.Join(ls, ", "))
		}
		fmt.Fprintf(&b, "; seed %d\n", t.Seed)
		if t.ScreenRMSNS != nil {
			fmt.Fprintf(&b, "           phase screen %.3g ns rms", *t.ScreenRMSNS)
			if t.ScreenCorrMM != nil {
				fmt.Fprintf(&b, ", correlation length %.3g mm", *t.ScreenCorrMM)
			}
			b.WriteString("\n")
		}
		if len(t.TargetsMM) > 0 {
			var ps []string
			for _, q := range t.TargetsMM {
				ps = append(ps, fmt.Sprintf("(%g, %g)", q[0], q[1]))
			}
			fmt.Fprintf(&b, "           %d point targets (mm): %s\n", len(ps), strings.Join(ps, " "))
		}
		if t.Inclusions > 0 {
			fmt.Fprintf(&b, "           %d inclusions\n", t.Inclusions)
		}
		if t.NoiseSNRDB != nil {
			fmt.Fprintf(&b, "           channel SNR %g dB\n", *t.NoiseSNRDB)
		}
		if t.AttenuationDB > 0 {
			fmt.Fprintf(&b, "           attenuation %g dB/cm/MHz\n", t.AttenuationDB)
		}
	}
	return b.String()
}

func joinFloats(v []float64) string {
	s := make([]string, len(v))
	for i, x := range v {
		s[i] = fmt.Sprintf("%g", x)
	}
	return strings.Join(s, ", ")
}
