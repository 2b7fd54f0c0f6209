//go:build !purego

#include "textflag.h"

// pass5SSE2 is pass5 of fft.go with each complex value in one SSE2
// register (real part in the low half, imaginary in the high half): the
// same IEEE-754 double operations, per part, in the same order, so the
// same bits (TestPass5MatchesGo).
//
// The twiddle product v·w = (vr·wr − vi·wi) + i·(vr·wi + vi·wr) is
// (vr·wr, vi·wr) + (vi·(−wi), vr·wi), from the expanded table entry
// (wr, wr, −wi, wi). The register constants: X7 = (c1, c1), X8 = (c2, c2),
// X9 = (s1, s1), X10 = (s2, s2), X11 = (+0, −0) (flips the high half's
// sign).

#define TWIDDLE(V, OFF) \
	MOVUPD OFF(R10), X5; \
	MULPD  V, X5; \
	MOVUPD OFF+16(R10), X6; \
	SHUFPD $1, V, V; \
	MULPD  X6, V; \
	ADDPD  X5, V

// In: v0…v4 in X0…X4. Out: V0…V4 at (DX) + r·NS (R12 = NS, R13 = 3·NS).
#define BUTTERFLY \
	MOVAPD X1, X5; \
	ADDPD  X4, X5; \
	SUBPD  X4, X1; \
	MOVAPD X2, X6; \
	ADDPD  X3, X6; \
	SUBPD  X3, X2; \
	MOVAPD X0, X3; \
	ADDPD  X5, X3; \
	ADDPD  X6, X3; \
	MOVUPD X3, (DX); \
	MOVAPD X5, X3; \
	MULPD  X7, X3; \
	ADDPD  X0, X3; \
	MOVAPD X6, X4; \
	MULPD  X8, X4; \
	ADDPD  X4, X3; \
	MULPD  X8, X5; \
	ADDPD  X0, X5; \
	MULPD  X7, X6; \
	ADDPD  X6, X5; \
	MOVAPD X1, X0; \
	MULPD  X9, X0; \
	MOVAPD X2, X4; \
	MULPD  X10, X4; \
	ADDPD  X4, X0; \
	MULPD  X10, X1; \
	MULPD  X9, X2; \
	SUBPD  X2, X1; \
	SHUFPD $1, X0, X0; \
	XORPD  X11, X0; \
	MOVAPD X3, X2; \
	ADDPD  X0, X2; \
	MOVUPD X2, (DX)(R12*1); \
	SUBPD  X0, X3; \
	MOVUPD X3, (DX)(R12*4); \
	SHUFPD $1, X1, X1; \
	XORPD  X11, X1; \
	MOVAPD X5, X2; \
	ADDPD  X1, X2; \
	MOVUPD X2, (DX)(R12*2); \
	SUBPD  X1, X5; \
	MOVUPD X5, (DX)(R13*1)

#define LOAD \
	MOVUPD (AX), X0; \
	MOVUPD (AX)(BX*1), X1; \
	MOVUPD (AX)(BX*2), X2; \
	MOVUPD (AX)(R11*1), X3; \
	MOVUPD (AX)(BX*4), X4

// func pass5SSE2(in, out []complex128, twx []float64, ns, m int, k *[10]float64)
TEXT ·pass5SSE2(SB), NOSPLIT, $8-96
	MOVQ   k+88(FP), AX
	MOVUPD 0(AX), X7
	MOVUPD 16(AX), X8
	MOVUPD 32(AX), X9
	MOVUPD 48(AX), X10
	MOVUPD 64(AX), X11
	MOVQ   in_base+0(FP), SI
	MOVQ   out_base+24(FP), DI
	MOVQ   twx_base+48(FP), R8
	MOVQ   ns+72(FP), R9
	MOVQ   m+80(FP), BX
	TESTQ  BX, BX
	JEQ    done
	SHLQ   $4, BX             // M: bytes between a butterfly's inputs
	MOVQ   SI, AX
	ADDQ   BX, AX
	MOVQ   AX, end-8(SP)      // the end of the first inputs
	LEAQ   (BX)(BX*2), R11    // 3·M
	MOVQ   R9, R12
	SHLQ   $4, R12            // NS: bytes between a butterfly's outputs
	LEAQ   (R12)(R12*2), R13  // 3·NS
	CMPQ   R9, $1
	JEQ    plain

group:
	// one jq: ns butterflies, inputs and outputs consecutive
	MOVQ SI, AX
	MOVQ DI, DX
	MOVQ R8, R10
	MOVQ R9, CX

twiddled:
	LOAD
	TWIDDLE(X1, 0)
	TWIDDLE(X2, 32)
	TWIDDLE(X3, 64)
	TWIDDLE(X4, 96)
	BUTTERFLY
	ADDQ $16, AX
	ADDQ $16, DX
	ADDQ $128, R10
	DECQ CX
	JNZ  twiddled
	ADDQ R12, SI
	LEAQ (R12)(R12*4), AX
	ADDQ AX, DI
	CMPQ SI, end-8(SP)
	JLT  group
	RET

plain:
	// ns = 1: m butterflies without twiddles, outputs five apart
	MOVQ SI, AX
	MOVQ DI, DX
	MOVQ m+80(FP), CX

plainloop:
	LOAD
	BUTTERFLY
	ADDQ $16, AX
	ADDQ $80, DX
	DECQ CX
	JNZ  plainloop

done:
	RET
