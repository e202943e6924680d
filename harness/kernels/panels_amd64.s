//go:build amd64 && !noasm

#include "textflag.h"

// Four-panel dot products, lanes = outputs. A panel stores sixteen outputs'
// weights per k contiguously, so each k needs two vector loads per panel
// and no shuffle: acc_{2q}, acc_{2q+1} (Y0 … Y7) hold panel q's sixteen
// outputs and advance in ascending k as acc = acc + float32(x[k]·w), the
// product rounded by VMULPS and then added by VADDPS (never a fused
// multiply-add): the row-dot path's order and rounding, output by output.
//
// Register use: AX, BX, R8, R9 hold the four panel starts, SI holds x, DI
// the index k, CX the end n, DX the byte offset of row k in a panel. Each
// iteration prefetches every stream 2048 bytes ahead: on the development
// machine (Zen 2) that took a DRAM-resident 3072×768 f16 product from 17 to
// about 30 GB/s on one thread, where 512 and 1024 bytes gained less
// (PERF_NOTES.md). A prefetch past a panel's end never faults. The
// 512-bit kernels below do not prefetch (see there).

// PANELARGS fills AX, BX, R8, R9 (the panels), SI (x) and CX (n), zeroes
// DI and DX, and leaves acc in R13.
#define PANELARGS \
	MOVQ p+0(FP), R13; \
	MOVQ 0(R13), AX; \
	MOVQ 8(R13), BX; \
	MOVQ 16(R13), R8; \
	MOVQ 24(R13), R9; \
	MOVQ x+8(FP), SI; \
	MOVQ n+16(FP), CX; \
	MOVQ acc+24(FP), R13; \
	XORQ DI, DI; \
	XORQ DX, DX

// LOADPANELS is PANELARGS, then the accumulators loaded from acc.
#define LOADPANELS \
	PANELARGS; \
	VMOVUPS 0(R13), Y0; \
	VMOVUPS 32(R13), Y1; \
	VMOVUPS 64(R13), Y2; \
	VMOVUPS 96(R13), Y3; \
	VMOVUPS 128(R13), Y4; \
	VMOVUPS 160(R13), Y5; \
	VMOVUPS 192(R13), Y6; \
	VMOVUPS 224(R13), Y7

// STOREPANELS writes the accumulators back to acc.
#define STOREPANELS \
	MOVQ    acc+24(FP), R13; \
	VMOVUPS Y0, 0(R13); \
	VMOVUPS Y1, 32(R13); \
	VMOVUPS Y2, 64(R13); \
	VMOVUPS Y3, 96(R13); \
	VMOVUPS Y4, 128(R13); \
	VMOVUPS Y5, 160(R13); \
	VMOVUPS Y6, 192(R13); \
	VMOVUPS Y7, 224(R13); \
	VZEROUPPER

// MACPAIR multiplies the two widened halves H0, H1 of one panel row by the
// broadcast x[k] in Y8 and adds them to the accumulators A0, A1.
#define MACPAIR(H0, H1, A0, A1) \
	VMULPS Y8, H0, H0; \
	VMULPS Y8, H1, H1; \
	VADDPS H0, A0, A0; \
	VADDPS H1, A1, A1

// PANELSTEP advances the accumulators by one k: it prefetches each stream
// 2048 bytes ahead, broadcasts x[k] into Y8, widens each panel's sixteen
// weights with LOAD (two vectors, the second HALF bytes on), multiplies and
// adds them (MACPAIR), then moves DX on by STEP bytes (one panel row).
#define PANELSTEP(LOAD, HALF, STEP) \
	PREFETCHT0   2048(AX)(DX*1); \
	PREFETCHT0   2048(BX)(DX*1); \
	PREFETCHT0   2048(R8)(DX*1); \
	PREFETCHT0   2048(R9)(DX*1); \
	VBROADCASTSS (SI)(DI*4), Y8; \
	LOAD(0(AX)(DX*1), Y9); \
	LOAD(HALF(AX)(DX*1), Y10); \
	LOAD(0(BX)(DX*1), Y11); \
	LOAD(HALF(BX)(DX*1), Y12); \
	MACPAIR(Y9, Y10, Y0, Y1); \
	MACPAIR(Y11, Y12, Y2, Y3); \
	LOAD(0(R8)(DX*1), Y9); \
	LOAD(HALF(R8)(DX*1), Y10); \
	LOAD(0(R9)(DX*1), Y11); \
	LOAD(HALF(R9)(DX*1), Y12); \
	MACPAIR(Y9, Y10, Y4, Y5); \
	MACPAIR(Y11, Y12, Y6, Y7); \
	ADDQ         $STEP, DX

// F32PANEL loads eight float32 weights at M into R.
#define F32PANEL(M, R) VMOVUPS M, R

// F16PANEL widens eight binary16 patterns at M into R, exactly (F16C).
#define F16PANEL(M, R) VCVTPH2PS M, R

// BF16PANEL widens eight bfloat16 patterns at M into the float32 lanes of R:
// zero-extend to 32 bits, then shift into the upper half (exact).
#define BF16PANEL(M, R) \
	VPMOVZXWD M, R; \
	VPSLLD    $16, R, R

// func panelDot4F32AVX2(p *[4]*float32, x *float32, n int, acc *[64]float32)
TEXT ·panelDot4F32AVX2(SB), NOSPLIT, $0-32
	LOADPANELS

f32loop:
	PANELSTEP(F32PANEL, 32, 64)
	INCQ DI
	CMPQ DI, CX
	JLT  f32loop

	STOREPANELS
	RET

// func panelDot4F16AVX2(p *[4]*uint16, x *float32, n int, acc *[64]float32)
//
// The panels hold binary16 bit patterns.
TEXT ·panelDot4F16AVX2(SB), NOSPLIT, $0-32
	LOADPANELS

f16loop:
	PANELSTEP(F16PANEL, 16, 32)
	INCQ DI
	CMPQ DI, CX
	JLT  f16loop

	STOREPANELS
	RET

// func panelDot4BF16AVX2(p *[4]*uint16, x *float32, n int, acc *[64]float32)
//
// The panels hold bfloat16 bit patterns (the upper halves of binary32 values).
TEXT ·panelDot4BF16AVX2(SB), NOSPLIT, $0-32
	LOADPANELS

bf16loop:
	PANELSTEP(BF16PANEL, 16, 32)
	INCQ DI
	CMPQ DI, CX
	JLT  bf16loop

	STOREPANELS
	RET

// Four-panel dot products in 512-bit registers (where the CPU has
// AVX-512): each panel's sixteen outputs are one accumulator (Z0 … Z3),
// widened sixteen weights at a time, with the same per-lane VMULPS then
// VADDPS in ascending k as the AVX2 kernels above, so the same bits. Same
// register use as PANELSTEP, but no software prefetch: on the Zen 4
// machine of session 9 the four PREFETCHT0 per k (one per 32 bytes of each
// f16 stream) held a decode step's weight stream from memory at 24–27
// GB/s on two threads, and without them it read 27–32 GB/s, as fast as a
// plain read-only pass there; the hardware prefetchers follow the four
// streams alone (PERF_NOTES.md).

// PANELSTEP512 advances Z0 … Z3 by one k; LOAD widens sixteen weights of a
// panel row into a register, STEP is the row's size in bytes.
#define PANELSTEP512(LOAD, STEP) \
	VBROADCASTSS (SI)(DI*4), Z8; \
	LOAD(0(AX)(DX*1), Z9); \
	LOAD(0(BX)(DX*1), Z10); \
	LOAD(0(R8)(DX*1), Z11); \
	LOAD(0(R9)(DX*1), Z12); \
	VMULPS       Z8, Z9, Z9; \
	VMULPS       Z8, Z10, Z10; \
	VMULPS       Z8, Z11, Z11; \
	VMULPS       Z8, Z12, Z12; \
	VADDPS       Z9, Z0, Z0; \
	VADDPS       Z10, Z1, Z1; \
	VADDPS       Z11, Z2, Z2; \
	VADDPS       Z12, Z3, Z3; \
	ADDQ         $STEP, DX

// LOADPANELS512 is LOADPANELS with the four accumulators in Z0 … Z3.
#define LOADPANELS512 \
	PANELARGS; \
	VMOVUPS 0(R13), Z0; \
	VMOVUPS 64(R13), Z1; \
	VMOVUPS 128(R13), Z2; \
	VMOVUPS 192(R13), Z3

// STOREPANELS512 writes Z0 … Z3 back to acc.
#define STOREPANELS512 \
	MOVQ    acc+24(FP), R13; \
	VMOVUPS Z0, 0(R13); \
	VMOVUPS Z1, 64(R13); \
	VMOVUPS Z2, 128(R13); \
	VMOVUPS Z3, 192(R13); \
	VZEROUPPER

// F32PANEL512 loads sixteen float32 weights at M into R.
#define F32PANEL512(M, R) VMOVUPS M, R

// F16PANEL512 widens sixteen binary16 patterns at M into R, exactly.
#define F16PANEL512(M, R) VCVTPH2PS M, R

// BF16PANEL512 widens sixteen bfloat16 patterns at M into R (exact).
#define BF16PANEL512(M, R) \
	VPMOVZXWD M, R; \
	VPSLLD    $16, R, R

// func panelDot4F32AVX512(p *[4]*float32, x *float32, n int, acc *[64]float32)
TEXT ·panelDot4F32AVX512(SB), NOSPLIT, $0-32
	LOADPANELS512

f32z:
	PANELSTEP512(F32PANEL512, 64)
	INCQ DI
	CMPQ DI, CX
	JLT  f32z

	STOREPANELS512
	RET

// func panelDot4F16AVX512(p *[4]*uint16, x *float32, n int, acc *[64]float32)
TEXT ·panelDot4F16AVX512(SB), NOSPLIT, $0-32
	LOADPANELS512

f16z:
	PANELSTEP512(F16PANEL512, 32)
	INCQ DI
	CMPQ DI, CX
	JLT  f16z

	STOREPANELS512
	RET

// func panelDot4BF16AVX512(p *[4]*uint16, x *float32, n int, acc *[64]float32)
TEXT ·panelDot4BF16AVX512(SB), NOSPLIT, $0-32
	LOADPANELS512

bf16z:
	PANELSTEP512(BF16PANEL512, 32)
	INCQ DI
	CMPQ DI, CX
	JLT  bf16z

	STOREPANELS512
	RET

// func panelDot4F16IdxAVX512(p *[4]*uint16, x *float32, n int, acc *[64]float32, kidx *int32)
//
// panelDot4F16AVX512 over the panel rows kidx[0] … kidx[n-1] (ascending)
// instead of 0 … n-1, x[j] being row kidx[j]'s input: acc[16q+i] +=
// x[j]·P_q[kidx[j]][i] for j ascending, VMULPS then VADDPS, so the bits of
// the run-by-run calls over the same rows.
TEXT ·panelDot4F16IdxAVX512(SB), NOSPLIT, $0-40
	LOADPANELS512
	MOVQ kidx+32(FP), R10

f16idx:
	MOVLQSX (R10)(DI*4), DX
	SHLQ    $5, DX
	PANELSTEP512(F16PANEL512, 0)
	INCQ    DI
	CMPQ    DI, CX
	JLT     f16idx

	STOREPANELS512
	RET
