#include "textflag.h"

// Depthwise convolution over the interior positions of one output row,
// channels-last, c a multiple of 8. Tap t of position p reads x at byte
// offset p·xstep + xoffs[t] and the weights at byte offset woffs[t]
// (offsets in bytes, per channel block of 8 added on top). Needs AVX2/FMA.

// func dwFwdRowAVX2(out, x, w *float32, n, c, xstep int, xoffs, woffs *int, ntaps int)
// out[p·c+ch] += Σ_t x[p·xstep + xoffs[t] + ch]·w[woffs[t] + ch], for p < n.
TEXT ·dwFwdRowAVX2(SB), NOSPLIT, $0-72
	MOVQ out+0(FP), DI
	MOVQ x+8(FP), SI
	MOVQ w+16(FP), DX
	MOVQ n+24(FP), CX
	MOVQ c+32(FP), R8
	SHLQ $2, R8
	MOVQ xstep+40(FP), R9
	MOVQ xoffs+48(FP), R10
	MOVQ woffs+56(FP), R11
	MOVQ ntaps+64(FP), R12
	CMPQ CX, $0
	JE   fwddone
	CMPQ R12, $0
	JE   fwddone

fwdpos:
	XORQ BX, BX

fwdblk:
	VMOVUPS (DI)(BX*1), Y0
	VXORPS  Y3, Y3, Y3
	XORQ    R13, R13

fwdtap:
	MOVQ (R10)(R13*8), AX
	ADDQ SI, AX
	MOVQ (R11)(R13*8), R14
	ADDQ DX, R14
	VMOVUPS     (AX)(BX*1), Y1
	VFMADD231PS (R14)(BX*1), Y1, Y0
	INCQ R13
	CMPQ R13, R12
	JGE  fwdend
	MOVQ (R10)(R13*8), AX
	ADDQ SI, AX
	MOVQ (R11)(R13*8), R14
	ADDQ DX, R14
	VMOVUPS     (AX)(BX*1), Y2
	VFMADD231PS (R14)(BX*1), Y2, Y3
	INCQ R13
	CMPQ R13, R12
	JL   fwdtap

fwdend:
	VADDPS  Y3, Y0, Y0
	VMOVUPS Y0, (DI)(BX*1)
	ADDQ $32, BX
	CMPQ BX, R8
	JL   fwdblk
	ADDQ R8, DI
	ADDQ R9, SI
	DECQ CX
	JNZ  fwdpos

fwddone:
	VZEROUPPER
	RET

// func dwBackRowAVX2(d, x, w, dx, dw *float32, n, c, xstep int, xoffs, woffs *int, ntaps int)
// For every tap t and p < n: dw[woffs[t]+ch] += Σ_p d[p·c+ch]·x[p·xstep+xoffs[t]+ch]
// and dx[p·xstep+xoffs[t]+ch] += d[p·c+ch]·w[woffs[t]+ch].
TEXT ·dwBackRowAVX2(SB), NOSPLIT, $0-88
	MOVQ n+40(FP), CX
	CMPQ CX, $0
	JE   bkdone
	MOVQ c+48(FP), R8
	SHLQ $2, R8
	MOVQ xstep+56(FP), R9
	MOVQ xoffs+64(FP), R10
	MOVQ woffs+72(FP), R11
	MOVQ ntaps+80(FP), R12
	XORQ R13, R13

bktap:
	CMPQ R13, R12
	JGE  bkdone
	XORQ BX, BX

bkblk:
	// SI = x + xoffs[t] + BX, DI = dx + xoffs[t] + BX, DX = d + BX,
	// R14 = w + woffs[t] + BX, R15 = dw + woffs[t] + BX
	MOVQ (R10)(R13*8), AX
	ADDQ BX, AX
	MOVQ x+8(FP), SI
	ADDQ AX, SI
	MOVQ dx+24(FP), DI
	ADDQ AX, DI
	MOVQ d+0(FP), DX
	ADDQ BX, DX
	MOVQ (R11)(R13*8), AX
	ADDQ BX, AX
	MOVQ w+16(FP), R14
	ADDQ AX, R14
	MOVQ dw+32(FP), R15
	ADDQ AX, R15
	VMOVUPS (R14), Y2
	VXORPS  Y0, Y0, Y0
	VXORPS  Y5, Y5, Y5
	MOVQ    n+40(FP), CX

bkpair:
	CMPQ CX, $2
	JL   bkone
	VMOVUPS     (DX), Y1
	VFMADD231PS (SI), Y1, Y0
	VMOVUPS     (DI), Y4
	VFMADD231PS Y2, Y1, Y4
	VMOVUPS     Y4, (DI)
	ADDQ R9, SI
	ADDQ R9, DI
	ADDQ R8, DX
	VMOVUPS     (DX), Y1
	VFMADD231PS (SI), Y1, Y5
	VMOVUPS     (DI), Y4
	VFMADD231PS Y2, Y1, Y4
	VMOVUPS     Y4, (DI)
	ADDQ R9, SI
	ADDQ R9, DI
	ADDQ R8, DX
	SUBQ $2, CX
	JMP  bkpair

bkone:
	CMPQ CX, $0
	JE   bkstore
	VMOVUPS     (DX), Y1
	VFMADD231PS (SI), Y1, Y0
	VMOVUPS     (DI), Y4
	VFMADD231PS Y2, Y1, Y4
	VMOVUPS     Y4, (DI)

bkstore:
	VADDPS  Y5, Y0, Y0
	VADDPS  (R15), Y0, Y0
	VMOVUPS Y0, (R15)
	ADDQ $32, BX
	CMPQ BX, R8
	JL   bkblk
	INCQ R13
	JMP  bktap

bkdone:
	VZEROUPPER
	RET
