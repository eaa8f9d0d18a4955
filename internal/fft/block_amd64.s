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

// func difAVX2(re, im, twr, twi *float32, m, h int)
// Radix-2 stages h, h/2, .., 1: for each group g (step 2h) and j < h,
// a = x[g+j], c = x[g+j+h] become a + c and (a - c)·W with W = tw[j]
// broadcast; the twiddle pointers then advance by h.
TEXT ·difAVX2(SB), NOSPLIT, $0-48
	MOVQ re+0(FP), SI
	MOVQ im+8(FP), DI
	MOVQ twr+16(FP), R8
	MOVQ twi+24(FP), R9
	MOVQ m+32(FP), R13
	MOVQ h+40(FP), BX // h, points
	SHLQ $5, R13      // m·32, bytes

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

// func dif4AVX2(re, im, tw *float32, m, h int)
// Two decimation-in-frequency stages (spans h and h/2) in one pass. For
// each group g (step 2h) and j < h/2, with w = W_2h^j and points
// p0..p3 at g+j, g+j+h/2, g+j+h, g+j+3h/2 (W_2h^(j+h/2) = -i·w and
// W_h^j = w²):
//   p0 ← (p0+p2) + (p1+p3)       p1 ← ((p0+p2) - (p1+p3))·w²
//   p2 ← ((p0-p2) - i(p1-p3))·w  p3 ← ((p0-p2) + i(p1-p3))·w³
// tw holds w, w², w³ (re, im each) for every j.
TEXT ·dif4AVX2(SB), NOSPLIT, $0-40
	MOVQ re+0(FP), SI
	MOVQ im+8(FP), DI
	MOVQ m+24(FP), R13
	SHLQ $5, R13      // m·32, bytes
	MOVQ h+32(FP), BX
	SHRQ $1, BX       // h/2: butterflies per group
	MOVQ BX, R11
	SHLQ $5, R11      // quarter span, bytes
	LEAQ (R11)(R11*2), R12
	XORQ R10, R10     // group offset, bytes

dif4group:
	LEAQ (SI)(R10*1), AX
	LEAQ (DI)(R10*1), CX
	MOVQ tw+16(FP), R8
	MOVQ BX, DX

dif4j:
	VMOVUPS      (AX), Y0
	VMOVUPS      (CX), Y1
	VMOVUPS      (AX)(R11*1), Y2
	VMOVUPS      (CX)(R11*1), Y3
	VMOVUPS      (AX)(R11*2), Y4
	VMOVUPS      (CX)(R11*2), Y5
	VMOVUPS      (AX)(R12*1), Y6
	VMOVUPS      (CX)(R12*1), Y7
	VADDPS       Y4, Y0, Y8  // s02
	VADDPS       Y5, Y1, Y9
	VSUBPS       Y4, Y0, Y0  // d02
	VSUBPS       Y5, Y1, Y1
	VADDPS       Y6, Y2, Y10 // s13
	VADDPS       Y7, Y3, Y11
	VSUBPS       Y6, Y2, Y2  // d13
	VSUBPS       Y7, Y3, Y3
	VADDPS       Y10, Y8, Y4
	VADDPS       Y11, Y9, Y5
	VMOVUPS      Y4, (AX)
	VMOVUPS      Y5, (CX)
	VSUBPS       Y10, Y8, Y8 // t = s02 - s13
	VSUBPS       Y11, Y9, Y9
	VBROADCASTSS 8(R8), Y12  // w²
	VBROADCASTSS 12(R8), Y13
	VMULPS       Y9, Y13, Y10
	VFMSUB231PS  Y8, Y12, Y10
	VMULPS       Y8, Y13, Y11
	VFMADD231PS  Y9, Y12, Y11
	VMOVUPS      Y10, (AX)(R11*1)
	VMOVUPS      Y11, (CX)(R11*1)
	VADDPS       Y3, Y0, Y8  // u = d02 - i·d13
	VSUBPS       Y2, Y1, Y9
	VSUBPS       Y3, Y0, Y0  // v = d02 + i·d13
	VADDPS       Y2, Y1, Y1
	VBROADCASTSS 0(R8), Y12  // w
	VBROADCASTSS 4(R8), Y13
	VMULPS       Y9, Y13, Y10
	VFMSUB231PS  Y8, Y12, Y10
	VMULPS       Y8, Y13, Y11
	VFMADD231PS  Y9, Y12, Y11
	VMOVUPS      Y10, (AX)(R11*2)
	VMOVUPS      Y11, (CX)(R11*2)
	VBROADCASTSS 16(R8), Y12 // w³
	VBROADCASTSS 20(R8), Y13
	VMULPS       Y1, Y13, Y10
	VFMSUB231PS  Y0, Y12, Y10
	VMULPS       Y0, Y13, Y11
	VFMADD231PS  Y1, Y12, Y11
	VMOVUPS      Y10, (AX)(R12*1)
	VMOVUPS      Y11, (CX)(R12*1)
	ADDQ         $24, R8
	ADDQ         $32, AX
	ADDQ         $32, CX
	DECQ         DX
	JNZ          dif4j
	LEAQ         (R10)(R11*4), R10
	CMPQ         R10, R13
	JL           dif4group
	VZEROUPPER
	RET

// func clipAVX2(v *float32, rows int, below float64)
// v is (rows, 8): per lane, the maximum p over rows, lo =
// float32(float64(p) - below) (in float64, as the scalar path), and
// v ← max(v, lo). rows ≥ 1.
TEXT ·clipAVX2(SB), NOSPLIT, $0-24
	MOVQ         v+0(FP), SI
	MOVQ         rows+8(FP), CX
	VBROADCASTSD below+16(FP), Y5
	MOVQ         SI, DI
	MOVQ         CX, DX
	VMOVUPS      (SI), Y0

clippeak:
	VMAXPS (DI), Y0, Y0
	ADDQ   $32, DI
	DECQ   DX
	JNZ    clippeak
	VCVTPS2PD    X0, Y1
	VEXTRACTF128 $1, Y0, X2
	VCVTPS2PD    X2, Y2
	VSUBPD       Y5, Y1, Y1
	VSUBPD       Y5, Y2, Y2
	VCVTPD2PSY   Y1, X1
	VCVTPD2PSY   Y2, X2
	VINSERTF128  $1, X2, Y1, Y1

clipset:
	VMAXPS  (SI), Y1, Y3
	VMOVUPS Y3, (SI)
	ADDQ    $32, SI
	DECQ    CX
	JNZ     clipset
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

// Constants of logAVX2, four copies each so they serve as 256-bit
// memory operands.
// 0: 2^52 (exponent field to float64)
DATA logc<>+0(SB)/8, $0x4330000000000000
DATA logc<>+8(SB)/8, $0x4330000000000000
DATA logc<>+16(SB)/8, $0x4330000000000000
DATA logc<>+24(SB)/8, $0x4330000000000000
// 32: 2^52 + 1023
DATA logc<>+32(SB)/8, $0x43300000000003ff
DATA logc<>+40(SB)/8, $0x43300000000003ff
DATA logc<>+48(SB)/8, $0x43300000000003ff
DATA logc<>+56(SB)/8, $0x43300000000003ff
// 64: mantissa mask
DATA logc<>+64(SB)/8, $0x000fffffffffffff
DATA logc<>+72(SB)/8, $0x000fffffffffffff
DATA logc<>+80(SB)/8, $0x000fffffffffffff
DATA logc<>+88(SB)/8, $0x000fffffffffffff
// 96: 1.0
DATA logc<>+96(SB)/8, $0x3ff0000000000000
DATA logc<>+104(SB)/8, $0x3ff0000000000000
DATA logc<>+112(SB)/8, $0x3ff0000000000000
DATA logc<>+120(SB)/8, $0x3ff0000000000000
// 128: sqrt 2
DATA logc<>+128(SB)/8, $0x3ff6a09e667f3bcd
DATA logc<>+136(SB)/8, $0x3ff6a09e667f3bcd
DATA logc<>+144(SB)/8, $0x3ff6a09e667f3bcd
DATA logc<>+152(SB)/8, $0x3ff6a09e667f3bcd
// 160: 0.5
DATA logc<>+160(SB)/8, $0x3fe0000000000000
DATA logc<>+168(SB)/8, $0x3fe0000000000000
DATA logc<>+176(SB)/8, $0x3fe0000000000000
DATA logc<>+184(SB)/8, $0x3fe0000000000000
// 192: 2/9
DATA logc<>+192(SB)/8, $0x3fcc71c71c71c71c
DATA logc<>+200(SB)/8, $0x3fcc71c71c71c71c
DATA logc<>+208(SB)/8, $0x3fcc71c71c71c71c
DATA logc<>+216(SB)/8, $0x3fcc71c71c71c71c
// 224: 2/7
DATA logc<>+224(SB)/8, $0x3fd2492492492492
DATA logc<>+232(SB)/8, $0x3fd2492492492492
DATA logc<>+240(SB)/8, $0x3fd2492492492492
DATA logc<>+248(SB)/8, $0x3fd2492492492492
// 256: 2/5
DATA logc<>+256(SB)/8, $0x3fd999999999999a
DATA logc<>+264(SB)/8, $0x3fd999999999999a
DATA logc<>+272(SB)/8, $0x3fd999999999999a
DATA logc<>+280(SB)/8, $0x3fd999999999999a
// 288: 2/3
DATA logc<>+288(SB)/8, $0x3fe5555555555555
DATA logc<>+296(SB)/8, $0x3fe5555555555555
DATA logc<>+304(SB)/8, $0x3fe5555555555555
DATA logc<>+312(SB)/8, $0x3fe5555555555555
// 320: 2.0
DATA logc<>+320(SB)/8, $0x4000000000000000
DATA logc<>+328(SB)/8, $0x4000000000000000
DATA logc<>+336(SB)/8, $0x4000000000000000
DATA logc<>+344(SB)/8, $0x4000000000000000
// 352: ln 2
DATA logc<>+352(SB)/8, $0x3fe62e42fefa39ef
DATA logc<>+360(SB)/8, $0x3fe62e42fefa39ef
DATA logc<>+368(SB)/8, $0x3fe62e42fefa39ef
DATA logc<>+376(SB)/8, $0x3fe62e42fefa39ef
GLOBL logc<>(SB), RODATA|NOPTR, $384

// func logAVX2(v *float32, n int, floor, scale float64)
// v[i] = float32(scale·ln(max(v[i], floor))), 4 at a time in float64:
// x = m·2^e with m in [√½, √2) from the exponent and mantissa bits,
// ln m = 2·atanh(s) = s·(2 + s²(2/3 + s²(2/5 + s²(2/7 + s²·2/9)))),
// s = (m-1)/(m+1) (Abramowitz & Stegun 4.1.28), as features.lnPositive.
// n is a multiple of 4; floor is a normal positive number.
TEXT ·logAVX2(SB), NOSPLIT, $0-32
	MOVQ         v+0(FP), SI
	MOVQ         n+8(FP), CX
	VBROADCASTSD floor+16(FP), Y8
	VBROADCASTSD scale+24(FP), Y9
	SHRQ         $2, CX
	JZ           logdone

logloop:
	VCVTPS2PD   (SI), Y0
	VMAXPD      Y8, Y0, Y0                // NaN and v ≤ floor → floor
	VPSRLQ      $52, Y0, Y1
	VPOR        logc<>+0(SB), Y1, Y1
	VSUBPD      logc<>+32(SB), Y1, Y1     // e
	VANDPD      logc<>+64(SB), Y0, Y2
	VORPD       logc<>+96(SB), Y2, Y2     // m in [1, 2)
	VCMPPD      $0x0D, logc<>+128(SB), Y2, Y3 // m ≥ √2
	VMULPD      logc<>+160(SB), Y2, Y4
	VBLENDVPD   Y3, Y4, Y2, Y2            // m/2 there
	VANDPD      logc<>+96(SB), Y3, Y5
	VADDPD      Y5, Y1, Y1                // and e+1
	VSUBPD      logc<>+96(SB), Y2, Y4
	VADDPD      logc<>+96(SB), Y2, Y5
	VDIVPD      Y5, Y4, Y4                // s
	VMULPD      Y4, Y4, Y5                // s²
	VMOVUPD     logc<>+192(SB), Y6
	VFMADD213PD logc<>+224(SB), Y5, Y6
	VFMADD213PD logc<>+256(SB), Y5, Y6
	VFMADD213PD logc<>+288(SB), Y5, Y6
	VFMADD213PD logc<>+320(SB), Y5, Y6
	VMULPD      Y4, Y6, Y6                // ln m
	VFMADD231PD logc<>+352(SB), Y1, Y6    // + e·ln 2
	VMULPD      Y9, Y6, Y6
	VCVTPD2PSY  Y6, X6
	VMOVUPS     X6, (SI)
	ADDQ        $16, SI
	DECQ        CX
	JNZ         logloop

logdone:
	VZEROUPPER
	RET
