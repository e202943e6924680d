//go:build amd64 && !noasm

#include "textflag.h"

// ROWSTART loads AxpyRows' arguments: DI = y, SI = alpha, CX = rows,
// DX = the first row, R8 = the row stride in bytes; X15 = 0.
#define ROWSTART \
	MOVQ   y+0(FP), DI; \
	MOVQ   alpha+8(FP), SI; \
	MOVQ   rows+16(FP), CX; \
	MOVQ   m+24(FP), DX; \
	MOVQ   strideBytes+32(FP), R8; \
	VXORPS X15, X15, X15

// ROWSKIP jumps to SKIP when alpha[j] (at SI) is zero of either sign, as the
// Axpy loop AxpyRows replaces skips such a row; NaN is not zero (UCOMISS sets
// PF) and goes on to APPLY, as every other value does. APPLY is the label
// that follows, where alpha[j] is broadcast into Y8.
#define ROWSKIP(APPLY, SKIP) \
	VMOVSS       (SI), X8; \
	VUCOMISS     X15, X8; \
	JNE          APPLY; \
	JP           APPLY; \
	JMP          SKIP

// ROWMAC4 adds float32(alpha[j]·row[OFF/4 … OFF/4+31]) to A0 … A3 (VMULPS,
// then VADDPS).
#define ROWMAC4(OFF, A0, A1, A2, A3) \
	VMULPS OFF+0(DX), Y8, Y9; \
	VMULPS OFF+32(DX), Y8, Y10; \
	VMULPS OFF+64(DX), Y8, Y11; \
	VMULPS OFF+96(DX), Y8, Y12; \
	VADDPS Y9, A0, A0; \
	VADDPS Y10, A1, A1; \
	VADDPS Y11, A2, A2; \
	VADDPS Y12, A3, A3

// ROWNEXT moves to the next row and loops to TOP while rows remain.
#define ROWNEXT(TOP) \
	ADDQ $4, SI; \
	ADDQ R8, DX; \
	DECQ CX; \
	JNZ  TOP

// MICROSTEP is one k of the 4×16 tile: two B vectors (Y8, Y9) from DI,
// the four A values broadcast from SI, eight VMULPS then VADDPS into
// Y0 … Y7, and both pointers advanced.
#define MICROSTEP \
	VMOVUPS      0(DI), Y8 \
	VMOVUPS      32(DI), Y9 \
	VBROADCASTSS 0(SI), Y10 \
	VMULPS       Y8, Y10, Y11 \
	VMULPS       Y9, Y10, Y12 \
	VBROADCASTSS 4(SI), Y13 \
	VADDPS       Y11, Y0, Y0 \
	VADDPS       Y12, Y1, Y1 \
	VMULPS       Y8, Y13, Y14 \
	VMULPS       Y9, Y13, Y15 \
	VBROADCASTSS 8(SI), Y10 \
	VADDPS       Y14, Y2, Y2 \
	VADDPS       Y15, Y3, Y3 \
	VMULPS       Y8, Y10, Y11 \
	VMULPS       Y9, Y10, Y12 \
	VBROADCASTSS 12(SI), Y13 \
	VADDPS       Y11, Y4, Y4 \
	VADDPS       Y12, Y5, Y5 \
	VMULPS       Y8, Y13, Y14 \
	VMULPS       Y9, Y13, Y15 \
	VADDPS       Y14, Y6, Y6 \
	VADDPS       Y15, Y7, Y7 \
	ADDQ         $16, SI \
	ADDQ         $64, DI

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
	MICROSTEP
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

// func gemmMicroCAVX2(kc int, a, b, c *float32, ldcBytes int, first bool, bias *float32)
//
// gemmMicroAVX2 on a whole 4×16 tile held in place: rows c, c+ldc, c+2·ldc,
// c+3·ldc (ldcBytes apart). The accumulators start at zero when first is
// set and from the tile otherwise; after the k loop the 16 bias values are
// added to each row when bias is not nil, and the tile is stored back.
TEXT ·gemmMicroCAVX2(SB), NOSPLIT, $0-56
	MOVQ    kc+0(FP), CX
	MOVQ    a+8(FP), SI
	MOVQ    b+16(FP), DI
	MOVQ    c+24(FP), DX
	MOVQ    ldcBytes+32(FP), R8
	LEAQ    (DX)(R8*1), R9
	LEAQ    (R9)(R8*1), R10
	LEAQ    (R10)(R8*1), R11
	MOVBLZX first+40(FP), AX
	TESTQ   AX, AX
	JZ      cload
	VXORPS  Y0, Y0, Y0
	VXORPS  Y1, Y1, Y1
	VXORPS  Y2, Y2, Y2
	VXORPS  Y3, Y3, Y3
	VXORPS  Y4, Y4, Y4
	VXORPS  Y5, Y5, Y5
	VXORPS  Y6, Y6, Y6
	VXORPS  Y7, Y7, Y7
	JMP     cloop

cload:
	VMOVUPS 0(DX), Y0
	VMOVUPS 32(DX), Y1
	VMOVUPS 0(R9), Y2
	VMOVUPS 32(R9), Y3
	VMOVUPS 0(R10), Y4
	VMOVUPS 32(R10), Y5
	VMOVUPS 0(R11), Y6
	VMOVUPS 32(R11), Y7

cloop:
	MICROSTEP
	DECQ    CX
	JNZ     cloop

	MOVQ    bias+48(FP), AX
	TESTQ   AX, AX
	JZ      cstore
	VMOVUPS 0(AX), Y8
	VMOVUPS 32(AX), Y9
	VADDPS  Y8, Y0, Y0
	VADDPS  Y9, Y1, Y1
	VADDPS  Y8, Y2, Y2
	VADDPS  Y9, Y3, Y3
	VADDPS  Y8, Y4, Y4
	VADDPS  Y9, Y5, Y5
	VADDPS  Y8, Y6, Y6
	VADDPS  Y9, Y7, Y7

cstore:
	VMOVUPS Y0, 0(DX)
	VMOVUPS Y1, 32(DX)
	VMOVUPS Y2, 0(R9)
	VMOVUPS Y3, 32(R9)
	VMOVUPS Y4, 0(R10)
	VMOVUPS Y5, 32(R10)
	VMOVUPS Y6, 0(R11)
	VMOVUPS Y7, 32(R11)
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
// y[0..63] lives in Y0 … Y7 across the rows.
TEXT ·axpyRows64AVX2(SB), NOSPLIT, $0-40
	ROWSTART
	VMOVUPS 0(DI), Y0
	VMOVUPS 32(DI), Y1
	VMOVUPS 64(DI), Y2
	VMOVUPS 96(DI), Y3
	VMOVUPS 128(DI), Y4
	VMOVUPS 160(DI), Y5
	VMOVUPS 192(DI), Y6
	VMOVUPS 224(DI), Y7

rows64:
	ROWSKIP(apply64, next64)

apply64:
	VBROADCASTSS (SI), Y8
	ROWMAC4(0, Y0, Y1, Y2, Y3)
	ROWMAC4(128, Y4, Y5, Y6, Y7)

next64:
	ROWNEXT(rows64)
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
//
// y[0..31] lives in Y0 … Y3 across the rows.
TEXT ·axpyRows32AVX2(SB), NOSPLIT, $0-40
	ROWSTART
	VMOVUPS 0(DI), Y0
	VMOVUPS 32(DI), Y1
	VMOVUPS 64(DI), Y2
	VMOVUPS 96(DI), Y3

rows32:
	ROWSKIP(apply32, next32)

apply32:
	VBROADCASTSS (SI), Y8
	ROWMAC4(0, Y0, Y1, Y2, Y3)

next32:
	ROWNEXT(rows32)
	VMOVUPS Y0, 0(DI)
	VMOVUPS Y1, 32(DI)
	VMOVUPS Y2, 64(DI)
	VMOVUPS Y3, 96(DI)
	VZEROUPPER
	RET

// MICROSTEP512 is one k of a 4×32 tile: the two panels' sixteen B values
// (Z8 from DI, Z9 from BX), each of the four A values broadcast from SI
// within its two VMULPS (the EVEX embedded broadcast: on AMD Zen 4 a
// separate VBROADCASTSS into a 512-bit register costs vector-pipe slots the
// multiplies and adds need, about a third of this kernel's speed), then
// VADDPS into Z0 … Z7 (row i: Z(2i) columns 0–15, Z(2i+1) columns 16–31),
// and the three pointers advanced. The products are the same either way.
#define MICROSTEP512 \
	VMOVUPS      0(DI), Z8 \
	VMOVUPS      0(BX), Z9 \
	VMULPS.BCST  0(SI), Z8, Z11 \
	VMULPS.BCST  0(SI), Z9, Z12 \
	VMULPS.BCST  4(SI), Z8, Z14 \
	VMULPS.BCST  4(SI), Z9, Z15 \
	VADDPS       Z11, Z0, Z0 \
	VADDPS       Z12, Z1, Z1 \
	VMULPS.BCST  8(SI), Z8, Z17 \
	VMULPS.BCST  8(SI), Z9, Z18 \
	VADDPS       Z14, Z2, Z2 \
	VADDPS       Z15, Z3, Z3 \
	VMULPS.BCST  12(SI), Z8, Z20 \
	VMULPS.BCST  12(SI), Z9, Z21 \
	VADDPS       Z17, Z4, Z4 \
	VADDPS       Z18, Z5, Z5 \
	VADDPS       Z20, Z6, Z6 \
	VADDPS       Z21, Z7, Z7 \
	ADDQ         $16, SI \
	ADDQ         $64, DI \
	ADDQ         $64, BX

// func gemmMicro2CAVX512(kc int, a, b0, b1, c *float32, ldcBytes int, first bool, bias *float32)
//
// Two horizontally adjacent 4×16 tiles of gemmMicroCAVX2 in one pass, in
// AVX-512: columns 0–15 from the B panel b0, 16–31 from b1, rows c, c+ldc,
// c+2·ldc, c+3·ldc. Each lane is the same VMULPS then VADDPS chain as the
// AVX2 kernel and the Go loop (no fused multiply-add), so the bits are the
// same; 512-bit registers only double the lanes per instruction. bias, when
// not nil, holds the 32 columns' biases.
TEXT ·gemmMicro2CAVX512(SB), NOSPLIT, $0-64
	MOVQ    kc+0(FP), CX
	MOVQ    a+8(FP), SI
	MOVQ    b0+16(FP), DI
	MOVQ    b1+24(FP), BX
	MOVQ    c+32(FP), DX
	MOVQ    ldcBytes+40(FP), R8
	LEAQ    (DX)(R8*1), R9
	LEAQ    (R9)(R8*1), R10
	LEAQ    (R10)(R8*1), R11
	MOVBLZX first+48(FP), AX
	TESTQ   AX, AX
	JZ      c2load
	VPXORD  Z0, Z0, Z0
	VPXORD  Z1, Z1, Z1
	VPXORD  Z2, Z2, Z2
	VPXORD  Z3, Z3, Z3
	VPXORD  Z4, Z4, Z4
	VPXORD  Z5, Z5, Z5
	VPXORD  Z6, Z6, Z6
	VPXORD  Z7, Z7, Z7
	JMP     c2loop

c2load:
	VMOVUPS 0(DX), Z0
	VMOVUPS 64(DX), Z1
	VMOVUPS 0(R9), Z2
	VMOVUPS 64(R9), Z3
	VMOVUPS 0(R10), Z4
	VMOVUPS 64(R10), Z5
	VMOVUPS 0(R11), Z6
	VMOVUPS 64(R11), Z7

c2loop:
	MICROSTEP512
	DECQ    CX
	JNZ     c2loop

	MOVQ    bias+56(FP), AX
	TESTQ   AX, AX
	JZ      c2store
	VMOVUPS 0(AX), Z8
	VMOVUPS 64(AX), Z9
	VADDPS  Z8, Z0, Z0
	VADDPS  Z9, Z1, Z1
	VADDPS  Z8, Z2, Z2
	VADDPS  Z9, Z3, Z3
	VADDPS  Z8, Z4, Z4
	VADDPS  Z9, Z5, Z5
	VADDPS  Z8, Z6, Z6
	VADDPS  Z9, Z7, Z7

c2store:
	VMOVUPS Z0, 0(DX)
	VMOVUPS Z1, 64(DX)
	VMOVUPS Z2, 0(R9)
	VMOVUPS Z3, 64(R9)
	VMOVUPS Z4, 0(R10)
	VMOVUPS Z5, 64(R10)
	VMOVUPS Z6, 0(R11)
	VMOVUPS Z7, 64(R11)
	VZEROUPPER
	RET
