//go:build amd64 && !purego

#include "textflag.h"

// ZIGHALF is zigFast32 on the half-word h in R13 (destroyed), into x:
// layer i = h & 255, position j = int32(h) >> 8, x = j·w, taken when
// uint32(j + k) < k2; else it jumps to stop.
#define ZIGHALF(x) \
	MOVBQZX  R13, AX; \
	SHLQ     $4, AX; \
	SARL     $8, R13; \
	XORPS    x, x; \
	CVTSL2SD R13, x; \
	MULSD    8(R12)(AX*1), x; \
	ADDL     0(R12)(AX*1), R13; \
	CMPL     R13, 4(R12)(AX*1); \
	JAE      stop

// func normsFastAsm(r *Stream, dst []float64) (n int, u uint64)
//
// normsFastGo (stream.go) step by step: per pair of dst, one step of
// xoshiro256** (Blackman & Vigna 2021) and zigFast32 on the word's low
// and high halves, zigTab32's entries being {k int32, k2 uint32, w
// float64}; it stops at the first half that zigFast32 does not take.
//
// Registers: R8-R11 the state s0-s3, SI dst, CX len(dst), BX n, R12
// &zigTab32, DX the word, AX, R13 and X0, X1 scratch, DI r at the ends.
TEXT ·normsFastAsm(SB), NOSPLIT, $0-48
	MOVQ r+0(FP), DI
	MOVQ dst_base+8(FP), SI
	MOVQ dst_len+16(FP), CX
	MOVQ 0(DI), R8
	MOVQ 8(DI), R9
	MOVQ 16(DI), R10
	MOVQ 24(DI), R11
	LEAQ ·zigTab32(SB), R12
	XORQ BX, BX
	XORQ DX, DX

loop:
	LEAQ 2(BX), AX
	CMPQ AX, CX
	JGT  done

	// out = rotl(s1·5, 7)·9; t = s1 << 17; s2 ^= s0; s3 ^= s1;
	// s1 ^= s2; s0 ^= s3; s2 ^= t; s3 = rotl(s3, 45).
	LEAQ (R9)(R9*4), DX
	ROLQ $7, DX
	LEAQ (DX)(DX*8), DX
	MOVQ R9, AX
	SHLQ $17, AX
	XORQ R8, R10
	XORQ R9, R11
	XORQ R10, R9
	XORQ R11, R8
	XORQ AX, R10
	ROLQ $45, R11

	// zigFast32 on the low half, then on the high one.
	MOVL DX, R13
	ZIGHALF(X0)
	MOVQ DX, R13
	SHRQ $32, R13
	ZIGHALF(X1)

	MOVSD X0, 0(SI)(BX*8)
	MOVSD X1, 8(SI)(BX*8)
	ADDQ  $2, BX
	JMP   loop

done:
	XORQ DX, DX

stop:
	MOVQ r+0(FP), DI
	MOVQ R8, 0(DI)
	MOVQ R9, 8(DI)
	MOVQ R10, 16(DI)
	MOVQ R11, 24(DI)
	MOVQ BX, n+32(FP)
	MOVQ DX, u+40(FP)
	RET
