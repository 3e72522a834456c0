//go:build amd64 && !purego

#include "textflag.h"

// func depositVector(row *complex64, gT *float32, gA *complex64, n int, base float32, pj complex64)
//
// For g = 0..n-1 (n a multiple of 4), with t = gT[g] + base, k = int(t),
// f = t - float32(k) and v = gA[g] * pj:
//   row[k] += v - f v;  row[k+1] += f v
// in order of g. Every k and k+1 must lie inside the row (the caller checks).
TEXT ·depositVector(SB), NOSPLIT, $0-44
	MOVQ row+0(FP), DI
	MOVQ gT+8(FP), SI
	MOVQ gA+16(FP), R8
	MOVQ n+24(FP), CX
	VBROADCASTSS base+32(FP), X15
	VBROADCASTSS pj_real+36(FP), Y14
	VBROADCASTSS pj_imag+40(FP), Y13
	XORQ AX, AX

loop:
	CMPQ AX, CX
	JGE  done
	VMOVUPS (SI)(AX*4), X0
	VADDPS  X15, X0, X0             // t = T + base
	VCVTTPS2DQ X0, X1               // k
	VCVTDQ2PS  X1, X2
	VSUBPS  X2, X0, X3              // f = t - float32(k)
	VMOVUPS (R8)(AX*8), Y4          // a0..a3
	VMULPS  Y14, Y4, Y5             // ar pr, ai pr
	VSHUFPS $0xb1, Y4, Y4, Y6       // ai, ar
	VMULPS  Y13, Y6, Y6             // ai pi, ar pi
	VADDSUBPS Y6, Y5, Y5            // v = (ar pr - ai pi, ai pr + ar pi)
	VUNPCKLPS X3, X3, X7            // f0 f0 f1 f1
	VUNPCKHPS X3, X3, X8            // f2 f2 f3 f3
	VINSERTF128 $1, X8, Y7, Y7
	VMULPS  Y7, Y5, Y8              // f v
	VSUBPS  Y8, Y5, Y9              // v - f v
	VUNPCKLPD Y8, Y9, Y10           // lane 0: (v - f v, f v) of impulse 0; lane 1: of impulse 2
	VUNPCKHPD Y8, Y9, Y11           // impulses 1 and 3

	VMOVD   X1, R9
	VMOVUPS (DI)(R9*8), X12
	VADDPS  X10, X12, X12
	VMOVUPS X12, (DI)(R9*8)

	VPEXTRD $1, X1, R9
	VMOVUPS (DI)(R9*8), X12
	VADDPS  X11, X12, X12
	VMOVUPS X12, (DI)(R9*8)

	VEXTRACTF128 $1, Y10, X10
	VPEXTRD $2, X1, R9
	VMOVUPS (DI)(R9*8), X12
	VADDPS  X10, X12, X12
	VMOVUPS X12, (DI)(R9*8)

	VEXTRACTF128 $1, Y11, X11
	VPEXTRD $3, X1, R9
	VMOVUPS (DI)(R9*8), X12
	VADDPS  X11, X12, X12
	VMOVUPS X12, (DI)(R9*8)

	ADDQ    $4, AX
	JMP     loop

done:
	VZEROUPPER
	RET
