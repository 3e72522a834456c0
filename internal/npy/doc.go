// Package npy reads and writes NumPy .npy arrays (format versions 1.0, 2.0 and
// 3.0) strictly: little-endian float32, float64, complex64 and complex128 in C
// order only, with the header validated against the file size and a memory cap
// before any array is allocated.
//
// It exists because the acquisition folder must reject malformed, truncated or
// oversized arrays with a clear error instead of panicking or reading garbage.
//
// References:
//   - NumPy Enhancement Proposal 1 (NEP 1), "A simple file format for NumPy
//     arrays", and numpy.lib.format documentation.
package npy
