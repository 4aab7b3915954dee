//go:build amd64 && !purego

#include "textflag.h"

// ROWADD(lp, tl, dn): s += d·row element by element, s at DI (CX
// elements, DX = CX rounded down to a multiple of 8), row at SI, d in every
// lane of Y4; AX, Y1, Y2 are scratch; lp, tl and dn name its labels. One
// multiplication and one addition per element, each rounded (no fused
// multiply-add), so the same bits as gonum's floats.AddScaled. The one
// body of addScaledAVX and of updateSumsAVX's row updates.
#define ROWADD(lp, tl, dn) \
	XORQ    AX, AX; \
	CMPQ    DX, $0; \
	JEQ     tl; \
lp:; \
	VMULPD  (SI)(AX*8), Y4, Y1; \
	VMULPD  32(SI)(AX*8), Y4, Y2; \
	VADDPD  (DI)(AX*8), Y1, Y1; \
	VADDPD  32(DI)(AX*8), Y2, Y2; \
	VMOVUPD Y1, (DI)(AX*8); \
	VMOVUPD Y2, 32(DI)(AX*8); \
	ADDQ    $8, AX; \
	CMPQ    AX, DX; \
	JLT     lp; \
tl:; \
	CMPQ    AX, CX; \
	JGE     dn; \
	VMULSD  (SI)(AX*8), X4, X1; \
	VADDSD  (DI)(AX*8), X1, X1; \
	VMOVSD  X1, (DI)(AX*8); \
	INCQ    AX; \
	JMP     tl; \
dn:

// MOVERS(cnt, lp, done): the users u < n whose power did not move by the
// common factor b (in X0), d = pCur[u] − b·pPrev[u] ≠ 0, listed in mv and
// dv without a branch per user; cnt ends as their count. Uses R8–R13, AX
// and X1–X3; reads updateSumsAVX's and updateSums512's arguments (the
// same frame); lp and done name its labels.
#define MOVERS(cnt, lp, done) \
	MOVQ     pCur+32(FP), R8; \
	MOVQ     pPrev+40(FP), R9; \
	MOVQ     n+48(FP), R10; \
	MOVQ     mv+64(FP), R11; \
	MOVQ     dv+72(FP), R12; \
	XORQ     AX, AX; \
	XORQ     cnt, cnt; \
	VXORPD   X3, X3, X3; \
lp:; \
	CMPQ     AX, R10; \
	JGE      done; \
	VMULSD   (R9)(AX*8), X0, X1; \
	VMOVSD   (R8)(AX*8), X2; \
	VSUBSD   X1, X2, X2; \
	MOVL     AX, (R11)(cnt*4); \
	VMOVSD   X2, (R12)(cnt*8); \
	XORL     R13, R13; \
	VUCOMISD X3, X2; \
	SETNE    R13B; \
	ADDQ     R13, cnt; \
	INCQ     AX; \
	JMP      lp; \
done:

// func addScaledAVX(s []float64, d float64, row *float64)
//
// s[i] += d·row[i] for i < len(s) (ROWADD).
TEXT ·addScaledAVX(SB), NOSPLIT, $0-40
	MOVQ         s_base+0(FP), DI
	MOVQ         s_len+8(FP), CX
	VBROADCASTSD d+24(FP), Y4
	MOVQ         row+32(FP), SI
	MOVQ         CX, DX
	ANDQ         $-8, DX
	ROWADD(loop8, tail, done)
	VZEROUPPER
	RET

// func updateSumsAVX(s []float64, b float64, pCur, pPrev *float64, n int, slow *float64, mv *int32, dv *float64)
//
// updateSums in one call: s[c] = s[c]·b; the users u < n whose power did
// not move by the factor b, d = pCur[u] − b·pPrev[u] ≠ 0, listed in mv
// and dv without a branch per user; then s += d·slow[u·len(s):] for each
// of them in order (ROWADD, as addScaledAVX): the Go code's operations in its
// order, so the same bits.
TEXT ·updateSumsAVX(SB), NOSPLIT, $0-80
	MOVQ         s_base+0(FP), DI
	MOVQ         s_len+8(FP), CX
	VBROADCASTSD b+24(FP), Y0
	XORQ         AX, AX

scale:
	CMPQ    AX, CX
	JGE     movers
	VMULSD  (DI)(AX*8), X0, X1
	VMOVSD  X1, (DI)(AX*8)
	INCQ    AX
	JMP     scale

movers:
	MOVERS(BX, mloop, rows)
	MOVQ slow+56(FP), R8
	MOVQ CX, DX
	ANDQ $-8, DX
	XORQ R9, R9             // mover index

rnext:
	CMPQ         R9, BX
	JGE          udone
	MOVLQSX      (R11)(R9*4), SI
	IMULQ        CX, SI
	LEAQ         (R8)(SI*8), SI // the mover's row
	VBROADCASTSD (R12)(R9*8), Y4
	ROWADD(r8loop, rtail, rdone)

	INCQ R9
	JMP  rnext

udone:
	VZEROUPPER
	RET

// ROW512: Z0–Z7 += Z30·row, row at SI (56 elements and the K1 lanes of
// the next 8; the others are not read), one multiplication and one
// addition per element, each rounded; Z16–Z23 are scratch.
#define ROW512 \
	VMULPD    (SI), Z30, Z16; \
	VMULPD    64(SI), Z30, Z17; \
	VMULPD    128(SI), Z30, Z18; \
	VMULPD    192(SI), Z30, Z19; \
	VMULPD    256(SI), Z30, Z20; \
	VMULPD    320(SI), Z30, Z21; \
	VMULPD    384(SI), Z30, Z22; \
	VMOVUPD.Z 448(SI), K1, Z23; \
	VMULPD    Z23, Z30, Z23; \
	VADDPD    Z16, Z0, Z0; \
	VADDPD    Z17, Z1, Z1; \
	VADDPD    Z18, Z2, Z2; \
	VADDPD    Z19, Z3, Z3; \
	VADDPD    Z20, Z4, Z4; \
	VADDPD    Z21, Z5, Z5; \
	VADDPD    Z22, Z6, Z6; \
	VADDPD    Z23, Z7, Z7

// STORE512: Z0–Z7 to the sums at DI (the last register's K1 lanes only).
#define STORE512 \
	VMOVUPD Z0, (DI); \
	VMOVUPD Z1, 64(DI); \
	VMOVUPD Z2, 128(DI); \
	VMOVUPD Z3, 192(DI); \
	VMOVUPD Z4, 256(DI); \
	VMOVUPD Z5, 320(DI); \
	VMOVUPD Z6, 384(DI); \
	VMOVUPD Z7, K1, 448(DI)

// LASTMASK: K1 = the lanes of the last register, cells 56 .. BX−1
// (AX, CX scratch).
#define LASTMASK \
	LEAQ  -56(BX), CX; \
	MOVQ  $1, AX; \
	SHLQ  CX, AX; \
	DECQ  AX; \
	KMOVW AX, K1

// func updateSums512(s []float64, b float64, pCur, pPrev *float64, n int, slow *float64, mv *int32, dv *float64)
//
// updateSumsAVX for 57 to 64 cells (19 sites × 3 sectors) in AVX-512, with
// the sums held in Z0–Z7 for the whole call (the last register masked to
// the cells past 56 by K1) instead of loaded and stored for every row: the
// movers listed first (as updateSumsAVX; the listing and the scaling touch
// different data, so their order does not matter), then s[c] = s[c]·b,
// then s += d·row for each mover in order, one multiplication and one
// addition per element, each rounded (no fused multiply-add): the same
// operations in the same order per element, so the same bits.
TEXT ·updateSums512(SB), NOSPLIT, $0-80
	MOVQ         s_base+0(FP), DI
	MOVQ         s_len+8(FP), BX
	VMOVSD       b+24(FP), X0
	MOVERS(DX, mloop, sums)
	LASTMASK
	VBROADCASTSD b+24(FP), Z31
	VMULPD    (DI), Z31, Z0
	VMULPD    64(DI), Z31, Z1
	VMULPD    128(DI), Z31, Z2
	VMULPD    192(DI), Z31, Z3
	VMULPD    256(DI), Z31, Z4
	VMULPD    320(DI), Z31, Z5
	VMULPD    384(DI), Z31, Z6
	VMOVUPD.Z 448(DI), K1, Z7
	VMULPD    Z7, Z31, Z7
	MOVQ      slow+56(FP), R8
	XORQ      R9, R9            // mover index

rnext:
	CMPQ         R9, DX
	JGE          store
	// Ask for the row of the mover four ahead (a hint: the movers are
	// about half the users, at random, so the hardware cannot guess).
	LEAQ         4(R9), R13
	CMPQ         R13, DX
	JGE          rrow
	MOVLQSX      (R11)(R13*4), R13
	IMULQ        BX, R13
	LEAQ         (R8)(R13*8), R13
	PREFETCHT0   (R13)
	PREFETCHT0   64(R13)
	PREFETCHT0   128(R13)
	PREFETCHT0   192(R13)
	PREFETCHT0   256(R13)
	PREFETCHT0   320(R13)
	PREFETCHT0   384(R13)
	PREFETCHT0   448(R13)

rrow:
	MOVLQSX      (R11)(R9*4), SI
	IMULQ        BX, SI
	LEAQ         (R8)(SI*8), SI // the mover's row
	VBROADCASTSD (R12)(R9*8), Z30
	ROW512
	INCQ         R9
	JMP          rnext

store:
	STORE512
	VZEROUPPER
	RET

// func fullSums512(s []float64, p *float64, n int, slow *float64)
//
// fullSums for 57 to 64 cells in AVX-512: s = Σ_u p[u]·slow[u·len(s):]
// over u < n in order, from zero, the sums held in Z0–Z7 (ROW512): the Go
// code's operations in its order per element, so the same bits.
TEXT ·fullSums512(SB), NOSPLIT, $0-48
	MOVQ   s_base+0(FP), DI
	MOVQ   s_len+8(FP), BX
	MOVQ   p+24(FP), R12
	MOVQ   n+32(FP), DX
	MOVQ   slow+40(FP), SI
	LASTMASK
	VXORPD Z0, Z0, Z0
	VXORPD Z1, Z1, Z1
	VXORPD Z2, Z2, Z2
	VXORPD Z3, Z3, Z3
	VXORPD Z4, Z4, Z4
	VXORPD Z5, Z5, Z5
	VXORPD Z6, Z6, Z6
	VXORPD Z7, Z7, Z7
	XORQ   R9, R9
	MOVQ   BX, R10
	SHLQ   $3, R10     // bytes per row

fnext:
	CMPQ         R9, DX
	JGE          fstore
	VBROADCASTSD (R12)(R9*8), Z30
	ROW512
	ADDQ         R10, SI
	INCQ         R9
	JMP          fnext

fstore:
	STORE512
	VZEROUPPER
	RET
