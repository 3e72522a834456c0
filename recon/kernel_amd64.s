//go:build amd64 && !purego

#include "textflag.h"

// func linearVector(acc, row *complex64, tx, rx *float32, w *complex64, n int, lim float32)
//
// For k = 0..n-1 (n a multiple of 4), with s = tx[k] + rx[k]:
//   if 0 <= s < lim: i = int(s), f = s - float32(i),
//                    acc[k] += w[k] * (row[i] + f*(row[i+1] - row[i]))
// Lanes outside [0, lim) (and NaN) gather nothing and add zero.
TEXT ·linearVector(SB), NOSPLIT, $0-52
	MOVQ acc+0(FP), DI
	MOVQ row+8(FP), SI
	MOVQ tx+16(FP), R8
	MOVQ rx+24(FP), R9
	MOVQ w+32(FP), R10
	MOVQ n+40(FP), CX
	VBROADCASTSS lim+48(FP), X15
	VXORPS X14, X14, X14
	XORQ AX, AX
	MOVQ CX, DX
	ANDQ $-8, DX                    // pixels done eight at a time
	VBROADCASTSS lim+48(FP), Y15
	VXORPS Y14, Y14, Y14

loop8:
	CMPQ AX, DX
	JGE  loop
	VMOVUPS (R8)(AX*4), Y0
	VADDPS  (R9)(AX*4), Y0, Y0      // s = tx + rx
	VCMPPS  $0x1d, Y14, Y0, Y1      // s >= 0
	VCMPPS  $0x11, Y15, Y0, Y2      // s < lim
	VANDPS  Y2, Y1, Y1
	VCVTTPS2DQ Y0, Y3               // i
	VCVTDQ2PS  Y3, Y4
	VSUBPS  Y4, Y0, Y4              // f
	VANDPS  Y1, Y4, Y4              // 0 in masked lanes (NaN and Inf delays)
	VEXTRACTF128 $1, Y3, X10        // i4..i7
	VEXTRACTF128 $1, Y1, X11        // mask4..7
	VPMOVSXDQ X1, Y5
	VMOVDQU Y5, Y6
	VPMOVSXDQ X11, Y11
	VMOVDQU Y11, Y12
	VPXOR   Y7, Y7, Y7
	VPXOR   Y8, Y8, Y8
	VPXOR   Y9, Y9, Y9
	VPXOR   Y13, Y13, Y13
	VPGATHERDQ Y5, (SI)(X3*8), Y7    // a0..3
	VPGATHERDQ Y6, 8(SI)(X3*8), Y8   // b0..3
	VPGATHERDQ Y11, (SI)(X10*8), Y9  // a4..7
	VPGATHERDQ Y12, 8(SI)(X10*8), Y13 // b4..7
	VUNPCKLPS Y4, Y4, Y1            // f0 f0 f1 f1 | f4 f4 f5 f5
	VUNPCKHPS Y4, Y4, Y2            // f2 f2 f3 f3 | f6 f6 f7 f7
	VPERM2F128 $0x20, Y2, Y1, Y3    // f0 f0 f1 f1 f2 f2 f3 f3
	VPERM2F128 $0x31, Y2, Y1, Y4    // f4 f4 f5 f5 f6 f6 f7 f7
	VSUBPS  Y7, Y8, Y8
	VMULPS  Y3, Y8, Y8
	VADDPS  Y8, Y7, Y7              // v0..3
	VSUBPS  Y9, Y13, Y13
	VMULPS  Y4, Y13, Y13
	VADDPS  Y13, Y9, Y9             // v4..7
	VMOVUPS (R10)(AX*8), Y0         // w0..3
	VMOVSLDUP Y0, Y1
	VMOVSHDUP Y0, Y2
	VMULPS  Y1, Y7, Y1
	VSHUFPS $0xb1, Y7, Y7, Y7
	VMULPS  Y2, Y7, Y2
	VADDSUBPS Y2, Y1, Y1
	VADDPS  (DI)(AX*8), Y1, Y1
	VMOVUPS Y1, (DI)(AX*8)
	VMOVUPS 32(R10)(AX*8), Y0       // w4..7
	VMOVSLDUP Y0, Y1
	VMOVSHDUP Y0, Y2
	VMULPS  Y1, Y9, Y1
	VSHUFPS $0xb1, Y9, Y9, Y9
	VMULPS  Y2, Y9, Y2
	VADDSUBPS Y2, Y1, Y1
	VADDPS  32(DI)(AX*8), Y1, Y1
	VMOVUPS Y1, 32(DI)(AX*8)
	ADDQ    $8, AX
	JMP     loop8

loop:
	CMPQ AX, CX
	JGE  done
	VMOVUPS (R8)(AX*4), X0
	VADDPS  (R9)(AX*4), X0, X0      // s = tx + rx
	VCMPPS  $0x1d, X14, X0, X1      // s >= 0 (ordered: NaN fails)
	VCMPPS  $0x11, X15, X0, X2      // s < lim (ordered)
	VANDPS  X2, X1, X1
	VCVTTPS2DQ X0, X3               // i = int(s), truncated
	VCVTDQ2PS  X3, X4
	VSUBPS  X4, X0, X4              // f = s - float32(i)
	VANDPS  X1, X4, X4              // 0 in masked lanes (NaN and Inf delays)
	VPMOVSXDQ X1, Y5                // lane mask widened to the 64-bit samples
	VMOVDQU Y5, Y6
	VPXOR   Y7, Y7, Y7
	VPXOR   Y8, Y8, Y8
	VPGATHERDQ Y5, (SI)(X3*8), Y7   // a = row[i]
	VPGATHERDQ Y6, 8(SI)(X3*8), Y8  // b = row[i+1]
	VUNPCKLPS X4, X4, X9            // f0 f0 f1 f1
	VUNPCKHPS X4, X4, X10           // f2 f2 f3 f3
	VINSERTF128 $1, X10, Y9, Y9
	VSUBPS  Y7, Y8, Y8              // b - a
	VMULPS  Y9, Y8, Y8              // f (b - a)
	VADDPS  Y8, Y7, Y7              // v = a + f (b - a)
	VMOVUPS (R10)(AX*8), Y11        // w
	VMOVSLDUP Y11, Y12              // wr wr
	VMOVSHDUP Y11, Y13              // wi wi
	VMULPS  Y12, Y7, Y12            // vr wr, vi wr
	VSHUFPS $0xb1, Y7, Y7, Y7       // vi, vr
	VMULPS  Y13, Y7, Y13            // vi wi, vr wi
	VADDSUBPS Y13, Y12, Y12         // vr wr - vi wi, vi wr + vr wi
	VADDPS  (DI)(AX*8), Y12, Y12
	VMOVUPS Y12, (DI)(AX*8)
	ADDQ    $4, AX
	JMP     loop

done:
	VZEROUPPER
	RET
