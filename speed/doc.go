// Package speed estimates the speed of sound of a medium from one
// acquisition, with an uncertainty: by sweeping the assumed speed and
// maximising a focus-quality criterion of the aperture-domain data, resolved
// by depth into interval (layer) speeds, and by fitting the arrival-time
// curves of bright point targets. It computes; it writes no files.
//
// Units are SI (m, s, m/s); speeds are reported in m/s.
//
// Physics. A beamformer that assumes the wrong speed misaligns the echoes
// across the aperture: the coherence of the delayed channel signals, the
// coherence factor and the brightness of speckle all peak at the true
// (average) speed. Changing the assumed speed moves echoes in depth, so the
// region of interest follows the echoes: its pixels sit at fixed echo times
// (z scaled by c / c_ref), and each speed is judged on the same data. The
// transmit wavefront is derived from the firing delays for each speed. Diffuse
// echoes from a single unfocused plane wave are nearly incoherent across the
// receive aperture (van Cittert-Zernike: the coherence length is set by the
// width of the insonified region), so receive-only criteria carry little
// information there; transmit focusing synthesised by compounding steered
// plane waves or by synthetic aperture restores it. On compounded plane
// waves the receive-element criteria still lean towards high speeds, the
// more so near the array, because the partial coherence of diffuse echoes
// across the receive elements depends on the receive geometry; the coherence
// of the separate events' images (TransmitCoherence, the default there) does
// not.
//
// References:
//   - Mallart R, Fink M. Adaptive focusing in scattering media through
//     sound-speed inhomogeneities: the van Cittert Zernike approach and focusing
//     criterion. JASA 96(6), 1994 (coherence factor).
//   - Lediju MA, Trahey GE, Byram BC, Dahl JJ. Short-lag spatial coherence of
//     backscattered echoes. IEEE TUFFC 58(7), 2011.
//   - Long W, Bottenus N, Trahey GE. Lag-one coherence as a metric for
//     ultrasonic image quality. IEEE TUFFC 65(10), 2018.
//   - Nock L, Trahey GE, Smith SW. Phase aberration correction in medical
//     ultrasound using speckle brightness as a quality factor. JASA 85(5), 1989.
//   - Anderson ME, Trahey GE. The direct estimation of sound speed using
//     pulse-echo ultrasound. JASA 104(5), 1998 (point-target arrival times).
//   - Dix CH. Seismic velocities from surface measurements. Geophysics 20(1),
//     1955 (interval speeds from average speeds).
//   - Efron B, Tibshirani RJ. An Introduction to the Bootstrap. 1993 (block
//     bootstrap intervals).
//   - Marczak W. Water as a standard in the measurements of speed of sound in
//     liquids. JASA 102(5), 1997 (see speed/refspeed).
package speed
