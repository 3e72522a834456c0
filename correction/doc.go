// Package correction ties the estimators together: it finds the bulk speed
// of sound and the per-element arrival-time error profile of an acquisition
// by alternating the two (each biases the other: a phase screen pulls a
// focus-based speed estimate, and a wrong speed distorts the profile), forms
// images with the delay models before and after correction, and measures
// them. It computes; it writes no files.
//
// Units are SI (m, s, m/s).
//
// References: see the speed, aberration and metrics packages.
package correction
