// Package acq holds an ultrasound acquisition: probe geometry, transmit events
// (what the scanner fired), sampling and the per-element channel data, and
// reads and writes it as the acquisition folder of docs/format.md.
//
// Units are SI throughout (m, s, Hz, m/s). Coordinates: x lateral (positive
// towards the last element), z depth (positive into the medium), origin at the
// centre of the array face. Time t = 0 is each event's time reference; firing
// delays are relative to it and sample 0 is recorded at StartTimeS.
//
// Everything read from disk is validated before any large allocation: missing
// or unknown keys, wrong format versions, shape disagreements, non-finite
// values, non-positive rates, truncated or non-little-endian arrays and sizes
// over a memory cap are errors that name the file and the field.
//
// References:
//   - Montaldo G, Tanter M, Bercoff J, Benech N, Fink M. Coherent plane-wave
//     compounding for very high frame rate ultrasonography and transient
//     elastography. IEEE TUFFC 56(3), 2009 (plane-wave firing delays).
//   - NumPy .npy format, NEP 1.
package acq
