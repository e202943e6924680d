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
