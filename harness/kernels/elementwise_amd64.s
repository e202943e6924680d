//go:build amd64 && !noasm

#include "textflag.h"

// func reluAVX2(x *float32, n int)
//
// Per block of eight: mask = x ≤ 0 (ordered: false for NaN), x = x AND NOT
// mask, so ≤ 0 and −0 become +0 and everything else, NaN included, stays.
TEXT ·reluAVX2(SB), NOSPLIT, $0-16
	MOVQ    x+0(FP), SI
	MOVQ    n+8(FP), CX
	VXORPS  Y15, Y15, Y15
	XORQ    DI, DI

rloop:
	VMOVUPS (SI)(DI*4), Y0
	VCMPPS  $2, Y15, Y0, Y1
	VANDNPS Y0, Y1, Y0
	VMOVUPS Y0, (SI)(DI*4)
	ADDQ    $8, DI
	CMPQ    DI, CX
	JLT     rloop
	VZEROUPPER
	RET

// func scaleAVX2(alpha float32, x *float32, n int)
TEXT ·scaleAVX2(SB), NOSPLIT, $0-24
	VBROADCASTSS alpha+0(FP), Y15
	MOVQ         x+8(FP), SI
	MOVQ         n+16(FP), CX
	XORQ         DI, DI

sloop:
	VMULPS       (SI)(DI*4), Y15, Y0
	VMOVUPS      Y0, (SI)(DI*4)
	ADDQ         $8, DI
	CMPQ         DI, CX
	JLT          sloop
	VZEROUPPER
	RET
