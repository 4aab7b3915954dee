//go:build amd64 && !purego

#include "textflag.h"

// func accumUsersAVX2(ub, sirDB, tDB, pDB *float64, flags *uint8, n int)
//
// accumUsersGo for users 0 .. n−1, n a multiple of 4, four users at a
// time: each group's seven arrays of four (ub, 224 bytes per group) get
// the flags as 0/1 (bits 0–3: outage, at max, block end, block error;
// the bytes widened to 32 bits, masked and converted exactly), e = SIR dB
// − target dB, e·e and the Tx power added, one operation per element as
// the Go loop does, so the same bits.
TEXT ·accumUsersAVX2(SB), NOSPLIT, $0-48
	MOVQ      ub+0(FP), DI
	MOVQ      sirDB+8(FP), SI
	MOVQ      tDB+16(FP), R9
	MOVQ      pDB+24(FP), R10
	MOVQ      flags+32(FP), R11
	MOVQ      n+40(FP), CX
	VPCMPEQD  X15, X15, X15
	VPSRLD    $31, X15, X15      // 1 in every 32-bit lane
	XORQ      AX, AX
	TESTQ     CX, CX
	JEQ       adone

aloop:
	MOVL      (R11)(AX*1), DX
	VMOVD     DX, X0
	VPMOVZXBD X0, X0             // four flag bytes, 32 bits each
	VPAND     X15, X0, X1
	VCVTDQ2PD X1, Y1             // outage
	VPSRLD    $1, X0, X2
	VPAND     X15, X2, X2
	VCVTDQ2PD X2, Y2             // at max
	VPSRLD    $2, X0, X3
	VPAND     X15, X3, X3
	VCVTDQ2PD X3, Y3             // block end
	VPSRLD    $3, X0, X4
	VPAND     X15, X4, X4
	VCVTDQ2PD X4, Y4             // block error
	VMOVUPD   (SI)(AX*8), Y5
	VSUBPD    (R9)(AX*8), Y5, Y5 // e = SIR − target
	VMULPD    Y5, Y5, Y6         // e·e
	VMOVUPD   (R10)(AX*8), Y7    // Tx power
	VADDPD    (DI), Y1, Y1
	VMOVUPD   Y1, (DI)
	VADDPD    32(DI), Y2, Y2
	VMOVUPD   Y2, 32(DI)
	VADDPD    64(DI), Y5, Y5
	VMOVUPD   Y5, 64(DI)
	VADDPD    96(DI), Y6, Y6
	VMOVUPD   Y6, 96(DI)
	VADDPD    128(DI), Y7, Y7
	VMOVUPD   Y7, 128(DI)
	VADDPD    160(DI), Y3, Y3
	VMOVUPD   Y3, 160(DI)
	VADDPD    192(DI), Y4, Y4
	VMOVUPD   Y4, 192(DI)
	ADDQ      $224, DI
	ADDQ      $4, AX
	CMPQ      AX, CX
	JLT       aloop

adone:
	VZEROUPPER
	RET
