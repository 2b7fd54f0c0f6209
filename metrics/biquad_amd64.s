//go:build !purego

#include "textflag.h"

// The pair kernels of biquad_amd64.go: biquad sections in direct form II
// transposed over two interleaved channels, one channel per half of an
// SSE2 register, so each instruction does the same IEEE-754 double
// operation for both channels that the Go kernels (run2x2Go, run1x2Go) do
// for each. Coefficients are stored twice (both halves), states as
// {s1 of both channels, s2 of both channels} per section.
//
// Per sample, per section, in the Go kernels' order:
//   y  = b0·x + s1
//   s1 = (b1·x − a1·y) + s2
//   s2 = b2·x − a2·y

// The first section: y (X1) from x (X0), states s1 (X3) and s2 (X4),
// coefficients b0, b1, b2, a1, a2 at 0, 16, 32, 48, 64(DI).
#define FIRST_SECTION \
	MOVUPD 0(DI), X1; \
	MULPD  X0, X1; \
	ADDPD  X3, X1; \
	MOVUPD 16(DI), X3; \
	MULPD  X0, X3; \
	MOVUPD 48(DI), X7; \
	MULPD  X1, X7; \
	SUBPD  X7, X3; \
	ADDPD  X4, X3; \
	MOVUPD 32(DI), X4; \
	MULPD  X0, X4; \
	MOVUPD 64(DI), X7; \
	MULPD  X1, X7; \
	SUBPD  X7, X4

// DIRECTION turns CX from samples into pairs and points SI and R8 (the
// step) at the first pair and the way through: forward from buf[0], or
// backward (BX ≠ 0) from the last pair. An empty buf jumps to skip.
#define DIRECTION(skip, loop) \
	SHRQ  $1, CX; \
	JZ    skip; \
	MOVQ  $16, R8; \
	TESTQ BX, BX; \
	JZ    loop; \
	MOVQ  CX, R9; \
	DECQ  R9; \
	SHLQ  $4, R9; \
	ADDQ  R9, SI; \
	MOVQ  $-16, R8

// func pair2SSE2(buf []float64, c *[20]float64, st *[8]float64, backward bool)
TEXT ·pair2SSE2(SB), NOSPLIT, $0-41
	MOVQ    buf_base+0(FP), SI
	MOVQ    buf_len+8(FP), CX
	MOVQ    c+24(FP), DI
	MOVQ    st+32(FP), DX
	MOVBQZX backward+40(FP), BX
	MOVUPD  0(DX), X3
	MOVUPD  16(DX), X4
	MOVUPD  32(DX), X5
	MOVUPD  48(DX), X6
	DIRECTION(done2, loop2)

loop2:
	MOVUPD (SI), X0
	FIRST_SECTION
	// second section: u (X2) from y (X1)
	MOVUPD 80(DI), X2
	MULPD  X1, X2
	ADDPD  X5, X2
	MOVUPD 96(DI), X5
	MULPD  X1, X5
	MOVUPD 128(DI), X7
	MULPD  X2, X7
	SUBPD  X7, X5
	ADDPD  X6, X5
	MOVUPD 112(DI), X6
	MULPD  X1, X6
	MOVUPD 144(DI), X7
	MULPD  X2, X7
	SUBPD  X7, X6
	MOVUPD X2, (SI)
	ADDQ   R8, SI
	DECQ   CX
	JNZ    loop2

	MOVUPD X3, 0(DX)
	MOVUPD X4, 16(DX)
	MOVUPD X5, 32(DX)
	MOVUPD X6, 48(DX)

done2:
	RET

// func pair1SSE2(buf []float64, c *[10]float64, st *[4]float64, backward bool)
TEXT ·pair1SSE2(SB), NOSPLIT, $0-41
	MOVQ    buf_base+0(FP), SI
	MOVQ    buf_len+8(FP), CX
	MOVQ    c+24(FP), DI
	MOVQ    st+32(FP), DX
	MOVBQZX backward+40(FP), BX
	MOVUPD  0(DX), X3
	MOVUPD  16(DX), X4
	DIRECTION(done1, loop1)

loop1:
	MOVUPD (SI), X0
	FIRST_SECTION
	MOVUPD X1, (SI)
	ADDQ   R8, SI
	DECQ   CX
	JNZ    loop1

	MOVUPD X3, 0(DX)
	MOVUPD X4, 16(DX)

done1:
	RET
