#include "textflag.h"

// Kernels of Block and Bands (block.go). Arrays are (points, 8): one
// 32-byte vector holds one point of all 8 frames. Needs AVX2 and FMA.

// func loadAVX2(re, im *float32, frames *[8]*float32, win *float32, n int)
// For each group of 8 samples: 8 rows (one per frame) are transposed into
// 8 sample vectors (unpack, shuffle, 128-bit permute), each multiplied by
// its broadcast window value; even samples go to re, odd ones to im.
TEXT ·loadAVX2(SB), NOSPLIT, $0-40
	MOVQ re+0(FP), SI
	MOVQ im+8(FP), DI
	MOVQ frames+16(FP), AX
	MOVQ win+24(FP), DX
	MOVQ n+32(FP), CX
	MOVQ 0(AX), R8
	MOVQ 8(AX), R9
	MOVQ 16(AX), R10
	MOVQ 24(AX), R11
	MOVQ 32(AX), R12
	MOVQ 40(AX), R13
	MOVQ 56(AX), BX
	MOVQ 48(AX), AX
	SHRQ $3, CX

loadloop:
	VMOVUPS (R8), Y0
	VMOVUPS (R9), Y1
	VMOVUPS (R10), Y2
	VMOVUPS (R11), Y3
	VMOVUPS (R12), Y4
	VMOVUPS (R13), Y5
	VMOVUPS (AX), Y6
	VMOVUPS (BX), Y7
	VUNPCKLPS Y1, Y0, Y8
	VUNPCKHPS Y1, Y0, Y9
	VUNPCKLPS Y3, Y2, Y10
	VUNPCKHPS Y3, Y2, Y11
	VUNPCKLPS Y5, Y4, Y12
	VUNPCKHPS Y5, Y4, Y13
	VUNPCKLPS Y7, Y6, Y14
	VUNPCKHPS Y7, Y6, Y15
	VSHUFPS $0x44, Y10, Y8, Y0 // frames 0-3: sample 0 | sample 4
	VSHUFPS $0xEE, Y10, Y8, Y1 // 1 | 5
	VSHUFPS $0x44, Y11, Y9, Y2 // 2 | 6
	VSHUFPS $0xEE, Y11, Y9, Y3 // 3 | 7
	VSHUFPS $0x44, Y14, Y12, Y4 // frames 4-7
	VSHUFPS $0xEE, Y14, Y12, Y5
	VSHUFPS $0x44, Y15, Y13, Y6
	VSHUFPS $0xEE, Y15, Y13, Y7
	VPERM2F128 $0x20, Y4, Y0, Y8  // sample 0 of frames 0-7
	VPERM2F128 $0x31, Y4, Y0, Y12 // sample 4
	VPERM2F128 $0x20, Y5, Y1, Y9  // 1
	VPERM2F128 $0x31, Y5, Y1, Y13 // 5
	VPERM2F128 $0x20, Y6, Y2, Y10 // 2
	VPERM2F128 $0x31, Y6, Y2, Y14 // 6
	VPERM2F128 $0x20, Y7, Y3, Y11 // 3
	VPERM2F128 $0x31, Y7, Y3, Y15 // 7
	VBROADCASTSS 0(DX), Y0
	VBROADCASTSS 4(DX), Y1
	VBROADCASTSS 8(DX), Y2
	VBROADCASTSS 12(DX), Y3
	VBROADCASTSS 16(DX), Y4
	VBROADCASTSS 20(DX), Y5
	VBROADCASTSS 24(DX), Y6
	VBROADCASTSS 28(DX), Y7
	VMULPS Y0, Y8, Y8
	VMULPS Y1, Y9, Y9
	VMULPS Y2, Y10, Y10
	VMULPS Y3, Y11, Y11
	VMULPS Y4, Y12, Y12
	VMULPS Y5, Y13, Y13
	VMULPS Y6, Y14, Y14
	VMULPS Y7, Y15, Y15
	VMOVUPS Y8, 0(SI)
	VMOVUPS Y9, 0(DI)
	VMOVUPS Y10, 32(SI)
	VMOVUPS Y11, 32(DI)
	VMOVUPS Y12, 64(SI)
	VMOVUPS Y13, 64(DI)
	VMOVUPS Y14, 96(SI)
	VMOVUPS Y15, 96(DI)
	ADDQ $32, R8
	ADDQ $32, R9
	ADDQ $32, R10
	ADDQ $32, R11
	ADDQ $32, R12
	ADDQ $32, R13
	ADDQ $32, AX
	ADDQ $32, BX
	ADDQ $32, DX
	ADDQ $128, SI
	ADDQ $128, DI
	DECQ CX
	JNZ  loadloop
	VZEROUPPER
	RET

// func difAVX2(re, im, twr, twi *float32, m int)
// Stages h = m/2, m/4, .., 1: for each group g (step 2h) and j < h,
// a = x[g+j], c = x[g+j+h] become a + c and (a - c)·W with W = tw[j]
// broadcast; the twiddle pointers then advance by h.
TEXT ·difAVX2(SB), NOSPLIT, $0-40
	MOVQ re+0(FP), SI
	MOVQ im+8(FP), DI
	MOVQ twr+16(FP), R8
	MOVQ twi+24(FP), R9
	MOVQ m+32(FP), R13
	MOVQ R13, BX
	SHRQ $1, BX   // h, points
	SHLQ $5, R13  // m·32, bytes

difstage:
	TESTQ BX, BX
	JZ    difdone
	MOVQ  BX, R11
	SHLQ  $5, R11 // span h·32 bytes
	XORQ  R12, R12

difgroup:
	LEAQ (SI)(R12*1), AX
	LEAQ (DI)(R12*1), CX
	XORQ DX, DX

difj:
	VBROADCASTSS (R8)(DX*4), Y0
	VBROADCASTSS (R9)(DX*4), Y1
	VMOVUPS      (AX), Y2
	VMOVUPS      (CX), Y3
	VMOVUPS      (AX)(R11*1), Y4
	VMOVUPS      (CX)(R11*1), Y5
	VADDPS       Y4, Y2, Y6
	VADDPS       Y5, Y3, Y7
	VSUBPS       Y4, Y2, Y2 // dr
	VSUBPS       Y5, Y3, Y3 // di
	VMOVUPS      Y6, (AX)
	VMOVUPS      Y7, (CX)
	VMULPS       Y3, Y1, Y4  // di·wi
	VFMSUB231PS  Y2, Y0, Y4  // dr·wr - di·wi
	VMULPS       Y2, Y1, Y5  // dr·wi
	VFMADD231PS  Y3, Y0, Y5  // di·wr + dr·wi
	VMOVUPS      Y4, (AX)(R11*1)
	VMOVUPS      Y5, (CX)(R11*1)
	ADDQ         $32, AX
	ADDQ         $32, CX
	INCQ         DX
	CMPQ         DX, BX
	JL           difj
	ADDQ         R11, R12
	ADDQ         R11, R12
	CMPQ         R12, R13
	JL           difgroup
	LEAQ         (R8)(BX*4), R8
	LEAQ         (R9)(BX*4), R9
	SHRQ         $1, BX
	JMP          difstage

difdone:
	VZEROUPPER
	RET

// func splitAVX2(dst, re, im *float32, rev *int32, spr, spi *float32, m, mag int)
// Bins k = 1..m-1: Z[k] at rev[k], conj Z[m-k] at rev[m-k];
// 2E = Z[k] + conj Z[m-k], 2O = (Z[k] - conj Z[m-k])/i,
// |X|² = ((2E + W·2O)/2)², W = spr[k] + i·spi[k]; sqrt when mag != 0.
TEXT ·splitAVX2(SB), NOSPLIT, $0-64
	MOVQ dst+0(FP), DI
	MOVQ re+8(FP), SI
	MOVQ im+16(FP), DX
	MOVQ rev+24(FP), R8
	MOVQ spr+32(FP), R9
	MOVQ spi+40(FP), R10
	MOVQ m+48(FP), CX
	MOVQ mag+56(FP), R11
	MOVL $0x3e800000, AX // 0.25
	MOVQ AX, X12
	VBROADCASTSS X12, Y12
	MOVQ $1, BX

splitloop:
	CMPQ    BX, CX
	JGE     splitdone
	MOVLQSX (R8)(BX*4), R12
	MOVQ    CX, R13
	SUBQ    BX, R13
	MOVLQSX (R8)(R13*4), R13
	SHLQ    $5, R12
	SHLQ    $5, R13
	VMOVUPS (SI)(R12*1), Y0 // zr
	VMOVUPS (DX)(R12*1), Y1 // zi
	VMOVUPS (SI)(R13*1), Y2 // cr
	VMOVUPS (DX)(R13*1), Y3 // -ci
	VADDPS  Y2, Y0, Y4      // 2er = zr + cr
	VSUBPS  Y3, Y1, Y5      // 2ei = zi + ci
	VADDPS  Y3, Y1, Y6      // 2or = zi - ci
	VSUBPS  Y0, Y2, Y7      // 2oi = cr - zr
	VBROADCASTSS (R9)(BX*4), Y8
	VBROADCASTSS (R10)(BX*4), Y9
	VMULPS      Y7, Y9, Y10 // wi·oi
	VFMSUB231PS Y6, Y8, Y10 // wr·or - wi·oi
	VMULPS      Y6, Y9, Y11 // wi·or
	VFMADD231PS Y7, Y8, Y11 // wr·oi + wi·or
	VADDPS      Y10, Y4, Y4 // 2xr
	VADDPS      Y11, Y5, Y5 // 2xi
	VMULPS      Y4, Y4, Y4
	VFMADD231PS Y5, Y5, Y4
	VMULPS      Y12, Y4, Y4
	TESTQ       R11, R11
	JZ          splitstore
	VSQRTPS     Y4, Y4

splitstore:
	MOVQ    BX, R12
	SHLQ    $5, R12
	VMOVUPS Y4, (DI)(R12*1)
	INCQ    BX
	JMP     splitloop

splitdone:
	VZEROUPPER
	RET

// func bandsAVX2(dst, spec *float32, span *int32, w *float32, rows int)
// Row r: dst[r] = Σ_i w[i]·spec[start+i] over its count weights, two
// accumulators (even and odd i) added at the end.
TEXT ·bandsAVX2(SB), NOSPLIT, $0-40
	MOVQ dst+0(FP), DI
	MOVQ spec+8(FP), SI
	MOVQ span+16(FP), R8
	MOVQ w+24(FP), R9
	MOVQ rows+32(FP), CX

bandsrow:
	MOVLQSX 0(R8), AX
	MOVLQSX 4(R8), DX
	SHLQ    $5, AX
	ADDQ    SI, AX
	VXORPS  Y0, Y0, Y0
	VXORPS  Y1, Y1, Y1

bandspair:
	CMPQ         DX, $2
	JL           bandsone
	VBROADCASTSS 0(R9), Y2
	VBROADCASTSS 4(R9), Y3
	VFMADD231PS  0(AX), Y2, Y0
	VFMADD231PS  32(AX), Y3, Y1
	ADDQ         $8, R9
	ADDQ         $64, AX
	SUBQ         $2, DX
	JMP          bandspair

bandsone:
	TESTQ        DX, DX
	JZ           bandsstore
	VBROADCASTSS 0(R9), Y2
	VFMADD231PS  0(AX), Y2, Y0
	ADDQ         $4, R9

bandsstore:
	VADDPS  Y1, Y0, Y0
	VMOVUPS Y0, (DI)
	ADDQ    $32, DI
	ADDQ    $8, R8
	DECQ    CX
	JNZ     bandsrow
	VZEROUPPER
	RET
