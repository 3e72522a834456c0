//go:build amd64 && !purego

package recon

import "golang.org/x/sys/cpu"

// haveVector says whether linearVector may run: it needs AVX2 (for the
// gathers). Tests switch it off to compare with the scalar loop.
var haveVector = cpu.X86.HasAVX2

// linearVector is the body of kernelLinear for n pixels (n a multiple of 4)
// in AVX2, four pixels per step: the two samples around each delay are
// gathered, the lanes outside [0, lim) masked off, and the arithmetic done
// in the scalar loop's order without fused multiply-adds, so the sums are
// the same bit for bit (kernel_amd64.s).
//
//go:noescape
func linearVector(acc, row *complex64, tx, rx *float32, w *complex64, n int, lim float32)
