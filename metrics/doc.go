// Package metrics measures image quality and estimate-versus-truth errors for
// celerity: point-target position and -6 dB widths, contrast, CNR, gCNR and
// speckle SNR over regions, channel coherence (coherence factor, spatial and
// lag-one coherence), and the errors of speed and arrival-time profile
// estimates against a known truth. It computes numbers only; it neither draws
// nor writes files (package report does).
//
// Units: SI inside (positions, widths and radii in m, arrival times in s,
// speeds in m/s). Fields hold linear envelope amplitude, never dB. Contrast
// is returned in dB where the name says so (ContrastDB); CNR, gCNR, speckle
// SNR and coherence are dimensionless. Region flag strings (ParseRegion) and
// region files (LoadRegions) take mm, as people type them, and are converted
// to m on reading.
//
// "-6 dB" widths are full widths at half the peak amplitude, that is at
// 20 log10(1/2) = -6.02 dB.
//
// References:
//   - Rodriguez-Molares A, Rindal OMH, D'hooge J, Masoy SE, Austeng A,
//     Lediju Bell MA, Torp H. The generalized contrast-to-noise ratio: a formal
//     definition for lesion detectability. IEEE TUFFC 67(4), 2020 (gCNR =
//     1 - OVL).
//   - Burckhardt CB. Speckle in ultrasound B-mode scans. IEEE Trans. Sonics
//     Ultrason. 25(1), 1978; Wagner RF, Smith SW, Sandrik JM, Lopez H.
//     Statistics of speckle in ultrasound B-scans. IEEE Trans. Sonics Ultrason.
//     30(3), 1983 (speckle SNR sqrt(pi/(4-pi)) = 1.91).
//   - Mallart R, Fink M. Adaptive focusing in scattering media through
//     sound-speed inhomogeneities: the van Cittert Zernike approach and focusing
//     criterion. JASA 96(6), 1994 (coherence factor); Mallart R, Fink M. The
//     van Cittert-Zernike theorem in pulse echo measurements. JASA 90(5), 1991.
//   - Long W, Bottenus N, Trahey GE. Lag-one coherence as a metric for
//     ultrasonic image quality. IEEE TUFFC 65(10), 2018 (lag-one coherence).
//
// Citation details are given as remembered (see the project's CHECKS.md).
package metrics
