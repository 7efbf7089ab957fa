#include "textflag.h"

// The vector steps of kernels.go and of the multigrid kernels that call them, four nodes to a
// step, each with the scalar loop's operations in the scalar loop's order (no fused
// multiply–add), so that the bits agree.

DATA quarter<>+0(SB)/8, $0x3fd0000000000000 // 0.25
GLOBL quarter<>(SB), RODATA|NOPTR, $8
DATA half<>+0(SB)/8, $0x3fe0000000000000 // 0.5
GLOBL half<>(SB), RODATA|NOPTR, $8
DATA four<>+0(SB)/8, $0x4010000000000000 // 4
GLOBL four<>(SB), RODATA|NOPTR, $8

// Masks ANDed with a step's result: keepAll keeps its four nodes, keepEven the first and third
// (the second and fourth become +0).
DATA keepAll<>+0(SB)/8, $-1
DATA keepAll<>+8(SB)/8, $-1
DATA keepAll<>+16(SB)/8, $-1
DATA keepAll<>+24(SB)/8, $-1
GLOBL keepAll<>(SB), RODATA|NOPTR, $32
DATA keepEven<>+0(SB)/8, $-1
DATA keepEven<>+8(SB)/8, $0
DATA keepEven<>+16(SB)/8, $-1
DATA keepEven<>+24(SB)/8, $0
GLOBL keepEven<>(SB), RODATA|NOPTR, $32

// PLAIN sets Y0 to 0 − xs − xw + 4·xm − xe − xn for the nodes from xm (xs, xn at their own
// addresses), summed as productTo sums a plain row; Y13 holds 4, Y14 zero; Y1 is scratch.
#define PLAIN(xm, xs, xn) \
	VSUBPD (xs), Y14, Y0; \
	VSUBPD -8(xm), Y0, Y0; \
	VMULPD (xm), Y13, Y1; \
	VADDPD Y1, Y0, Y0; \
	VSUBPD 8(xm), Y0, Y0; \
	VSUBPD (xn), Y0, Y0

// ROW3 sets acc = (c0·x[−1] + c1·x[0]) + c2·x[+1], the three terms of one stencil row summed
// from the left; Y2 is scratch.
#define ROW3(x, c0, c1, c2, acc) \
	VMULPD -8(x), c0, acc; \
	VMULPD (x), c1, Y2; \
	VADDPD Y2, acc, acc; \
	VMULPD 8(x), c2, Y2; \
	VADDPD Y2, acc, acc

// func initStepsAVX2(x, b *float64, steps int)
TEXT ·initStepsAVX2(SB), NOSPLIT, $0-24
	MOVQ x+0(FP), DI
	MOVQ b+8(FP), SI
	MOVQ steps+16(FP), CX
	VBROADCASTSD quarter<>(SB), Y15
	VMOVUPD keepEven<>(SB), Y14

initLoop:
	VMULPD (SI), Y15, Y0 // b/4 (the same bits as b·¼)
	VANDPD Y14, Y0, Y0   // 0 at the second and fourth
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
// of the step before it after its own loads (R8 holds where), and the last result is stored
// after the loop.
TEXT ·smoothStepsAVX2(SB), NOSPLIT, $0-40
	MOVQ xm+0(FP), DI
	MOVQ xs+8(FP), SI
	MOVQ xn+16(FP), DX
	MOVQ b+24(FP), BX
	MOVQ steps+32(FP), CX
	VBROADCASTSD quarter<>(SB), Y15
	MOVQ DI, R8
	JMP  smoothStep

smoothLoop:
	ADDQ $32, DI
	ADDQ $32, SI
	ADDQ $32, DX
	ADDQ $32, BX

smoothStep:
	VMOVUPD (BX), Y0
	VADDPD  (SI), Y0, Y0  // b + xs
	VMOVUPD -8(DI), Y1
	VADDPD  8(DI), Y1, Y1 // xw + xe
	VADDPD  Y1, Y0, Y0
	VADDPD  (DX), Y0, Y0  // + xn
	VMULPD  Y15, Y0, Y0   // · ¼
	VMOVUPD (DI), Y1
	CMPQ DI, R8
	JEQ  smoothKeep
	VMOVUPD Y8, (R8)      // the previous step's result
	MOVQ DI, R8

smoothKeep:
	VBLENDPD $5, Y0, Y1, Y8 // new first and third, old second and fourth
	DECQ CX
	JNZ  smoothLoop
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
	VMOVUPD keepAll<>(SB), Y12
	TESTQ R9, R9
	JZ   residualLoop
	VMOVUPD keepEven<>(SB), Y12

residualLoop:
	PLAIN(AX, SI, DX)
	VMOVUPD (BX), Y1
	VSUBPD  Y0, Y1, Y0 // b − A x
	VANDPD  Y12, Y0, Y0
	VMOVUPD Y0, (DI)
	ADDQ $32, DI
	ADDQ $32, AX
	ADDQ $32, SI
	ADDQ $32, DX
	ADDQ $32, BX
	DECQ CX
	JNZ  residualLoop
	VZEROUPPER
	RET

// func productStepsAVX2(out, xm, xs, xn *float64, steps int)
TEXT ·productStepsAVX2(SB), NOSPLIT, $0-40
	MOVQ out+0(FP), DI
	MOVQ xm+8(FP), AX
	MOVQ xs+16(FP), SI
	MOVQ xn+24(FP), DX
	MOVQ steps+32(FP), CX
	VBROADCASTSD four<>(SB), Y13
	VXORPD Y14, Y14, Y14

productLoop:
	PLAIN(AX, SI, DX)
	VMOVUPD Y0, (DI)
	ADDQ $32, DI
	ADDQ $32, AX
	ADDQ $32, SI
	ADDQ $32, DX
	DECQ CX
	JNZ  productLoop
	VZEROUPPER
	RET

// STENCIL loads standardStencil c (in AX) into Y6…Y14 (a0…a8) and its inverse diagonal into
// Y15.
#define STENCIL \
	VBROADCASTSD 0(AX), Y6; \
	VBROADCASTSD 8(AX), Y7; \
	VBROADCASTSD 16(AX), Y8; \
	VBROADCASTSD 24(AX), Y9; \
	VBROADCASTSD 32(AX), Y10; \
	VBROADCASTSD 40(AX), Y11; \
	VBROADCASTSD 48(AX), Y12; \
	VBROADCASTSD 56(AX), Y13; \
	VBROADCASTSD 64(AX), Y14; \
	VBROADCASTSD 72(AX), Y15

// func smoothStdStepsAVX2(x, b, m, p *float64, c *standardStencil, steps int)
//
// t = (a0·m0 + a1·m1 + a2·m2) + (a3·c0 + a5·c2) + (a6·p0 + a7·p1 + a8·p2), x = (b − t)·inv, with
// the results stored one step late as in smoothStepsAVX2 (the pending one in Y5).
TEXT ·smoothStdStepsAVX2(SB), NOSPLIT, $0-48
	MOVQ x+0(FP), DI
	MOVQ b+8(FP), BX
	MOVQ m+16(FP), SI
	MOVQ p+24(FP), DX
	MOVQ c+32(FP), AX
	MOVQ steps+40(FP), CX
	STENCIL
	MOVQ DI, R8
	JMP  stdStep

stdLoop:
	ADDQ $32, DI
	ADDQ $32, BX
	ADDQ $32, SI
	ADDQ $32, DX

stdStep:
	ROW3(SI, Y6, Y7, Y8, Y0)
	VMULPD -8(DI), Y9, Y1
	VMULPD 8(DI), Y11, Y2
	VADDPD Y2, Y1, Y1 // a3·c0 + a5·c2
	VADDPD Y1, Y0, Y0
	ROW3(DX, Y12, Y13, Y14, Y1)
	VADDPD Y1, Y0, Y0
	VMOVUPD (BX), Y1
	VSUBPD Y0, Y1, Y1
	VMULPD Y15, Y1, Y1 // (b − t)·inv
	VMOVUPD (DI), Y2
	CMPQ DI, R8
	JEQ  stdKeep
	VMOVUPD Y5, (R8)
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
	STENCIL

resStdLoop:
	ROW3(SI, Y6, Y7, Y8, Y0)
	ROW3(DI, Y9, Y10, Y11, Y1)
	VADDPD Y1, Y0, Y0
	ROW3(DX, Y12, Y13, Y14, Y1)
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
	VMULPD  Y14, Y2, Y2  // even columns
	VADDPD  8(SI), Y0, Y0
	VADDPD  8(DX), Y1, Y1
	VADDPD  Y1, Y0, Y0
	VMULPD  Y15, Y0, Y0  // odd columns
	VUNPCKLPD Y0, Y2, Y1 // (e0, o0, e2, o2)
	VUNPCKHPD Y0, Y2, Y3 // (e1, o1, e3, o3)
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

// COLUMNS sets acc to the column sums c[k] + ½(m[k] + p[k]) of four fine columns from byte
// offset off; Y15 holds ½.
#define COLUMNS(off, acc) \
	VMOVUPD off(SI), acc; \
	VADDPD off(DX), acc, acc; \
	VMULPD Y15, acc, acc; \
	VADDPD off(BX), acc, acc

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
	COLUMNS(0, Y0)       // v[2i … 2i+3]
	COLUMNS(32, Y1)      // v[2i+4 … 2i+7]
	COLUMNS(16, Y2)      // v[2i+2 … 2i+5]
	COLUMNS(48, Y3)      // v[2i+6 … 2i+9]
	VUNPCKLPD Y1, Y0, Y4 // v at 2i, 2i+4, 2i+2, 2i+6
	VUNPCKHPD Y1, Y0, Y5 // v at 2i+1, 2i+5, 2i+3, 2i+7
	VUNPCKLPD Y3, Y2, Y6 // v at 2i+2, 2i+6, 2i+4, 2i+8
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
