//go:build amd64 && !purego

#include "textflag.h"

// func shadowSitesAVX(b, nd, path, site *float64, n int, k, w, common, sdB float64)
//
// For i < n (a multiple of 4), four at a time: b[i] = k·b[i] + w·nd[i]
// (the Gudmundson AR(1) step of each site's shadowing part), then
// site[i] = (path[i] + common) + sdB·b[i] (the site's slow gain in dB):
// gainsRangeGo's operations in its order, so the same bits.
TEXT ·shadowSitesAVX(SB), NOSPLIT, $0-72
	MOVQ         b+0(FP), SI
	MOVQ         nd+8(FP), DX
	MOVQ         path+16(FP), R8
	MOVQ         site+24(FP), DI
	MOVQ         n+32(FP), CX
	VBROADCASTSD k+40(FP), Y8
	VBROADCASTSD w+48(FP), Y9
	VBROADCASTSD common+56(FP), Y10
	VBROADCASTSD sdB+64(FP), Y11
	XORQ         AX, AX
	TESTQ        CX, CX
	JEQ          sdone

sloop:
	VMULPD  (SI)(AX*8), Y8, Y0 // k·b
	// nd was just written element by element (NormFill): four 8-byte
	// loads, each forwarded from its store (one 32-byte load waits for
	// all four stores to reach the cache).
	VMOVSD       (DX)(AX*8), X1
	VMOVHPD      8(DX)(AX*8), X1, X1
	VMOVSD       16(DX)(AX*8), X2
	VMOVHPD      24(DX)(AX*8), X2, X2
	VINSERTF128  $1, X2, Y1, Y1
	VMULPD  Y1, Y9, Y1         // w·nd
	VADDPD  Y1, Y0, Y0
	VMOVUPD Y0, (SI)(AX*8)
	VMOVUPD (R8)(AX*8), Y2
	VADDPD  Y10, Y2, Y2        // path + common
	VMULPD  Y11, Y0, Y3        // sdB·b
	VADDPD  Y3, Y2, Y2
	VMOVUPD Y2, (DI)(AX*8)
	ADDQ    $4, AX
	CMPQ    AX, CX
	JLT     sloop

sdone:
	VZEROUPPER
	RET

// func rows3SSE(row, ant, site *float64, n int)
//
// row[3s+i] = site[s]·ant[3s+i] for s < n, i < 3: a user's slow gains of a
// 3-sector layout from its site gains and antenna gains.
TEXT ·rows3SSE(SB), NOSPLIT, $0-32
	MOVQ  row+0(FP), DI
	MOVQ  ant+8(FP), SI
	MOVQ  site+16(FP), DX
	MOVQ  n+24(FP), CX
	TESTQ CX, CX
	JEQ   rdone

rloop:
	MOVSD (DX), X0
	MOVSD (SI), X1
	MULSD X0, X1
	MOVSD X1, (DI)
	MOVSD 8(SI), X2
	MULSD X0, X2
	MOVSD X2, 8(DI)
	MOVSD 16(SI), X3
	MULSD X0, X3
	MOVSD X3, 16(DI)
	ADDQ  $8, DX
	ADDQ  $24, SI
	ADDQ  $24, DI
	DECQ  CX
	JNE   rloop

rdone:
	RET
