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

// func plainUsersAsm(a *plainArgs)
//
// runUsers's Go loop over users, for a plain slot: per user u, pPrev[u] = p, the record of the slot (when
// a.recSIR is not nil: best SIR, Tx power and target in dB, flags outage
// and at-max), the command 2·up − 1 into the delay line, the power step
// (p·lin[up] inside (pmin, pmax), with pDB ± step_db, else the limit and
// its dB value), pCur[u], the next slot's su[u] (the new power, the
// target, best 0, up 1) and the up and down counts. Scalar SSE2, the
// same operations in the same order as the Go loop. plainArgs and user
// offsets: TestLoopLayout.
TEXT ·plainUsersAsm(SB), NOSPLIT, $0-8
	MOVQ  a+0(FP), R11
	MOVQ  0(R11), SI    // users
	MOVQ  8(R11), CX    // n
	MOVQ  16(R11), R8   // su
	MOVQ  24(R11), R9   // pCur
	MOVQ  32(R11), R10  // cmds
	MOVSD 136(R11), X8  // marginLin
	MOVSD 144(R11), X9  // pAtMax
	MOVSD 88(R11), X10  // pmin
	MOVSD 96(R11), X11  // pmax
	XORQ  AX, AX        // ups
	XORQ  BX, BX        // downs
	XORQ  DX, DX        // u
	MOVQ  168(R11), R14
	SHLQ  $3, R14       // eight users' bytes
	TESTQ CX, CX
	JEQ   pdone

ploop:
	PREFETCHT0 (SI)(R14*1) // the user eight ahead (a hint; past the end it is dropped)
	MOVSD   16(R8), X0  // best SIR
	MOVBQZX 24(R8), R12 // up
	MOVSD   (SI), X1    // p
	MOVQ    176(R11), R13
	MOVSD   X1, (R13)(DX*8) // pPrev[u] = p
	MOVQ    40(R11), R13
	TESTQ   R13, R13
	JEQ     norec
	// The record is read a block later on the other core: streaming
	// stores (no read of the old lines; SFENCE at the end).
	MOVQ    X0, DI
	MOVNTIQ DI, (R13)(DX*8) // recSIR[u]
	MOVQ    48(R11), R13
	MOVQ    8(SI), DI
	MOVNTIQ DI, (R13)(DX*8) // recPDB[u] = pDB
	MOVQ    56(R11), R13
	MOVQ    24(SI), DI
	MOVNTIQ DI, (R13)(DX*8) // recTDB[u] = targetDB
	MOVSD   16(SI), X2
	MULSD   X8, X2      // target·marginLin
	XORL    R13, R13
	UCOMISD X2, X0      // best against target·marginLin: CF when below
	SETCS   R13B        // recOutage
	XORL    DI, DI
	UCOMISD X9, X1      // p against pAtMax: CF clear when at or above
	SETCC   DI
	SHLB    $1, DI      // recAtMax
	ORB     DI, R13
	MOVQ    64(R11), DI
	MOVB    R13B, (DI)(DX*1)

norec:
	LEAQ    -1(R12)(R12*1), R13 // cmd = 2·up − 1
	MOVB    R13B, (R10)
	MOVSD   X1, X3
	MULSD   72(R11)(R12*8), X3 // np = p·lin[up]
	UCOMISD X10, X3
	JLS     plimit      // np <= pmin
	UCOMISD X11, X3
	JCC     plimit      // np >= pmax
	MOVSD   X3, (SI)
	MOVSD   8(SI), X4
	ADDSD   120(R11)(R12*8), X4 // pDB ± step_db
	MOVSD   X4, 8(SI)
	JMP     pstepped

plimit:
	MOVSD 88(R11)(R12*8), X3
	MOVSD X3, (SI)      // p = lim[up]
	MOVSD 104(R11)(R12*8), X4
	MOVSD X4, 8(SI)     // pDB = limDB[up]

pstepped:
	MOVSD (SI), X3
	MOVSD X3, (R9)      // pCur[u]
	MOVSD X3, (R8)      // the next slot's su[u]: p, target, best 0, up 1
	MOVSD 16(SI), X4
	MOVSD X4, 8(R8)
	MOVQ  $0, 16(R8)
	MOVB  $1, 24(R8)
	ADDQ  R12, AX
	MOVQ  $1, R13
	SUBQ  R12, R13
	ADDQ  R13, BX
	ADDQ  168(R11), SI  // next user
	ADDQ  $32, R8
	ADDQ  $8, R9
	INCQ  R10
	INCQ  DX
	DECQ  CX
	JNE   ploop

pdone:
	SFENCE
	MOVQ AX, 152(R11)
	MOVQ BX, 160(R11)
	RET

// func legCorrectionsAsm(es *legEntry, n int, corr, p, f *float64)
//
// legCorrectionsGo's loop: corr[c] += (p[u]·g)·(f[j] − 1) per leg, in list
// order, scalar SSE2: the same bits.
TEXT ·legCorrectionsAsm(SB), NOSPLIT, $0-40
	MOVQ  es+0(FP), SI
	MOVQ  n+8(FP), CX
	MOVQ  corr+16(FP), R9
	MOVQ  p+24(FP), R10
	MOVQ  f+32(FP), DI
	MOVSD $1.0, X7
	TESTQ CX, CX
	JEQ   cdone

cloop:
	MOVLQSX 16(SI), AX  // j
	MOVLQSX 20(SI), BX  // u
	MOVLQSX 24(SI), DX  // c
	MOVSD   (R10)(BX*8), X1
	MULSD   (SI), X1    // p·g
	MOVSD   (DI)(AX*8), X2
	SUBSD   X7, X2      // f − 1
	MULSD   X2, X1
	ADDSD   (R9)(DX*8), X1
	MOVSD   X1, (R9)(DX*8)
	ADDQ    $32, SI
	DECQ    CX
	JNE     cloop

cdone:
	RET
