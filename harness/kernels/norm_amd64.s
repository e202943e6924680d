//go:build amd64 && !noasm

#include "textflag.h"

// LayerNorm's passes, eight floats per block: the low four widen into Y14
// (lanes 0–3 of acc) and the high four into Y15 (lanes 4–7).

// ACCLOAD loads the eight lane sums at R8 into Y14 and Y15 and zeroes DI.
#define ACCLOAD \
	VMOVUPD (R8), Y14; \
	VMOVUPD 32(R8), Y15; \
	XORQ    DI, DI

// ACCSTORE writes Y14 and Y15 back to the lane sums at R8 and returns.
#define ACCSTORE \
	VMOVUPD Y14, (R8); \
	VMOVUPD Y15, 32(R8); \
	VZEROUPPER; \
	RET

// func lnSumAVX2(x *float32, n int, acc *[8]float64)
TEXT ·lnSumAVX2(SB), NOSPLIT, $0-24
	MOVQ      x+0(FP), SI
	MOVQ      n+8(FP), CX
	MOVQ      acc+16(FP), R8
	ACCLOAD

sumloop:
	VCVTPS2PD (SI)(DI*4), Y0
	VCVTPS2PD 16(SI)(DI*4), Y1
	VADDPD    Y0, Y14, Y14
	VADDPD    Y1, Y15, Y15
	ADDQ      $8, DI
	CMPQ      DI, CX
	JLT       sumloop
	ACCSTORE

// func lnSqAVX2(x *float32, n int, mean float64, acc *[8]float64)
TEXT ·lnSqAVX2(SB), NOSPLIT, $0-32
	MOVQ         x+0(FP), SI
	MOVQ         n+8(FP), CX
	VBROADCASTSD mean+16(FP), Y13
	MOVQ         acc+24(FP), R8
	ACCLOAD

sqloop:
	VCVTPS2PD    (SI)(DI*4), Y0
	VCVTPS2PD    16(SI)(DI*4), Y1
	VSUBPD       Y13, Y0, Y0
	VSUBPD       Y13, Y1, Y1
	VMULPD       Y0, Y0, Y0
	VMULPD       Y1, Y1, Y1
	VADDPD       Y0, Y14, Y14
	VADDPD       Y1, Y15, Y15
	ADDQ         $8, DI
	CMPQ         DI, CX
	JLT          sqloop
	ACCSTORE

// func lnApplyAVX2(dst, x *float32, n int, mean, inv float64, gamma, beta *float32)
//
// y = float32((x − mean)·inv), then y·gamma when gamma is not nil, then
// y + beta when beta is not nil.
TEXT ·lnApplyAVX2(SB), NOSPLIT, $0-56
	MOVQ         dst+0(FP), DX
	MOVQ         x+8(FP), SI
	MOVQ         n+16(FP), CX
	VBROADCASTSD mean+24(FP), Y13
	VBROADCASTSD inv+32(FP), Y12
	MOVQ         gamma+40(FP), R8
	MOVQ         beta+48(FP), R9
	XORQ         DI, DI

applyloop:
	VCVTPS2PD    (SI)(DI*4), Y0
	VCVTPS2PD    16(SI)(DI*4), Y1
	VSUBPD       Y13, Y0, Y0
	VSUBPD       Y13, Y1, Y1
	VMULPD       Y12, Y0, Y0
	VMULPD       Y12, Y1, Y1
	VCVTPD2PSY   Y0, X0
	VCVTPD2PSY   Y1, X1
	VINSERTF128  $1, X1, Y0, Y0
	TESTQ        R8, R8
	JZ           nogamma
	VMULPS       (R8)(DI*4), Y0, Y0

nogamma:
	TESTQ        R9, R9
	JZ           nobeta
	VADDPS       (R9)(DI*4), Y0, Y0

nobeta:
	VMOVUPS      Y0, (DX)(DI*4)
	ADDQ         $8, DI
	CMPQ         DI, CX
	JLT          applyloop
	VZEROUPPER
	RET
