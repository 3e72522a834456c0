// Package aberration estimates near-field arrival-time error profiles: what
// is left, element by element, of the focusing error once the bulk speed of
// sound is known. A thin aberrating layer at the array (fat, muscle, the
// chest or abdominal wall) delays every path that leaves or enters an
// element by that element's error; the profile is the estimate of those
// errors, which a beamformer adds back (recon.Corrected) to restore the
// focus. It computes; it writes no files.
//
// Units are SI (s, m). Profiles are one value per element, in seconds, with
// the sign convention of the acquisition folder: positive delays the echo.
// The mean and the linear trend of a profile are not focusing errors (a time
// shift and a steering of the beam); they are removed and reported apart.
//
// Method. The aperture-domain data of a patch (the delayed, phase-aligned
// signals of every element before summation, compounded over events) carry
// each element's residual delay as a phase rotation at the echoes' centre
// frequency. The correlation of elements j and j+m over the patch's pixels
// has phase w_c (phi_(j+m) - phi_j). The nearest-neighbour estimate (Flax &
// O'Donnell 1988) integrates the lag-one differences across the array; the
// many-pairs estimate (Liu & Waag 1994) solves the weighted least-squares
// system of all differences up to a maximum lag, each weighted by its
// correlation coefficient, which does not accumulate neighbour errors as a
// random walk. The beamsum estimate (the default) takes each element's phase
// against the beamformed sum of the other elements at the same pixels. All
// iterate: correct, re-form, re-estimate the residual, keeping a step only
// if it raises the coherence factor of the patches (halving it otherwise).
// The beamsum reference is formed with the current profile, so a smooth
// error that merely moves the focus looks coherent to it, and its first step
// wraps where errors exceed half a period; the pairs compare elements
// directly but are noisy where neighbours correlate weakly (sparse
// plane-wave compounding leaves grating-lobe echoes that lower the lag-one
// coherence to about 0.1 even in clean speckle). So each beamsum round also
// tries the pairs step (lag one in the first round) and keeps whichever
// focuses the patches better; from the second round its own candidate is the
// mean of the two steps, whose noise is partly independent. After each
// accepted round, jumps of more than half a period between neighbouring
// elements are removed (a steering taken modulo a period focuses the centre
// frequency as well as none; a body-wall screen changes far less than that
// from one element to the next). Behind compounded plane or diverging waves the
// neighbour and pairs correlations are taken between sums of a few adjacent
// elements (Config.SubAperture, subaperture.go): a spatial low-pass across
// the aperture that keeps the main lobe's echoes, coherent over millimetres
// (van Cittert-Zernike), and cancels the grating lobes' clutter, whose phase
// alternates from one element to the next.
//
// The mean and the linear trend of a step are removed before it is taken:
// the data do not determine them, and they would otherwise wander with the
// noise. The pixels of the patches are half a wavelength apart, or further
// apart where a long sequence would make one pass over them cost more than
// about 1e7 pixel-element-event products. A patch whose coherent gain (the
// power of the sum over the summed power) is below 2, twice that of noise,
// is rejected and left out of the disagreement between patches.
//
// References:
//   - Flax SW, O'Donnell M. Phase-aberration correction using signals from
//     point reflectors and diffuse scatterers: basic principles. IEEE TUFFC
//     35(6), 1988.
//   - Liu DL, Waag RC. Time-shift compensation of ultrasonic pulse focus
//     degradation using least-mean-square error estimates of arrival time.
//     JASA 95(1), 1994.
//   - Mallart R, Fink M. The van Cittert-Zernike theorem in pulse echo
//     measurements. JASA 90(5), 1991 (coherence of diffuse echoes).
//   - Long W, Bottenus N, Trahey GE. Lag-one coherence as a metric for
//     ultrasonic image quality. IEEE TUFFC 65(10), 2018.
package aberration
