//go:build amd64 && !purego

#include "textflag.h"

// func users1Asm(a *slotSums)
//
// users1Go's loop over one slot's users: per user u, in order, o and m
// (outage and at-max flags as 0/1), blocks and block errors, the handover
// state li = min(legs, 3) − 1, e = SIR dB − target dB, and the sums
// out += o, mx += m, edge += edge_u, edgeMx += m·edge_u, legN[li] += 1,
// legOut[li] += o, legMx[li] += m, errS += e, errS2 += e·e, tx += pDB,
// and with per-user sums (a.users not nil) outage_u += o, txDBm_u += pDB:
// the Go loop's operations in its order, scalar SSE2, so the same bits.
// slotSums offsets: TestSlotSumsLayout.
TEXT ·users1Asm(SB), NOSPLIT, $0-8
	MOVQ  a+0(FP), R11
	MOVQ  0(R11), SI   // sirDB
	MOVQ  8(R11), R8   // tDB
	MOVQ  16(R11), R9  // pDB
	MOVQ  24(R11), R10 // edges
	MOVQ  32(R11), R12 // flags
	MOVQ  40(R11), R13 // nLegs
	MOVQ  48(R11), DI  // users (nil: none)
	MOVQ  56(R11), CX  // n
	MOVSD 64(R11), X0  // out
	MOVSD 72(R11), X1  // mx
	MOVSD 80(R11), X2  // edge
	MOVSD 88(R11), X3  // edgeMx
	MOVSD 96(R11), X4  // errS
	MOVSD 104(R11), X5 // errS2
	MOVSD 112(R11), X6 // tx
	MOVSD 120(R11), X7 // blocks
	MOVSD 128(R11), X8 // blockErrs
	MOVSD $1.0, X13
	XORQ  AX, AX
	TESTQ CX, CX
	JEQ   udone

uloop:
	MOVBQZX  (R12)(AX*1), DX // flags
	MOVQ     DX, BX
	ANDQ     $1, BX
	CVTSQ2SD BX, X9          // o
	MOVQ     DX, BX
	ANDQ     $2, BX
	SHRQ     $1, BX
	CVTSQ2SD BX, X10         // m
	MOVQ     DX, BX
	ANDQ     $4, BX
	SHRQ     $2, BX
	CVTSQ2SD BX, X11
	ADDSD    X11, X7         // blocks
	ANDQ     $8, DX
	SHRQ     $3, DX
	CVTSQ2SD DX, X11
	ADDSD    X11, X8         // blockErrs
	MOVBQSX  (R13)(AX*1), BX // legs
	MOVQ     $3, DX
	CMPQ     BX, DX
	CMOVQGT  DX, BX
	DECQ     BX              // li
	MOVSD    (SI)(AX*8), X11
	SUBSD    (R8)(AX*8), X11 // e
	ADDSD    X9, X0          // out
	ADDSD    X10, X1         // mx
	MOVSD    (R10)(AX*8), X12
	ADDSD    X12, X2         // edge
	MULSD    X10, X12
	ADDSD    X12, X3         // edgeMx
	MOVSD    136(R11)(BX*8), X12
	ADDSD    X13, X12
	MOVSD    X12, 136(R11)(BX*8) // legN[li]
	MOVSD    160(R11)(BX*8), X12
	ADDSD    X9, X12
	MOVSD    X12, 160(R11)(BX*8) // legOut[li]
	MOVSD    184(R11)(BX*8), X12
	ADDSD    X10, X12
	MOVSD    X12, 184(R11)(BX*8) // legMx[li]
	ADDSD    X11, X4         // errS
	MULSD    X11, X11
	ADDSD    X11, X5         // errS2
	MOVSD    (R9)(AX*8), X12
	ADDSD    X12, X6         // tx
	TESTQ    DI, DI
	JEQ      unext
	MOVQ     AX, BX
	SHLQ     $5, BX
	MOVSD    8(DI)(BX*1), X11
	ADDSD    X9, X11
	MOVSD    X11, 8(DI)(BX*1)  // outage_u
	MOVSD    24(DI)(BX*1), X11
	ADDSD    X12, X11
	MOVSD    X11, 24(DI)(BX*1) // txDBm_u

unext:
	INCQ AX
	CMPQ AX, CX
	JLT  uloop

udone:
	MOVSD X0, 64(R11)
	MOVSD X1, 72(R11)
	MOVSD X2, 80(R11)
	MOVSD X3, 88(R11)
	MOVSD X4, 96(R11)
	MOVSD X5, 104(R11)
	MOVSD X6, 112(R11)
	MOVSD X7, 120(R11)
	MOVSD X8, 128(R11)
	RET
