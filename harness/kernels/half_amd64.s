//go:build amd64 && !noasm

#include "textflag.h"

// func f16ToF32F16C(dst *float32, src *uint16, n int)
//
// dst[i] = float32(binary16 src[i]) for i < n, n a multiple of 8: the
// reference is f16ToF32Go (every non-NaN value converts exactly).
TEXT ·f16ToF32F16C(SB), NOSPLIT, $0-24
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ n+16(FP), CX
	SHRQ $3, CX
	JZ   done

loop:
	VCVTPH2PS (SI), Y0
	VMOVUPS   Y0, (DI)
	ADDQ      $16, SI
	ADDQ      $32, DI
	DECQ      CX
	JNZ       loop

done:
	VZEROUPPER
	RET

// func bf16ToF32AVX2(dst *float32, src *uint16, n int)
//
// dst[i] = float32 with the bits src[i] << 16 for i < n, n a multiple of 8:
// the reference is bf16ToF32Go (exact for every pattern, NaN payloads
// included: a bfloat16 is the top half of a float32).
TEXT ·bf16ToF32AVX2(SB), NOSPLIT, $0-24
	MOVQ dst+0(FP), DI
	MOVQ src+8(FP), SI
	MOVQ n+16(FP), CX
	SHRQ $3, CX
	JZ   bf16done

bf16loop:
	VPMOVZXWD (SI), Y0
	VPSLLD    $16, Y0, Y0
	VMOVDQU   Y0, (DI)
	ADDQ      $16, SI
	ADDQ      $32, DI
	DECQ      CX
	JNZ       bf16loop

bf16done:
	VZEROUPPER
	RET

// func axpyF16AVX2(alpha float32, x *uint16, y *float32, n int)
//
// y[j] += alpha·float32(binary16 x[j]) for j < n (a multiple of 8): each
// half widened exactly (VCVTPH2PS), the product rounded (VMULPS), then added
// (VADDPS): the bits of converting first and running axpyAVX2.
TEXT ·axpyF16AVX2(SB), NOSPLIT, $0-32
	VBROADCASTSS alpha+0(FP), Y0
	MOVQ         x+8(FP), SI
	MOVQ         y+16(FP), DI
	MOVQ         n+24(FP), CX
	SHRQ         $3, CX
	JZ           axpyf16done

axpyf16loop:
	VCVTPH2PS (SI), Y1
	VMULPS    Y1, Y0, Y1
	VADDPS    (DI), Y1, Y1
	VMOVUPS   Y1, (DI)
	ADDQ      $16, SI
	ADDQ      $32, DI
	DECQ      CX
	JNZ       axpyf16loop

axpyf16done:
	VZEROUPPER
	RET

// func axpy4F16AVX2(alpha *[4]float32, x *[4]*uint16, y *float32, n int)
//
// For j < n (a multiple of 8): y[j] += alpha[0]·x0[j], then += alpha[1]·x1[j],
// then alpha[2]·x2[j], then alpha[3]·x3[j], each half widened exactly, each
// product rounded, then added: the bits of four axpyF16AVX2 calls in order.
// Reading four rows at once keeps four memory streams in flight.
TEXT ·axpy4F16AVX2(SB), NOSPLIT, $0-32
	MOVQ         alpha+0(FP), AX
	VBROADCASTSS 0(AX), Y0
	VBROADCASTSS 4(AX), Y1
	VBROADCASTSS 8(AX), Y2
	VBROADCASTSS 12(AX), Y3
	MOVQ         x+8(FP), BX
	MOVQ         0(BX), R8
	MOVQ         8(BX), R9
	MOVQ         16(BX), R10
	MOVQ         24(BX), R11
	MOVQ         y+16(FP), DI
	MOVQ         n+24(FP), CX
	SHRQ         $3, CX
	JZ           axpy4done
	XORQ         SI, SI

axpy4loop:
	VMOVUPS   (DI), Y4
	VCVTPH2PS (R8)(SI*1), Y5
	VMULPS    Y5, Y0, Y5
	VADDPS    Y5, Y4, Y4
	VCVTPH2PS (R9)(SI*1), Y6
	VMULPS    Y6, Y1, Y6
	VADDPS    Y6, Y4, Y4
	VCVTPH2PS (R10)(SI*1), Y7
	VMULPS    Y7, Y2, Y7
	VADDPS    Y7, Y4, Y4
	VCVTPH2PS (R11)(SI*1), Y8
	VMULPS    Y8, Y3, Y8
	VADDPS    Y8, Y4, Y4
	VMOVUPS   Y4, (DI)
	ADDQ      $16, SI
	ADDQ      $32, DI
	DECQ      CX
	JNZ       axpy4loop

axpy4done:
	VZEROUPPER
	RET

// func prefetchLines(p unsafe.Pointer, n int)
//
// PREFETCHT0 for every 64-byte line of [p, p+n): a hint, never a fault.
TEXT ·prefetchLines(SB), NOSPLIT, $0-16
	MOVQ p+0(FP), AX
	MOVQ n+8(FP), CX
	ADDQ AX, CX

pfloop:
	CMPQ       AX, CX
	JGE        pfdone
	PREFETCHT0 (AX)
	ADDQ       $64, AX
	JMP        pfloop

pfdone:
	RET
