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
