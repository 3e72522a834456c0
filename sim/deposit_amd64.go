//go:build amd64 && !purego

package sim

import "golang.org/x/sys/cpu"

// haveVector says whether depositVector may run (AVX2). Tests switch it off
// to compare with the scalar loop.
var haveVector = cpu.X86.HasAVX2

// depositVector is depositFast for n impulses (n a multiple of 4) in AVX2:
// the times, weights and phasors of four impulses at a time, then their
// two-bin deposits one after the other in order, with the scalar loop's
// arithmetic and no fused multiply-adds, so the records are the same bit
// for bit (deposit_amd64.s).
//
//go:noescape
func depositVector(row *complex64, gT *float32, gA *complex64, n int, base float32, pj complex64)
