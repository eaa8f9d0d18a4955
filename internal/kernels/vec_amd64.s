#include "textflag.h"

// Element-wise and per-channel kernels over channels-last data. The
// per-channel ones take rows·c values with c a multiple of 8 (the Go
// wrappers check); every function needs AVX2 and FMA.

// func clampAVX2(dst, src *float32, n int, lo, hi float32)
// dst[i] = min(max(src[i], lo), hi).
TEXT ·clampAVX2(SB), NOSPLIT, $0-32
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ n+16(FP), CX
	VBROADCASTSS lo+24(FP), Y14
	VBROADCASTSS hi+28(FP), Y15

clamp16:
	CMPQ CX, $16
	JL   clamp8
	VMOVUPS (SI), Y0
	VMOVUPS 32(SI), Y1
	VMAXPS  Y14, Y0, Y0
	VMAXPS  Y14, Y1, Y1
	VMINPS  Y15, Y0, Y0
	VMINPS  Y15, Y1, Y1
	VMOVUPS Y0, (DI)
	VMOVUPS Y1, 32(DI)
	ADDQ $64, SI
	ADDQ $64, DI
	SUBQ $16, CX
	JMP  clamp16

clamp8:
	CMPQ CX, $8
	JL   clamptail
	VMOVUPS (SI), Y0
	VMAXPS  Y14, Y0, Y0
	VMINPS  Y15, Y0, Y0
	VMOVUPS Y0, (DI)
	ADDQ $32, SI
	ADDQ $32, DI
	SUBQ $8, CX

clamptail:
	CMPQ CX, $0
	JE   clampdone
	VMOVSS (SI), X0
	VMAXSS X14, X0, X0
	VMINSS X15, X0, X0
	VMOVSS X0, (DI)
	ADDQ $4, SI
	ADDQ $4, DI
	DECQ CX
	JMP  clamptail

clampdone:
	VZEROUPPER
	RET

// func maskSetAVX2(dst, gr, x *float32, n int, lo, hi float32)
// dst[i] = g[i] where lo < x[i] < hi, else 0.
TEXT ·maskSetAVX2(SB), NOSPLIT, $0-40
	MOVQ dst+0(FP), DI
	MOVQ gr+8(FP), SI
	MOVQ x+16(FP), DX
	MOVQ n+24(FP), CX
	VBROADCASTSS lo+32(FP), Y14
	VBROADCASTSS hi+36(FP), Y15

mask8:
	CMPQ CX, $8
	JL   masktail
	VMOVUPS (DX), Y0
	VCMPPS  $14, Y14, Y0, Y1 // x > lo
	VCMPPS  $1, Y15, Y0, Y2  // x < hi
	VANDPS  Y2, Y1, Y1
	VANDPS  (SI), Y1, Y1
	VMOVUPS Y1, (DI)
	ADDQ $32, SI
	ADDQ $32, DX
	ADDQ $32, DI
	SUBQ $8, CX
	JMP  mask8

masktail:
	CMPQ CX, $0
	JE   maskdone
	VMOVSS (DX), X0
	VCMPSS $14, X14, X0, X1
	VCMPSS $1, X15, X0, X2
	VANDPS X2, X1, X1
	VMOVSS (SI), X3
	VANDPS X3, X1, X1
	VMOVSS X1, (DI)
	ADDQ $4, SI
	ADDQ $4, DX
	ADDQ $4, DI
	DECQ CX
	JMP  masktail

maskdone:
	VZEROUPPER
	RET

// func chanAffineAVX2(dst, src, scale, shift *float32, rows, c int, lo, hi float32)
// dst[r·c+ch] = min(max(src[r·c+ch]·scale[ch] + shift[ch], lo), hi).
TEXT ·chanAffineAVX2(SB), NOSPLIT, $0-56
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ scale+16(FP), R8
	MOVQ shift+24(FP), R9
	MOVQ rows+32(FP), CX
	MOVQ c+40(FP), R10
	SHLQ $2, R10
	VBROADCASTSS lo+48(FP), Y14
	VBROADCASTSS hi+52(FP), Y15
	CMPQ CX, $0
	JE   affdone

affrow:
	XORQ BX, BX

affcol:
	VMOVUPS     (SI)(BX*1), Y0
	VMOVUPS     (R8)(BX*1), Y1
	VFMADD213PS (R9)(BX*1), Y1, Y0
	VMAXPS      Y14, Y0, Y0
	VMINPS      Y15, Y0, Y0
	VMOVUPS     Y0, (DI)(BX*1)
	ADDQ $32, BX
	CMPQ BX, R10
	JL   affcol
	ADDQ R10, SI
	ADDQ R10, DI
	DECQ CX
	JNZ  affrow

affdone:
	VZEROUPPER
	RET

// func chanDotAVX2(a, b, mu *float32, rows, c int, sa, sab *float64)
// sa[ch] += Σ_r a[r·c+ch]; sab[ch] += Σ_r a[r·c+ch]·(b[r·c+ch] − mu[ch]),
// the products and sums in float64.
TEXT ·chanDotAVX2(SB), NOSPLIT, $0-56
	MOVQ a+0(FP), R11
	MOVQ b+8(FP), R12
	MOVQ mu+16(FP), R13
	MOVQ rows+24(FP), R14
	MOVQ c+32(FP), R10
	SHLQ $2, R10
	MOVQ sa+40(FP), R8
	MOVQ sab+48(FP), R9
	XORQ BX, BX // byte offset of the channel block in a row

dotblk:
	CMPQ BX, R10
	JGE  dotdone
	VXORPD  Y6, Y6, Y6
	VXORPD  Y7, Y7, Y7
	VXORPD  Y8, Y8, Y8
	VXORPD  Y9, Y9, Y9
	VMOVUPS (R13)(BX*1), Y10
	LEAQ    (R11)(BX*1), SI
	LEAQ    (R12)(BX*1), DI
	MOVQ    R14, CX
	CMPQ    CX, $0
	JE      dotstore

dotrow:
	VMOVUPS      (SI), Y0
	VMOVUPS      (DI), Y1
	VSUBPS       Y10, Y1, Y1
	VCVTPS2PD    X0, Y2
	VEXTRACTF128 $1, Y0, X3
	VCVTPS2PD    X3, Y3
	VCVTPS2PD    X1, Y4
	VEXTRACTF128 $1, Y1, X5
	VCVTPS2PD    X5, Y5
	VADDPD       Y2, Y6, Y6
	VADDPD       Y3, Y7, Y7
	VFMADD231PD  Y4, Y2, Y8
	VFMADD231PD  Y5, Y3, Y9
	ADDQ R10, SI
	ADDQ R10, DI
	DECQ CX
	JNZ  dotrow

dotstore:
	// float64 offsets are twice the float32 ones
	LEAQ   (R8)(BX*2), AX
	VADDPD (AX), Y6, Y6
	VADDPD 32(AX), Y7, Y7
	VMOVUPD Y6, (AX)
	VMOVUPD Y7, 32(AX)
	LEAQ   (R9)(BX*2), AX
	VADDPD (AX), Y8, Y8
	VADDPD 32(AX), Y9, Y9
	VMOVUPD Y8, (AX)
	VMOVUPD Y9, 32(AX)
	ADDQ $32, BX
	JMP  dotblk

dotdone:
	VZEROUPPER
	RET

// func chanLinearAVX2(dst, gr, x, a, mu, b, k *float32, rows, c int)
// dst[r·c+ch] = a[ch]·g[r·c+ch] + b[ch]·(x[r·c+ch] − mu[ch]) + k[ch].
TEXT ·chanLinearAVX2(SB), NOSPLIT, $0-72
	MOVQ dst+0(FP), DI
	MOVQ gr+8(FP), SI
	MOVQ x+16(FP), DX
	MOVQ a+24(FP), R8
	MOVQ mu+32(FP), R9
	MOVQ b+40(FP), R11
	MOVQ k+48(FP), R12
	MOVQ rows+56(FP), CX
	MOVQ c+64(FP), R10
	SHLQ $2, R10
	CMPQ CX, $0
	JE   lindone

linrow:
	XORQ BX, BX

lincol:
	VMOVUPS     (DX)(BX*1), Y0
	VSUBPS      (R9)(BX*1), Y0, Y0
	VMOVUPS     (R11)(BX*1), Y1
	VFMADD213PS (R12)(BX*1), Y1, Y0
	VMOVUPS     (R8)(BX*1), Y2
	VFMADD231PS (SI)(BX*1), Y2, Y0
	VMOVUPS     Y0, (DI)(BX*1)
	ADDQ $32, BX
	CMPQ BX, R10
	JL   lincol
	ADDQ R10, SI
	ADDQ R10, DX
	ADDQ R10, DI
	DECQ CX
	JNZ  linrow

lindone:
	VZEROUPPER
	RET
