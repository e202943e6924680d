//go:build amd64 && !noasm

#include "textflag.h"

// func gemmMicroAVX2(kc int, a, b *float32, c *[64]float32)
//
// For kk < kc, ascending: c[i*16+j] += a[kk*4+i]·b[kk*16+j], the product
// rounded to float32 (VMULPS) and then added (VADDPS): the reference loop of
// gemmMicroGo, lane by lane, with no fused multiply-add.
TEXT ·gemmMicroAVX2(SB), NOSPLIT, $0-32
	MOVQ kc+0(FP), CX
	MOVQ a+8(FP), SI
	MOVQ b+16(FP), DI
	MOVQ c+24(FP), DX
	VMOVUPS 0(DX), Y0
	VMOVUPS 32(DX), Y1
	VMOVUPS 64(DX), Y2
	VMOVUPS 96(DX), Y3
	VMOVUPS 128(DX), Y4
	VMOVUPS 160(DX), Y5
	VMOVUPS 192(DX), Y6
	VMOVUPS 224(DX), Y7

loop:
	VMOVUPS      0(DI), Y8
	VMOVUPS      32(DI), Y9
	VBROADCASTSS 0(SI), Y10
	VMULPS       Y8, Y10, Y11
	VMULPS       Y9, Y10, Y12
	VBROADCASTSS 4(SI), Y13
	VADDPS       Y11, Y0, Y0
	VADDPS       Y12, Y1, Y1
	VMULPS       Y8, Y13, Y14
	VMULPS       Y9, Y13, Y15
	VBROADCASTSS 8(SI), Y10
	VADDPS       Y14, Y2, Y2
	VADDPS       Y15, Y3, Y3
	VMULPS       Y8, Y10, Y11
	VMULPS       Y9, Y10, Y12
	VBROADCASTSS 12(SI), Y13
	VADDPS       Y11, Y4, Y4
	VADDPS       Y12, Y5, Y5
	VMULPS       Y8, Y13, Y14
	VMULPS       Y9, Y13, Y15
	VADDPS       Y14, Y6, Y6
	VADDPS       Y15, Y7, Y7
	ADDQ         $16, SI
	ADDQ         $64, DI
	DECQ         CX
	JNZ          loop

	VMOVUPS Y0, 0(DX)
	VMOVUPS Y1, 32(DX)
	VMOVUPS Y2, 64(DX)
	VMOVUPS Y3, 96(DX)
	VMOVUPS Y4, 128(DX)
	VMOVUPS Y5, 160(DX)
	VMOVUPS Y6, 192(DX)
	VMOVUPS Y7, 224(DX)
	VZEROUPPER
	RET

// func axpyAVX2(alpha float32, x, y *float32, n int)
//
// y[j] += alpha·x[j] for j < n (a multiple of 8), the product rounded
// (VMULPS) and then added (VADDPS): the reference loop of axpyGo.
TEXT ·axpyAVX2(SB), NOSPLIT, $0-32
	VBROADCASTSS alpha+0(FP), Y0
	MOVQ         x+8(FP), SI
	MOVQ         y+16(FP), DI
	MOVQ         n+24(FP), CX
	SHRQ         $3, CX
	JZ           axpydone

axpyloop:
	VMULPS  (SI), Y0, Y1
	VADDPS  (DI), Y1, Y1
	VMOVUPS Y1, (DI)
	ADDQ    $32, SI
	ADDQ    $32, DI
	DECQ    CX
	JNZ     axpyloop

axpydone:
	VZEROUPPER
	RET
