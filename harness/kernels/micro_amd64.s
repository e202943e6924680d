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

// func axpyRows64AVX2(y, alpha *float32, rows int, m *float32, strideBytes int)
//
// y[0..63] lives in Y0 … Y7 across the rows. For each row j: if alpha[j] is
// zero (either sign) the row is skipped, as the Axpy loop it replaces skips
// it; otherwise y += float32(alpha[j]·row), VMULPS then VADDPS. NaN alpha
// is not zero (UCOMISS sets PF) and is applied.
TEXT ·axpyRows64AVX2(SB), NOSPLIT, $0-40
	MOVQ    y+0(FP), DI
	MOVQ    alpha+8(FP), SI
	MOVQ    rows+16(FP), CX
	MOVQ    m+24(FP), DX
	MOVQ    strideBytes+32(FP), R8
	VMOVUPS 0(DI), Y0
	VMOVUPS 32(DI), Y1
	VMOVUPS 64(DI), Y2
	VMOVUPS 96(DI), Y3
	VMOVUPS 128(DI), Y4
	VMOVUPS 160(DI), Y5
	VMOVUPS 192(DI), Y6
	VMOVUPS 224(DI), Y7
	VXORPS  X15, X15, X15

rows64:
	VMOVSS       (SI), X8
	VUCOMISS     X15, X8
	JNE          apply64
	JP           apply64
	JMP          next64

apply64:
	VBROADCASTSS (SI), Y8
	VMULPS       0(DX), Y8, Y9
	VMULPS       32(DX), Y8, Y10
	VMULPS       64(DX), Y8, Y11
	VMULPS       96(DX), Y8, Y12
	VADDPS       Y9, Y0, Y0
	VADDPS       Y10, Y1, Y1
	VADDPS       Y11, Y2, Y2
	VADDPS       Y12, Y3, Y3
	VMULPS       128(DX), Y8, Y9
	VMULPS       160(DX), Y8, Y10
	VMULPS       192(DX), Y8, Y11
	VMULPS       224(DX), Y8, Y12
	VADDPS       Y9, Y4, Y4
	VADDPS       Y10, Y5, Y5
	VADDPS       Y11, Y6, Y6
	VADDPS       Y12, Y7, Y7

next64:
	ADDQ $4, SI
	ADDQ R8, DX
	DECQ CX
	JNZ  rows64

	VMOVUPS Y0, 0(DI)
	VMOVUPS Y1, 32(DI)
	VMOVUPS Y2, 64(DI)
	VMOVUPS Y3, 96(DI)
	VMOVUPS Y4, 128(DI)
	VMOVUPS Y5, 160(DI)
	VMOVUPS Y6, 192(DI)
	VMOVUPS Y7, 224(DI)
	VZEROUPPER
	RET

// func axpyRows32AVX2(y, alpha *float32, rows int, m *float32, strideBytes int)
TEXT ·axpyRows32AVX2(SB), NOSPLIT, $0-40
	MOVQ    y+0(FP), DI
	MOVQ    alpha+8(FP), SI
	MOVQ    rows+16(FP), CX
	MOVQ    m+24(FP), DX
	MOVQ    strideBytes+32(FP), R8
	VMOVUPS 0(DI), Y0
	VMOVUPS 32(DI), Y1
	VMOVUPS 64(DI), Y2
	VMOVUPS 96(DI), Y3
	VXORPS  X15, X15, X15

rows32:
	VMOVSS       (SI), X8
	VUCOMISS     X15, X8
	JNE          apply32
	JP           apply32
	JMP          next32

apply32:
	VBROADCASTSS (SI), Y8
	VMULPS       0(DX), Y8, Y9
	VMULPS       32(DX), Y8, Y10
	VMULPS       64(DX), Y8, Y11
	VMULPS       96(DX), Y8, Y12
	VADDPS       Y9, Y0, Y0
	VADDPS       Y10, Y1, Y1
	VADDPS       Y11, Y2, Y2
	VADDPS       Y12, Y3, Y3

next32:
	ADDQ $4, SI
	ADDQ R8, DX
	DECQ CX
	JNZ  rows32

	VMOVUPS Y0, 0(DI)
	VMOVUPS Y1, 32(DI)
	VMOVUPS Y2, 64(DI)
	VMOVUPS Y3, 96(DI)
	VZEROUPPER
	RET
