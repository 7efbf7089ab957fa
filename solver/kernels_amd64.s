#include "textflag.h"

// The plain-run steps of kernels.go, four unknowns to a step, each with the scalar loop's
// operations in the scalar loop's order (no fused multiply–add), so that the bits agree.

DATA quarter<>+0(SB)/8, $0x3fd0000000000000 // 0.25
GLOBL quarter<>(SB), RODATA|NOPTR, $8
DATA four<>+0(SB)/8, $0x4010000000000000 // 4
GLOBL four<>(SB), RODATA|NOPTR, $8

// func initStepsAVX2(x, b *float64, steps int)
TEXT ·initStepsAVX2(SB), NOSPLIT, $0-24
	MOVQ x+0(FP), DI
	MOVQ b+8(FP), SI
	MOVQ steps+16(FP), CX
	VBROADCASTSD quarter<>(SB), Y15
	VXORPD Y14, Y14, Y14

initLoop:
	VMULPD (SI), Y15, Y0      // b/4 (the same bits as b·¼)
	VBLENDPD $10, Y14, Y0, Y0 // 0 at the second and fourth
	VMOVUPD Y0, (DI)
	ADDQ $32, SI
	ADDQ $32, DI
	DECQ CX
	JNZ  initLoop
	VZEROUPPER
	RET

// func smoothStepsAVX2(xm, xs, xn, b *float64, steps int)
//
// Each step reads its west neighbours one unknown back, the last of the previous step's, which
// that step stores; so that the load does not wait on the store, every step stores the result
// of the step before it after its own loads, and the last result is stored after the loop.
TEXT ·smoothStepsAVX2(SB), NOSPLIT, $0-40
	MOVQ xm+0(FP), DI
	MOVQ xs+8(FP), SI
	MOVQ xn+16(FP), DX
	MOVQ b+24(FP), BX
	MOVQ steps+32(FP), CX
	VBROADCASTSD quarter<>(SB), Y15
	MOVQ DI, R8 // where the pending result goes

	// The first step: its result waits in Y8.
	VMOVUPD (BX), Y0
	VADDPD  (SI), Y0, Y0      // b + xs
	VMOVUPD -8(DI), Y1
	VADDPD  8(DI), Y1, Y1     // xw + xe
	VADDPD  Y1, Y0, Y0
	VADDPD  (DX), Y0, Y0      // + xn
	VMULPD  Y15, Y0, Y0       // · ¼
	VMOVUPD (DI), Y2
	VBLENDPD $5, Y0, Y2, Y8   // new first and third, old second and fourth
	DECQ CX
	JZ   smoothLast

smoothLoop:
	ADDQ $32, DI
	ADDQ $32, SI
	ADDQ $32, DX
	ADDQ $32, BX
	VMOVUPD (BX), Y0
	VADDPD  (SI), Y0, Y0
	VMOVUPD -8(DI), Y1
	VADDPD  8(DI), Y1, Y1
	VADDPD  Y1, Y0, Y0
	VADDPD  (DX), Y0, Y0
	VMULPD  Y15, Y0, Y0
	VMOVUPD (DI), Y2
	VMOVUPD Y8, (R8)          // the previous step's result
	VBLENDPD $5, Y0, Y2, Y8
	MOVQ DI, R8
	DECQ CX
	JNZ  smoothLoop

smoothLast:
	VMOVUPD Y8, (R8)
	VZEROUPPER
	RET

// func residualStepsAVX2(r, xm, xs, xn, b *float64, steps, odd int)
TEXT ·residualStepsAVX2(SB), NOSPLIT, $0-56
	MOVQ r+0(FP), DI
	MOVQ xm+8(FP), AX
	MOVQ xs+16(FP), SI
	MOVQ xn+24(FP), DX
	MOVQ b+32(FP), BX
	MOVQ steps+40(FP), CX
	MOVQ odd+48(FP), R9
	VBROADCASTSD four<>(SB), Y13
	VXORPD Y14, Y14, Y14
	TESTQ R9, R9
	JNZ  residualOdd

residualAll:
	VSUBPD  (SI), Y14, Y0     // 0 − xs
	VSUBPD  -8(AX), Y0, Y0    // − xw
	VMULPD  (AX), Y13, Y1     // 4·xm
	VADDPD  Y1, Y0, Y0
	VSUBPD  8(AX), Y0, Y0     // − xe
	VSUBPD  (DX), Y0, Y0      // − xn
	VMOVUPD (BX), Y1
	VSUBPD  Y0, Y1, Y0        // b − A x
	VMOVUPD Y0, (DI)
	ADDQ $32, DI
	ADDQ $32, AX
	ADDQ $32, SI
	ADDQ $32, DX
	ADDQ $32, BX
	DECQ CX
	JNZ  residualAll
	VZEROUPPER
	RET

residualOdd:
	VSUBPD  (SI), Y14, Y0
	VSUBPD  -8(AX), Y0, Y0
	VMULPD  (AX), Y13, Y1
	VADDPD  Y1, Y0, Y0
	VSUBPD  8(AX), Y0, Y0
	VSUBPD  (DX), Y0, Y0
	VMOVUPD (BX), Y1
	VSUBPD  Y0, Y1, Y0
	VBLENDPD $10, Y14, Y0, Y0 // 0 at the second and fourth
	VMOVUPD Y0, (DI)
	ADDQ $32, DI
	ADDQ $32, AX
	ADDQ $32, SI
	ADDQ $32, DX
	ADDQ $32, BX
	DECQ CX
	JNZ  residualOdd
	VZEROUPPER
	RET

DATA half<>+0(SB)/8, $0x3fe0000000000000 // 0.5
GLOBL half<>(SB), RODATA|NOPTR, $8

// func smoothStdStepsAVX2(x, b, m, p *float64, c *standardStencil, steps int)
//
// t = (a0·m0 + a1·m1 + a2·m2) + (a3·c0 + a5·c2) + (a6·p0 + a7·p1 + a8·p2), x = (b − t)·inv, with
// the results stored one step late as in smoothStepsAVX2.
TEXT ·smoothStdStepsAVX2(SB), NOSPLIT, $0-48
	MOVQ x+0(FP), DI
	MOVQ b+8(FP), BX
	MOVQ m+16(FP), SI
	MOVQ p+24(FP), DX
	MOVQ c+32(FP), AX
	MOVQ steps+40(FP), CX
	VBROADCASTSD 0(AX), Y6
	VBROADCASTSD 8(AX), Y7
	VBROADCASTSD 16(AX), Y8
	VBROADCASTSD 24(AX), Y9
	VBROADCASTSD 40(AX), Y11
	VBROADCASTSD 48(AX), Y12
	VBROADCASTSD 56(AX), Y13
	VBROADCASTSD 64(AX), Y14
	VBROADCASTSD 72(AX), Y15
	MOVQ DI, R8
	JMP  stdFirst

stdLoop:
	ADDQ $32, DI
	ADDQ $32, BX
	ADDQ $32, SI
	ADDQ $32, DX

stdFirst:
	VMULPD -8(SI), Y6, Y0
	VMULPD (SI), Y7, Y1
	VADDPD Y1, Y0, Y0
	VMULPD 8(SI), Y8, Y1
	VADDPD Y1, Y0, Y0          // a0·m0 + a1·m1 + a2·m2
	VMULPD -8(DI), Y9, Y1
	VMULPD 8(DI), Y11, Y2
	VADDPD Y2, Y1, Y1          // a3·c0 + a5·c2
	VADDPD Y1, Y0, Y0
	VMULPD -8(DX), Y12, Y1
	VMULPD (DX), Y13, Y2
	VADDPD Y2, Y1, Y1
	VMULPD 8(DX), Y14, Y2
	VADDPD Y2, Y1, Y1          // a6·p0 + a7·p1 + a8·p2
	VADDPD Y1, Y0, Y0
	VMOVUPD (BX), Y1
	VSUBPD Y0, Y1, Y1
	VMULPD Y15, Y1, Y1         // (b − t)·inv
	VMOVUPD (DI), Y2
	CMPQ DI, R8
	JEQ  stdKeep
	VMOVUPD Y5, (R8)           // the previous step's result
	MOVQ DI, R8

stdKeep:
	VBLENDPD $5, Y1, Y2, Y5
	DECQ CX
	JNZ  stdLoop
	VMOVUPD Y5, (R8)
	VZEROUPPER
	RET

// func residualStdStepsAVX2(r, x, b, m, p *float64, c *standardStencil, steps int)
//
// r = b − ((a0·m0 + a1·m1 + a2·m2) + (a3·c0 + a4·c1 + a5·c2) + (a6·p0 + a7·p1 + a8·p2)).
TEXT ·residualStdStepsAVX2(SB), NOSPLIT, $0-56
	MOVQ r+0(FP), R8
	MOVQ x+8(FP), DI
	MOVQ b+16(FP), BX
	MOVQ m+24(FP), SI
	MOVQ p+32(FP), DX
	MOVQ c+40(FP), AX
	MOVQ steps+48(FP), CX
	VBROADCASTSD 0(AX), Y6
	VBROADCASTSD 8(AX), Y7
	VBROADCASTSD 16(AX), Y8
	VBROADCASTSD 24(AX), Y9
	VBROADCASTSD 32(AX), Y10
	VBROADCASTSD 40(AX), Y11
	VBROADCASTSD 48(AX), Y12
	VBROADCASTSD 56(AX), Y13
	VBROADCASTSD 64(AX), Y14

resStdLoop:
	VMULPD -8(SI), Y6, Y0
	VMULPD (SI), Y7, Y1
	VADDPD Y1, Y0, Y0
	VMULPD 8(SI), Y8, Y1
	VADDPD Y1, Y0, Y0
	VMULPD -8(DI), Y9, Y1
	VMULPD (DI), Y10, Y2
	VADDPD Y2, Y1, Y1
	VMULPD 8(DI), Y11, Y2
	VADDPD Y2, Y1, Y1
	VADDPD Y1, Y0, Y0
	VMULPD -8(DX), Y12, Y1
	VMULPD (DX), Y13, Y2
	VADDPD Y2, Y1, Y1
	VMULPD 8(DX), Y14, Y2
	VADDPD Y2, Y1, Y1
	VADDPD Y1, Y0, Y0
	VMOVUPD (BX), Y1
	VSUBPD Y0, Y1, Y1
	VMOVUPD Y1, (R8)
	ADDQ $32, R8
	ADDQ $32, DI
	ADDQ $32, BX
	ADDQ $32, SI
	ADDQ $32, DX
	DECQ CX
	JNZ  resStdLoop
	VZEROUPPER
	RET

// func prolongStepsAVX2(x, r0, r1 *float64, steps int)
//
// For pairs q to q+3: x[2q] += ½(r0[q] + r1[q]), x[2q+1] += ¼((r0[q] + r0[q+1]) + (r1[q] + r1[q+1])).
TEXT ·prolongStepsAVX2(SB), NOSPLIT, $0-32
	MOVQ x+0(FP), DI
	MOVQ r0+8(FP), SI
	MOVQ r1+16(FP), DX
	MOVQ steps+24(FP), CX
	VBROADCASTSD half<>(SB), Y14
	VBROADCASTSD quarter<>(SB), Y15

prolongLoop:
	VMOVUPD (SI), Y0
	VMOVUPD (DX), Y1
	VADDPD  Y1, Y0, Y2
	VMULPD  Y14, Y2, Y2        // even columns
	VADDPD  8(SI), Y0, Y0
	VADDPD  8(DX), Y1, Y1
	VADDPD  Y1, Y0, Y0
	VMULPD  Y15, Y0, Y0        // odd columns
	VUNPCKLPD Y0, Y2, Y1       // (e0, o0, e2, o2)
	VUNPCKHPD Y0, Y2, Y3       // (e1, o1, e3, o3)
	VPERM2F128 $0x20, Y3, Y1, Y4
	VPERM2F128 $0x31, Y3, Y1, Y5
	VADDPD  (DI), Y4, Y4
	VADDPD  32(DI), Y5, Y5
	VMOVUPD Y4, (DI)
	VMOVUPD Y5, 32(DI)
	ADDQ $64, DI
	ADDQ $32, SI
	ADDQ $32, DX
	DECQ CX
	JNZ  prolongLoop
	VZEROUPPER
	RET

// func restrictStepsAVX2(b, m, c, p *float64, steps int)
//
// Column sums v[k] = c[k] + ½(m[k] + p[k]), then b[i] = v[2i+1] + ½(v[2i] + v[2i+2]). The even
// and odd columns are separated within 128-bit halves, which leaves the nodes in the order i,
// i+2, i+1, i+3 until the last permutation.
TEXT ·restrictStepsAVX2(SB), NOSPLIT, $0-40
	MOVQ b+0(FP), DI
	MOVQ m+8(FP), SI
	MOVQ c+16(FP), BX
	MOVQ p+24(FP), DX
	MOVQ steps+32(FP), CX
	VBROADCASTSD half<>(SB), Y15

restrictLoop:
	VMOVUPD (SI), Y0
	VADDPD  (DX), Y0, Y0
	VMULPD  Y15, Y0, Y0
	VADDPD  (BX), Y0, Y0       // v[2i … 2i+3]
	VMOVUPD 32(SI), Y1
	VADDPD  32(DX), Y1, Y1
	VMULPD  Y15, Y1, Y1
	VADDPD  32(BX), Y1, Y1     // v[2i+4 … 2i+7]
	VMOVUPD 16(SI), Y2
	VADDPD  16(DX), Y2, Y2
	VMULPD  Y15, Y2, Y2
	VADDPD  16(BX), Y2, Y2     // v[2i+2 … 2i+5]
	VMOVUPD 48(SI), Y3
	VADDPD  48(DX), Y3, Y3
	VMULPD  Y15, Y3, Y3
	VADDPD  48(BX), Y3, Y3     // v[2i+6 … 2i+9]
	VUNPCKLPD Y1, Y0, Y4       // v at 2i, 2i+4, 2i+2, 2i+6
	VUNPCKHPD Y1, Y0, Y5       // v at 2i+1, 2i+5, 2i+3, 2i+7
	VUNPCKLPD Y3, Y2, Y6       // v at 2i+2, 2i+6, 2i+4, 2i+8
	VADDPD  Y6, Y4, Y4
	VMULPD  Y15, Y4, Y4
	VADDPD  Y4, Y5, Y5
	VPERMPD $0xD8, Y5, Y5
	VMOVUPD Y5, (DI)
	ADDQ $32, DI
	ADDQ $64, SI
	ADDQ $64, BX
	ADDQ $64, DX
	DECQ CX
	JNZ  restrictLoop
	VZEROUPPER
	RET

// func productStepsAVX2(out, xm, xs, xn *float64, steps int)
//
// out = 0 − xs − xw + 4·xm − xe − xn.
TEXT ·productStepsAVX2(SB), NOSPLIT, $0-40
	MOVQ out+0(FP), DI
	MOVQ xm+8(FP), AX
	MOVQ xs+16(FP), SI
	MOVQ xn+24(FP), DX
	MOVQ steps+32(FP), CX
	VBROADCASTSD four<>(SB), Y13
	VXORPD Y14, Y14, Y14

productLoop:
	VSUBPD  (SI), Y14, Y0
	VSUBPD  -8(AX), Y0, Y0
	VMULPD  (AX), Y13, Y1
	VADDPD  Y1, Y0, Y0
	VSUBPD  8(AX), Y0, Y0
	VSUBPD  (DX), Y0, Y0
	VMOVUPD Y0, (DI)
	ADDQ $32, DI
	ADDQ $32, AX
	ADDQ $32, SI
	ADDQ $32, DX
	DECQ CX
	JNZ  productLoop
	VZEROUPPER
	RET
