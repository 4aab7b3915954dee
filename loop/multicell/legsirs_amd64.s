//go:build amd64 && !purego

#include "textflag.h"

// func legSIRsAsm(es *legEntry, n int, fk *float64, su *userSlot, own, rx, acc *float64, cnt *int32, pg, noise float64)
//
// legSIRsGo's loop without per-leg SIRs by rank (plain slots), scalar
// SSE2, the same operations in the same order, so the same bits:
// sig = (p·g)·f; own[c] += sig·own; sir = (pg·sig)/max(rx[c] − sig, noise);
// acc[j] += sir; cnt[j]++; best = max(best, sir); up &= (sir < tgt).
// MAXSD gives the larger operand, as the builtin max does for these
// finite, non-negative values. legEntry is {g, own float64; j, u, c, pos
// int32} (32 bytes), userSlot {p, tgt, best float64; up uint8} (32 bytes;
// TestLegLayout). The caller checks every index (legSIRs).
TEXT ·legSIRsAsm(SB), NOSPLIT, $0-80
	MOVQ  es+0(FP), SI
	MOVQ  n+8(FP), CX
	MOVQ  fk+16(FP), DI
	MOVQ  su+24(FP), R8
	MOVQ  own+32(FP), R9
	MOVQ  rx+40(FP), R10
	MOVQ  acc+48(FP), R11
	MOVQ  cnt+56(FP), R12
	MOVSD pg+64(FP), X12
	MOVSD noise+72(FP), X13
	TESTQ CX, CX
	JEQ   done

loop:
	MOVLQSX 16(SI), AX  // j
	MOVLQSX 20(SI), BX  // u
	MOVLQSX 24(SI), DX  // c
	SHLQ    $5, BX
	ADDQ    R8, BX      // &su[u]
	MOVSD   (BX), X1    // p
	MULSD   (SI), X1    // p·g
	MULSD   (DI)(AX*8), X1 // sig = (p·g)·f
	MOVSD   8(SI), X2
	MULSD   X1, X2      // sig·own
	ADDSD   (R9)(DX*8), X2
	MOVSD   X2, (R9)(DX*8)
	MOVSD   (R10)(DX*8), X3
	SUBSD   X1, X3      // rx[c] − sig
	MAXSD   X13, X3     // max(rx[c] − sig, noise)
	MOVSD   X12, X4
	MULSD   X1, X4      // pg·sig
	DIVSD   X3, X4      // sir
	MOVSD   (R11)(AX*8), X5
	ADDSD   X4, X5
	MOVSD   X5, (R11)(AX*8)
	INCL    (R12)(AX*4)
	MOVSD   16(BX), X6
	MAXSD   X4, X6      // max(best, sir)
	MOVSD   X6, 16(BX)
	XORL    R13, R13
	UCOMISD 8(BX), X4   // sir against tgt: CF when sir < tgt
	SETCS   R13B
	ANDB    R13B, 24(BX)
	ADDQ    $32, SI
	DECQ    CX
	JNE     loop

done:
	RET
