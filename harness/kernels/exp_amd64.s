//go:build amd64 && !noasm

#include "textflag.h"

// Softmax helpers, eight float32 lanes per block (exp.go has the Go twins).
// expc holds each constant of exp32 broadcast to 32 bytes (bit patterns of
// the float32 values in exp.go; bias is the int32 exponent bias 127).
#define EXPC(off, bits) \
	DATA expc<>+(off+0)(SB)/4, $bits; \
	DATA expc<>+(off+4)(SB)/4, $bits; \
	DATA expc<>+(off+8)(SB)/4, $bits; \
	DATA expc<>+(off+12)(SB)/4, $bits; \
	DATA expc<>+(off+16)(SB)/4, $bits; \
	DATA expc<>+(off+20)(SB)/4, $bits; \
	DATA expc<>+(off+24)(SB)/4, $bits; \
	DATA expc<>+(off+28)(SB)/4, $bits

EXPC(0, 0x3fb8aa3b)   // log2e
EXPC(32, 0x3f318000)  // C1
EXPC(64, 0xb95e8083)  // C2
EXPC(96, 0x39506967)  // P0
EXPC(128, 0x3ab743ce) // P1
EXPC(160, 0x3c088908) // P2
EXPC(192, 0x3d2aa9c1) // P3
EXPC(224, 0x3e2aaaaa) // P4
EXPC(256, 0x3f000000) // P5
EXPC(288, 0x3f800000) // 1
EXPC(320, 0xc2aeac50) // lo = ln 2^-126
EXPC(352, 0x0000007f) // bias 127
GLOBL expc<>(SB), RODATA|NOPTR, $384

// func expSumAVX2(dst, x *float32, n int, m float32, acc *[8]float64)
//
// Per block of eight: t = x − m; mask = t < lo; n = round-to-even(t·log2e);
// r = (t − n·C1) − n·C2; p = Horner(P0 … P5) in r; y = ((p·r²) + r) + 1;
// e = y·2^n, zeroed where mask; e is stored to dst when dst is not nil and
// widened to float64 into the lane sums (Y14: lanes 0–3, Y15: lanes 4–7).
// Every step is one VMULPS, VADDPS or VSUBPS, as exp32 rounds them.
TEXT ·expSumAVX2(SB), NOSPLIT, $0-40
	MOVQ         dst+0(FP), DX
	MOVQ         x+8(FP), SI
	MOVQ         n+16(FP), CX
	VBROADCASTSS m+24(FP), Y8
	MOVQ         acc+32(FP), R8
	VMOVUPD      (R8), Y14
	VMOVUPD      32(R8), Y15
	VMOVUPS      expc<>+320(SB), Y9
	VMOVUPS      expc<>+0(SB), Y10
	VMOVUPS      expc<>+32(SB), Y11
	VMOVUPS      expc<>+64(SB), Y12
	VMOVUPS      expc<>+96(SB), Y13
	XORQ         DI, DI

loop:
	VMOVUPS      (SI)(DI*4), Y0
	VSUBPS       Y8, Y0, Y0              // t = x - m
	VCMPPS       $1, Y9, Y0, Y7          // mask = t < lo
	VMULPS       Y10, Y0, Y1
	VROUNDPS     $0, Y1, Y1              // n
	VMULPS       Y11, Y1, Y2
	VSUBPS       Y2, Y0, Y0              // r = t - n*C1
	VMULPS       Y12, Y1, Y2
	VSUBPS       Y2, Y0, Y0              // r = r - n*C2
	VMULPS       Y0, Y0, Y4              // z = r*r
	VMULPS       Y13, Y0, Y3             // p = P0*r
	VADDPS       expc<>+128(SB), Y3, Y3  // + P1
	VMULPS       Y0, Y3, Y3
	VADDPS       expc<>+160(SB), Y3, Y3  // + P2
	VMULPS       Y0, Y3, Y3
	VADDPS       expc<>+192(SB), Y3, Y3  // + P3
	VMULPS       Y0, Y3, Y3
	VADDPS       expc<>+224(SB), Y3, Y3  // + P4
	VMULPS       Y0, Y3, Y3
	VADDPS       expc<>+256(SB), Y3, Y3  // + P5
	VMULPS       Y4, Y3, Y3              // p*z
	VADDPS       Y0, Y3, Y3              // + r
	VADDPS       expc<>+288(SB), Y3, Y3  // + 1
	VCVTPS2DQ    Y1, Y1                  // n is integral: exact
	VPADDD       expc<>+352(SB), Y1, Y1
	VPSLLD       $23, Y1, Y1             // 2^n
	VMULPS       Y1, Y3, Y3              // e = y * 2^n
	VANDNPS      Y3, Y7, Y3              // 0 where t < lo
	TESTQ        DX, DX
	JZ           nostore
	VMOVUPS      Y3, (DX)(DI*4)

nostore:
	VCVTPS2PD    X3, Y5
	VADDPD       Y5, Y14, Y14
	VEXTRACTF128 $1, Y3, X6
	VCVTPS2PD    X6, Y6
	VADDPD       Y6, Y15, Y15
	ADDQ         $8, DI
	CMPQ         DI, CX
	JLT          loop

	VMOVUPD      Y14, (R8)
	VMOVUPD      Y15, 32(R8)
	VZEROUPPER
	RET

// func maxLanesAVX2(x *float32, n int, lanes *[8]float32) bool
//
// Y0 starts as the first block; each block replaces a lane only when
// greater (VMAXPS with the new block first keeps Y0's lane on ties and on
// NaN); Y1 ORs each block's unordered mask, so any NaN sets it.
TEXT ·maxLanesAVX2(SB), NOSPLIT, $0-25
	MOVQ      x+0(FP), SI
	MOVQ      n+8(FP), CX
	MOVQ      lanes+16(FP), R8
	VMOVUPS   (SI), Y0
	VXORPS    Y1, Y1, Y1
	XORQ      DI, DI

mloop:
	VMOVUPS   (SI)(DI*4), Y2
	VCMPPS    $3, Y2, Y2, Y3
	VORPS     Y3, Y1, Y1
	VMAXPS    Y0, Y2, Y0
	ADDQ      $8, DI
	CMPQ      DI, CX
	JLT       mloop

	VMOVUPS   Y0, (R8)
	VMOVMSKPS Y1, AX
	TESTL     AX, AX
	SETNE     ret+24(FP)
	VZEROUPPER
	RET
