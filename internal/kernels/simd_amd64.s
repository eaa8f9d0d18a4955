#include "textflag.h"

// func dotAVX2(x, y *float32, n int) float32
// Σ x[i]·y[i] with two 8-wide FMA accumulators, then a horizontal sum,
// then a scalar tail. Needs AVX2 and FMA.
TEXT ·dotAVX2(SB), NOSPLIT, $0-28
	MOVQ x+0(FP), SI
	MOVQ y+8(FP), DI
	MOVQ n+16(FP), CX
	VXORPS Y0, Y0, Y0
	VXORPS Y1, Y1, Y1

dot16:
	CMPQ CX, $16
	JL   dot8
	VMOVUPS (SI), Y2
	VMOVUPS 32(SI), Y3
	VFMADD231PS (DI), Y2, Y0
	VFMADD231PS 32(DI), Y3, Y1
	ADDQ $64, SI
	ADDQ $64, DI
	SUBQ $16, CX
	JMP  dot16

dot8:
	CMPQ CX, $8
	JL   dotreduce
	VMOVUPS (SI), Y2
	VFMADD231PS (DI), Y2, Y0
	ADDQ $32, SI
	ADDQ $32, DI
	SUBQ $8, CX

dotreduce:
	VADDPS       Y1, Y0, Y0
	VEXTRACTF128 $1, Y0, X1
	VADDPS       X1, X0, X0
	VHADDPS      X0, X0, X0
	VHADDPS      X0, X0, X0

dottail:
	CMPQ CX, $0
	JE   dotdone
	VMOVSS      (SI), X2
	VFMADD231SS (DI), X2, X0
	ADDQ $4, SI
	ADDQ $4, DI
	DECQ CX
	JMP  dottail

dotdone:
	VZEROUPPER
	MOVSS X0, ret+24(FP)
	RET

// func fmaAVX2(dst, x, y *float32, n int)
// dst[i] += x[i]·y[i], 8 lanes at a time, then a scalar tail.
TEXT ·fmaAVX2(SB), NOSPLIT, $0-32
	MOVQ dst+0(FP), DI
	MOVQ x+8(FP), SI
	MOVQ y+16(FP), DX
	MOVQ n+24(FP), CX

fma8:
	CMPQ CX, $8
	JL   fmatail
	VMOVUPS (DI), Y0
	VMOVUPS (SI), Y1
	VFMADD231PS (DX), Y1, Y0
	VMOVUPS Y0, (DI)
	ADDQ $32, DI
	ADDQ $32, SI
	ADDQ $32, DX
	SUBQ $8, CX
	JMP  fma8

fmatail:
	CMPQ CX, $0
	JE   fmadone
	VMOVSS      (DI), X0
	VMOVSS      (SI), X1
	VFMADD231SS (DX), X1, X0
	VMOVSS      X0, (DI)
	ADDQ $4, DI
	ADDQ $4, SI
	ADDQ $4, DX
	DECQ CX
	JMP  fmatail

fmadone:
	VZEROUPPER
	RET

// func fmaPeakAVX2(n int)
// n rounds of 10 independent 8-lane fused multiply-adds (160 flops a
// round): the measured FMA ceiling the per-layer benchmark compares with.
TEXT ·fmaPeakAVX2(SB), NOSPLIT, $0-8
	MOVQ n+0(FP), CX
	VXORPS Y0, Y0, Y0
	VXORPS Y1, Y1, Y1
	VXORPS Y2, Y2, Y2
	VXORPS Y3, Y3, Y3
	VXORPS Y4, Y4, Y4
	VXORPS Y5, Y5, Y5
	VXORPS Y6, Y6, Y6
	VXORPS Y7, Y7, Y7
	VXORPS Y8, Y8, Y8
	VXORPS Y9, Y9, Y9
	VXORPS Y10, Y10, Y10
	VXORPS Y11, Y11, Y11
	CMPQ CX, $0
	JE   peakdone

peakloop:
	VFMADD231PS Y10, Y11, Y0
	VFMADD231PS Y10, Y11, Y1
	VFMADD231PS Y10, Y11, Y2
	VFMADD231PS Y10, Y11, Y3
	VFMADD231PS Y10, Y11, Y4
	VFMADD231PS Y10, Y11, Y5
	VFMADD231PS Y10, Y11, Y6
	VFMADD231PS Y10, Y11, Y7
	VFMADD231PS Y10, Y11, Y8
	VFMADD231PS Y10, Y11, Y9
	DECQ CX
	JNZ  peakloop

peakdone:
	VZEROUPPER
	RET
// func axpyAVX2(a float32, x, y *float32, n int)
// y[i] += a·x[i], 16 then 8 lanes at a time, then a scalar tail.
TEXT ·axpyAVX2(SB), NOSPLIT, $0-32
	VBROADCASTSS a+0(FP), Y0
	MOVQ x+8(FP), SI
	MOVQ y+16(FP), DI
	MOVQ n+24(FP), CX

axpy16:
	CMPQ CX, $16
	JL   axpy8
	VMOVUPS (DI), Y1
	VMOVUPS 32(DI), Y2
	VFMADD231PS (SI), Y0, Y1
	VFMADD231PS 32(SI), Y0, Y2
	VMOVUPS Y1, (DI)
	VMOVUPS Y2, 32(DI)
	ADDQ $64, SI
	ADDQ $64, DI
	SUBQ $16, CX
	JMP  axpy16

axpy8:
	CMPQ CX, $8
	JL   axpytail
	VMOVUPS (DI), Y1
	VFMADD231PS (SI), Y0, Y1
	VMOVUPS Y1, (DI)
	ADDQ $32, SI
	ADDQ $32, DI
	SUBQ $8, CX

axpytail:
	CMPQ CX, $0
	JE   axpydone
	VMOVSS      (DI), X1
	VFMADD231SS (SI), X0, X1
	VMOVSS      X1, (DI)
	ADDQ $4, SI
	ADDQ $4, DI
	DECQ CX
	JMP  axpytail

axpydone:
	VZEROUPPER
	RET
