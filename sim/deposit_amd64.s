//go:build amd64 && !purego

#include "textflag.h"

// dup: the indices that repeat each of four floats twice
DATA dup<>+0(SB)/4, $0
DATA dup<>+4(SB)/4, $0
DATA dup<>+8(SB)/4, $1
DATA dup<>+12(SB)/4, $1
DATA dup<>+16(SB)/4, $2
DATA dup<>+20(SB)/4, $2
DATA dup<>+24(SB)/4, $3
DATA dup<>+28(SB)/4, $3
GLOBL dup<>(SB), RODATA|NOPTR, $32

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
	VMOVDQU dup<>(SB), Y2
	XORQ AX, AX
	CMPQ CX, $0
	JLE  done

loop:
	VMOVUPS (SI)(AX*4), X0
	VADDPS  X15, X0, X0             // t = T + base
	VCVTTPS2DQ X0, X1               // k
	VCVTDQ2PS  X1, X12
	VSUBPS  X12, X0, X3             // f = t - float32(k)
	VMOVUPS (R8)(AX*8), Y4          // a0..a3
	VMULPS  Y14, Y4, Y5             // ar pr, ai pr
	VSHUFPS $0xb1, Y4, Y4, Y6       // ai, ar
	VMULPS  Y13, Y6, Y6             // ai pi, ar pi
	VADDSUBPS Y6, Y5, Y5            // v = (ar pr - ai pi, ai pr + ar pi)
	VPERMPS Y3, Y2, Y7              // f0 f0 f1 f1 f2 f2 f3 f3
	VMULPS  Y7, Y5, Y8              // f v
	VSUBPS  Y8, Y5, Y9              // v - f v
	VUNPCKLPD Y8, Y9, Y10           // lane 0: (v - f v, f v) of impulse 0; lane 1: of impulse 2
	VUNPCKHPD Y8, Y9, Y11           // impulses 1 and 3
	VMOVQ   X1, R9                  // the four bins k (>= 0) into R9..R12
	VPEXTRQ $1, X1, R11
	MOVQ    R9, R10
	SHRQ    $32, R10
	MOVL    R9, R9
	MOVQ    R11, R12
	MOVL    R11, R11
	SHRQ    $32, R12

	VMOVUPS (DI)(R9*8), X12
	VADDPS  X10, X12, X12
	VMOVUPS X12, (DI)(R9*8)

	VMOVUPS (DI)(R10*8), X12
	VADDPS  X11, X12, X12
	VMOVUPS X12, (DI)(R10*8)

	VEXTRACTF128 $1, Y10, X10
	VMOVUPS (DI)(R11*8), X12
	VADDPS  X10, X12, X12
	VMOVUPS X12, (DI)(R11*8)

	VEXTRACTF128 $1, Y11, X11
	VMOVUPS (DI)(R12*8), X12
	VADDPS  X11, X12, X12
	VMOVUPS X12, (DI)(R12*8)

	ADDQ    $4, AX
	CMPQ    AX, CX
	JLT     loop

done:
	VZEROUPPER
	RET
