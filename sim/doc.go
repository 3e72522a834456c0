// Package sim simulates pulse-echo acquisitions with known ground truth:
// point targets, diffuse speckle and circular inclusions in a homogeneous or
// horizontally layered medium, behind an optional near-field phase screen,
// with optional frequency-dependent attenuation and white channel noise.
//
// Units are SI (m, s, Hz, m/s); scenario files use mm, MHz, ns and say so.
//
// Physics. Every firing element emits a Gaussian-modulated pulse at its own
// firing delay plus its screen delay; every scatterer re-radiates what reaches
// it; every element records the sum. The echo of scatterer s on element j for
// a transmit event is
//
//	r_j(t) = A_s sum_i w_i g_si g_sj p(t - d_i - phi_i - tau_si - tau_sj - phi_j)
//
// with w_i the transmit weight, d_i the firing delay, phi the screen delay,
// tau the one-way travel time (straight rays in a homogeneous medium, Snell
// rays through flat layers found by a Fermat solve), and g = D(theta)/r the
// element directivity D(theta) = cos(theta) sinc(w sin(theta) / lambda) over
// the path length r. Plane, diverging, focused and synthetic-aperture
// sequences therefore come from the same physics, and the speed the scanner
// assumed when it computed d_i may differ from the medium's.
//
// The travel times here are computed independently of the beamformer's delay
// models, so that a test can catch an error in either.
//
// Fast evaluation. In baseband, every echo is an impulse (carrying its exact
// carrier phase) deposited with linear weights on a time grid with at least
// eight samples per envelope standard deviation, and the grid is filtered
// once with the pulse envelope. Transmit elements whose arrivals at a
// scatterer fall within a tenth of the envelope's standard deviation are
// merged into one impulse (their phases kept exactly, their envelopes
// merged); this is exact for a single element and near a focus, and keeps
// the records within about 0.4 % rms of the exact route below. Sequences of
// several multi-element events are synthesised exactly from the
// single-element records instead (see synth.go). Attenuation is applied as a
// pulse that varies with the arrival time (the pulse of the path length c t),
// exact when all elements fire together and approximate within the span of
// the firing delays.
//
// References:
//   - Burckhardt CB. Speckle in ultrasound B-mode scans. IEEE Trans. Sonics
//     Ultrason. 25(1), 1978 (fully developed speckle, envelope SNR 1.91).
//   - Hinkelman LM, Szabo TL, Waag RC. Measurements of ultrasonic pulse
//     distortion produced by human chest wall. JASA, 1997 (screen statistics).
//   - Kak AC, Dines KA. Signal processing of broadband pulsed ultrasound:
//     measurement of attenuation of soft biological tissues. IEEE TBME, 1978
//     (Gaussian spectrum downshift under linear attenuation).
package sim
