// Package recon forms images from channel data by delay-and-sum for any
// assumed speed of sound and delay model: homogeneous, horizontally layered
// with refraction, or either of these plus per-element arrival-time
// corrections. It also gives the aperture-domain data (the delayed, apodised
// per-element signals before summation) that coherence criteria and
// aberration estimators need.
//
// Units are SI (m, s, Hz, m/s). Images are complex (the analytic signal at
// each pixel) on a rectangular or sector grid; envelopes are linear and
// B-mode images are in dB.
//
// A transmit event is what the scanner did. The wave that its firing delays
// launch depends on the medium, so the beamformer derives it for the speed
// it assumes: a plane wave gets sin(theta) = c * slope of the delays across
// the array; a diverging or focused wave a virtual source fitted by least
// squares at speed c; a single-element event the element itself.
//
// References:
//   - Montaldo G, Tanter M, Bercoff J, Benech N, Fink M. Coherent plane-wave
//     compounding for very high frame rate ultrasonography and transient
//     elastography. IEEE TUFFC 56(3), 2009.
//   - Perrot V, Polichetti M, Varray F, Garcia D. So you think you can DAS?
//     A viewpoint on delay-and-sum beamforming. Ultrasonics 111, 2021
//     (receive F-number and element directivity).
//   - Keys RG. Cubic convolution interpolation for digital image processing.
//     IEEE TASSP 29(6), 1981.
package recon
