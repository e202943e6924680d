//go:build amd64 && !noasm

#include "textflag.h"

// Eight-row dot products, lanes = rows. Each kernel advances eight
// accumulators acc[q] (lane q of Y15) over k < n, n a positive multiple of
// 8, in ascending k: acc[q] = acc[q] + float32(x[k]·w_q[k]), the product
// rounded by VMULPS and then added by VADDPS (never a fused multiply-add),
// which is dotAcc's order and rounding lane by lane.
//
// Register use: AX, BX, DX, R8 … R12 hold the eight row starts (rows 0 … 7),
// SI holds x, DI the element index k, CX the end n. Per block of eight k the
// rows are brought into the split layout
//
//	A_i = [ w_i[k..k+3]   | w_{i+4}[k..k+3]   ]   (i = 0 … 3)
//	B_i = [ w_i[k+4..k+7] | w_{i+4}[k+4..k+7] ]
//
// and each group of four is transposed inside its 128-bit lanes, which
// leaves one vector per k holding w_0[k] … w_7[k] in lanes 0 … 7.

// LOADROWS fills R8 … R12, AX, BX, DX with the eight row pointers at
// rows+0(FP), SI with x, CX with n, zeroes DI and loads the accumulators.
#define LOADROWS \
	MOVQ    rows+0(FP), R13; \
	MOVQ    0(R13), AX; \
	MOVQ    8(R13), BX; \
	MOVQ    16(R13), DX; \
	MOVQ    24(R13), R8; \
	MOVQ    32(R13), R9; \
	MOVQ    40(R13), R10; \
	MOVQ    48(R13), R11; \
	MOVQ    56(R13), R12; \
	MOVQ    x+8(FP), SI; \
	MOVQ    n+16(FP), CX; \
	MOVQ    acc+24(FP), R13; \
	VMOVUPS (R13), Y15; \
	XORQ    DI, DI

// STOREACC writes the accumulators back.
#define STOREACC \
	MOVQ    acc+24(FP), R13; \
	VMOVUPS Y15, (R13); \
	VZEROUPPER

// MAC4ACC transposes the split-layout group A0 … A3 (four consecutive k)
// in its lanes and adds x[k+j]·column_j to the accumulators in ACC for
// j = 0 … 3, in order; O0 … O3 are the byte offsets of those x values from
// x[k]. Clobbers A0 … A3 and Y8 … Y13.
#define MAC4ACC(A0, A1, A2, A3, O0, O1, O2, O3, ACC) \
	VUNPCKLPS    A1, A0, Y8; \
	VUNPCKHPS    A1, A0, Y9; \
	VUNPCKLPS    A3, A2, Y10; \
	VUNPCKHPS    A3, A2, Y11; \
	VSHUFPS      $0x44, Y10, Y8, A0; \
	VSHUFPS      $0xEE, Y10, Y8, A1; \
	VSHUFPS      $0x44, Y11, Y9, A2; \
	VSHUFPS      $0xEE, Y11, Y9, A3; \
	VBROADCASTSS O0(SI)(DI*4), Y12; \
	VBROADCASTSS O1(SI)(DI*4), Y13; \
	VMULPS       A0, Y12, Y12; \
	VMULPS       A1, Y13, Y13; \
	VADDPS       Y12, ACC, ACC; \
	VADDPS       Y13, ACC, ACC; \
	VBROADCASTSS O2(SI)(DI*4), Y12; \
	VBROADCASTSS O3(SI)(DI*4), Y13; \
	VMULPS       A2, Y12, Y12; \
	VMULPS       A3, Y13, Y13; \
	VADDPS       Y12, ACC, ACC; \
	VADDPS       Y13, ACC, ACC

// MAC4 is MAC4ACC into the eight-row kernels' accumulator Y15.
#define MAC4(A0, A1, A2, A3, O0, O1, O2, O3) MAC4ACC(A0, A1, A2, A3, O0, O1, O2, O3, Y15)

// SPLIT turns two converted full rows LO = w_i[k..k+7] and HI =
// w_{i+4}[k..k+7] into the split-layout pair A (k..k+3) and B (k+4..k+7).
#define SPLIT(LO, HI, A, B) \
	VPERM2F128 $0x20, HI, LO, A; \
	VPERM2F128 $0x31, HI, LO, B

// func dot8F32AVX2(rows *[8]*float32, x *float32, n int, acc *[8]float32)
TEXT ·dot8F32AVX2(SB), NOSPLIT, $0-32
	LOADROWS

f32loop:
	VMOVUPS     (AX)(DI*4), X0
	VINSERTF128 $1, (R9)(DI*4), Y0, Y0
	VMOVUPS     (BX)(DI*4), X1
	VINSERTF128 $1, (R10)(DI*4), Y1, Y1
	VMOVUPS     (DX)(DI*4), X2
	VINSERTF128 $1, (R11)(DI*4), Y2, Y2
	VMOVUPS     (R8)(DI*4), X3
	VINSERTF128 $1, (R12)(DI*4), Y3, Y3
	VMOVUPS     16(AX)(DI*4), X4
	VINSERTF128 $1, 16(R9)(DI*4), Y4, Y4
	VMOVUPS     16(BX)(DI*4), X5
	VINSERTF128 $1, 16(R10)(DI*4), Y5, Y5
	VMOVUPS     16(DX)(DI*4), X6
	VINSERTF128 $1, 16(R11)(DI*4), Y6, Y6
	VMOVUPS     16(R8)(DI*4), X7
	VINSERTF128 $1, 16(R12)(DI*4), Y7, Y7
	MAC4(Y0, Y1, Y2, Y3, 0, 4, 8, 12)
	MAC4(Y4, Y5, Y6, Y7, 16, 20, 24, 28)
	ADDQ        $8, DI
	CMPQ        DI, CX
	JLT         f32loop

	STOREACC
	RET

// func dot8F16AVX2(rows *[8]*uint16, x *float32, n int, acc *[8]float32)
//
// The rows hold binary16 bit patterns, widened exactly by VCVTPH2PS (F16C).
TEXT ·dot8F16AVX2(SB), NOSPLIT, $0-32
	LOADROWS

f16loop:
	VCVTPH2PS (AX)(DI*2), Y8
	VCVTPH2PS (R9)(DI*2), Y9
	VCVTPH2PS (BX)(DI*2), Y10
	VCVTPH2PS (R10)(DI*2), Y11
	SPLIT(Y8, Y9, Y0, Y4)
	SPLIT(Y10, Y11, Y1, Y5)
	VCVTPH2PS (DX)(DI*2), Y8
	VCVTPH2PS (R11)(DI*2), Y9
	VCVTPH2PS (R8)(DI*2), Y10
	VCVTPH2PS (R12)(DI*2), Y11
	SPLIT(Y8, Y9, Y2, Y6)
	SPLIT(Y10, Y11, Y3, Y7)
	MAC4(Y0, Y1, Y2, Y3, 0, 4, 8, 12)
	MAC4(Y4, Y5, Y6, Y7, 16, 20, 24, 28)
	ADDQ      $8, DI
	CMPQ      DI, CX
	JLT       f16loop

	STOREACC
	RET

// BF16ROW widens eight bfloat16 patterns at M into the float32 lanes of R:
// zero-extend to 32 bits, then shift into the upper half (exact).
#define BF16ROW(M, R) \
	VPMOVZXWD M, R; \
	VPSLLD    $16, R, R

// func dot8BF16AVX2(rows *[8]*uint16, x *float32, n int, acc *[8]float32)
//
// The rows hold bfloat16 bit patterns (the upper halves of binary32 values).
TEXT ·dot8BF16AVX2(SB), NOSPLIT, $0-32
	LOADROWS

bf16loop:
	BF16ROW((AX)(DI*2), Y8)
	BF16ROW((R9)(DI*2), Y9)
	BF16ROW((BX)(DI*2), Y10)
	BF16ROW((R10)(DI*2), Y11)
	SPLIT(Y8, Y9, Y0, Y4)
	SPLIT(Y10, Y11, Y1, Y5)
	BF16ROW((DX)(DI*2), Y8)
	BF16ROW((R11)(DI*2), Y9)
	BF16ROW((R8)(DI*2), Y10)
	BF16ROW((R12)(DI*2), Y11)
	SPLIT(Y8, Y9, Y2, Y6)
	SPLIT(Y10, Y11, Y3, Y7)
	MAC4(Y0, Y1, Y2, Y3, 0, 4, 8, 12)
	MAC4(Y4, Y5, Y6, Y7, 16, 20, 24, 28)
	ADDQ $8, DI
	CMPQ DI, CX
	JLT  bf16loop

	STOREACC
	RET

// Sixteen-row kernels: two groups of eight rows, each with its own
// accumulator (Y15 for rows 0 … 7, Y14 for rows 8 … 15), so that two
// independent addition chains are in flight where the eight-row kernels
// have one. Lane by lane the order and rounding are dot8F16AVX2's. The
// row pointers are reloaded from rows (R13) for each group of each block
// of eight k; AX, BX, DX, R8 … R12 hold the current group's rows.

// GROUPPTRS loads the eight row pointers of the group at byte offset OFF
// of the rows array (R13).
#define GROUPPTRS(OFF) \
	MOVQ OFF+0(R13), AX; \
	MOVQ OFF+8(R13), BX; \
	MOVQ OFF+16(R13), DX; \
	MOVQ OFF+24(R13), R8; \
	MOVQ OFF+32(R13), R9; \
	MOVQ OFF+40(R13), R10; \
	MOVQ OFF+48(R13), R11; \
	MOVQ OFF+56(R13), R12

// F16GROUP widens eight k of the current group's binary16 rows, brings
// them into the split layout and adds them into ACC.
#define F16GROUP(ACC) \
	VCVTPH2PS (AX)(DI*2), Y8; \
	VCVTPH2PS (R9)(DI*2), Y9; \
	VCVTPH2PS (BX)(DI*2), Y10; \
	VCVTPH2PS (R10)(DI*2), Y11; \
	SPLIT(Y8, Y9, Y0, Y4); \
	SPLIT(Y10, Y11, Y1, Y5); \
	VCVTPH2PS (DX)(DI*2), Y8; \
	VCVTPH2PS (R11)(DI*2), Y9; \
	VCVTPH2PS (R8)(DI*2), Y10; \
	VCVTPH2PS (R12)(DI*2), Y11; \
	SPLIT(Y8, Y9, Y2, Y6); \
	SPLIT(Y10, Y11, Y3, Y7); \
	MAC4ACC(Y0, Y1, Y2, Y3, 0, 4, 8, 12, ACC); \
	MAC4ACC(Y4, Y5, Y6, Y7, 16, 20, 24, 28, ACC)

// BF16GROUP is F16GROUP for bfloat16 rows.
#define BF16GROUP(ACC) \
	BF16ROW((AX)(DI*2), Y8); \
	BF16ROW((R9)(DI*2), Y9); \
	BF16ROW((BX)(DI*2), Y10); \
	BF16ROW((R10)(DI*2), Y11); \
	SPLIT(Y8, Y9, Y0, Y4); \
	SPLIT(Y10, Y11, Y1, Y5); \
	BF16ROW((DX)(DI*2), Y8); \
	BF16ROW((R11)(DI*2), Y9); \
	BF16ROW((R8)(DI*2), Y10); \
	BF16ROW((R12)(DI*2), Y11); \
	SPLIT(Y8, Y9, Y2, Y6); \
	SPLIT(Y10, Y11, Y3, Y7); \
	MAC4ACC(Y0, Y1, Y2, Y3, 0, 4, 8, 12, ACC); \
	MAC4ACC(Y4, Y5, Y6, Y7, 16, 20, 24, 28, ACC)

// LOAD16 sets R13 to rows, SI to x, CX to n, zeroes DI and loads the two
// accumulators from acc.
#define LOAD16 \
	MOVQ    acc+24(FP), R13; \
	VMOVUPS (R13), Y15; \
	VMOVUPS 32(R13), Y14; \
	MOVQ    rows+0(FP), R13; \
	MOVQ    x+8(FP), SI; \
	MOVQ    n+16(FP), CX; \
	XORQ    DI, DI

// STORE16 writes the two accumulators back.
#define STORE16 \
	MOVQ    acc+24(FP), R13; \
	VMOVUPS Y15, (R13); \
	VMOVUPS Y14, 32(R13); \
	VZEROUPPER

// func dot16F16AVX2(rows *[16]*uint16, x *float32, n int, acc *[16]float32)
TEXT ·dot16F16AVX2(SB), NOSPLIT, $0-32
	LOAD16

f16loop16:
	GROUPPTRS(0)
	F16GROUP(Y15)
	GROUPPTRS(64)
	F16GROUP(Y14)
	ADDQ $8, DI
	CMPQ DI, CX
	JLT  f16loop16

	STORE16
	RET

// func dot16BF16AVX2(rows *[16]*uint16, x *float32, n int, acc *[16]float32)
TEXT ·dot16BF16AVX2(SB), NOSPLIT, $0-32
	LOAD16

bf16loop16:
	GROUPPTRS(0)
	BF16GROUP(Y15)
	GROUPPTRS(64)
	BF16GROUP(Y14)
	ADDQ $8, DI
	CMPQ DI, CX
	JLT  bf16loop16

	STORE16
	RET

// Thirty-two-row binary16 kernel in AVX-512: two groups of sixteen rows,
// each with one 512-bit accumulator (Z16 for rows 0 … 15, Z17 for rows
// 16 … 31), lanes = rows. Lane by lane the order and rounding are
// dot8F16AVX2's: acc[q] = acc[q] + float32(x[k]·w_q[k]) in ascending k,
// VMULPS then VADDPS.
//
// The transpose runs on the binary16 values before they are widened, so
// it moves half the bytes: for a group, Y0 … Y7 are loaded as
//
//	Y_i = [ w_i[k..k+7] | w_{i+8}[k..k+7] ]   (i = 0 … 7, 16-bit words)
//
// and three rounds of in-lane unpacks (words, double words, quad words)
// transpose both 8×8 halves at once, leaving one register per k with
// w_0[k] … w_7[k] in its low half and w_8[k] … w_15[k] in its high half;
// VCVTPH2PS widens it to sixteen lanes in row order. Each multiply reads
// its x value through an embedded broadcast (GROUP16MAC).

// ROWPAIR loads eight k (at element DI) of the rows whose pointers sit at
// byte offsets LO and HI of the rows array (R13) into the low and high
// halves of Y (X its low half).
#define ROWPAIR(LO, HI, X, Y) \
	MOVQ        LO(R13), AX; \
	MOVQ        HI(R13), BX; \
	VMOVDQU     (AX)(DI*2), X; \
	VINSERTI128 $1, (BX)(DI*2), Y, Y

// GROUP16LOAD loads rows OFF/8 … OFF/8+15 of the rows array (R13) at
// element DI into Y0 … Y7: row i and row i+8 into Y_i.
#define GROUP16LOAD(OFF) \
	ROWPAIR(OFF+0, OFF+64, X0, Y0); \
	ROWPAIR(OFF+8, OFF+72, X1, Y1); \
	ROWPAIR(OFF+16, OFF+80, X2, Y2); \
	ROWPAIR(OFF+24, OFF+88, X3, Y3); \
	ROWPAIR(OFF+32, OFF+96, X4, Y4); \
	ROWPAIR(OFF+40, OFF+104, X5, Y5); \
	ROWPAIR(OFF+48, OFF+112, X6, Y6); \
	ROWPAIR(OFF+56, OFF+120, X7, Y7)

// GROUP16MAC transposes Y0 … Y7 (GROUP16LOAD's layout), widens each k's
// sixteen values and adds x[k+j]·column_j into ACC for j = 0 … 7, in
// order, each x[k+j] broadcast from SI+4·DI within its VMULPS (the EVEX
// embedded broadcast: on AMD Zen 4 a VBROADCASTSS into a 512-bit register
// costs vector-pipe slots, which bind this kernel). Clobbers Y0 … Y15 (and
// Z0 … Z7).
#define GROUP16MAC(ACC) \
	VPUNPCKLWD   Y1, Y0, Y8; \
	VPUNPCKHWD   Y1, Y0, Y9; \
	VPUNPCKLWD   Y3, Y2, Y10; \
	VPUNPCKHWD   Y3, Y2, Y11; \
	VPUNPCKLWD   Y5, Y4, Y12; \
	VPUNPCKHWD   Y5, Y4, Y13; \
	VPUNPCKLWD   Y7, Y6, Y14; \
	VPUNPCKHWD   Y7, Y6, Y15; \
	VPUNPCKLDQ   Y10, Y8, Y0; \
	VPUNPCKHDQ   Y10, Y8, Y1; \
	VPUNPCKLDQ   Y11, Y9, Y2; \
	VPUNPCKHDQ   Y11, Y9, Y3; \
	VPUNPCKLDQ   Y14, Y12, Y4; \
	VPUNPCKHDQ   Y14, Y12, Y5; \
	VPUNPCKLDQ   Y15, Y13, Y6; \
	VPUNPCKHDQ   Y15, Y13, Y7; \
	VPUNPCKLQDQ  Y4, Y0, Y8; \
	VPUNPCKHQDQ  Y4, Y0, Y9; \
	VPUNPCKLQDQ  Y5, Y1, Y10; \
	VPUNPCKHQDQ  Y5, Y1, Y11; \
	VPUNPCKLQDQ  Y6, Y2, Y12; \
	VPUNPCKHQDQ  Y6, Y2, Y13; \
	VPUNPCKLQDQ  Y7, Y3, Y14; \
	VPUNPCKHQDQ  Y7, Y3, Y15; \
	VCVTPH2PS    Y8, Z0; \
	VCVTPH2PS    Y9, Z1; \
	VCVTPH2PS    Y10, Z2; \
	VCVTPH2PS    Y11, Z3; \
	VCVTPH2PS    Y12, Z4; \
	VCVTPH2PS    Y13, Z5; \
	VCVTPH2PS    Y14, Z6; \
	VCVTPH2PS    Y15, Z7; \
	VMULPS.BCST  0(SI)(DI*4), Z0, Z0; \
	VMULPS.BCST  4(SI)(DI*4), Z1, Z1; \
	VMULPS.BCST  8(SI)(DI*4), Z2, Z2; \
	VMULPS.BCST  12(SI)(DI*4), Z3, Z3; \
	VMULPS.BCST  16(SI)(DI*4), Z4, Z4; \
	VMULPS.BCST  20(SI)(DI*4), Z5, Z5; \
	VMULPS.BCST  24(SI)(DI*4), Z6, Z6; \
	VMULPS.BCST  28(SI)(DI*4), Z7, Z7; \
	VADDPS       Z0, ACC, ACC; \
	VADDPS       Z1, ACC, ACC; \
	VADDPS       Z2, ACC, ACC; \
	VADDPS       Z3, ACC, ACC; \
	VADDPS       Z4, ACC, ACC; \
	VADDPS       Z5, ACC, ACC; \
	VADDPS       Z6, ACC, ACC; \
	VADDPS       Z7, ACC, ACC

// func dot32F16AVX512(rows *[32]*uint16, x *float32, n int, acc *[32]float32)
TEXT ·dot32F16AVX512(SB), NOSPLIT, $0-32
	MOVQ    acc+24(FP), R13
	VMOVUPS (R13), Z16
	VMOVUPS 64(R13), Z17
	MOVQ    rows+0(FP), R13
	MOVQ    x+8(FP), SI
	MOVQ    n+16(FP), CX
	XORQ    DI, DI

f16loop32:
	GROUP16LOAD(0)
	GROUP16MAC(Z16)
	GROUP16LOAD(128)
	GROUP16MAC(Z17)
	ADDQ $8, DI
	CMPQ DI, CX
	JLT  f16loop32

	MOVQ    acc+24(FP), R13
	VMOVUPS Z16, (R13)
	VMOVUPS Z17, 64(R13)
	VZEROUPPER
	RET
