//go:build amd64 && !purego

#include "textflag.h"

// func addScaledAVX(s []float64, d float64, row *float64)
//
// s[i] += d·row[i] for i < len(s): one multiplication and one addition per
// element, each rounded (no fused multiply-add), so the same bits as
// gonum's floats.AddScaled.
TEXT ·addScaledAVX(SB), NOSPLIT, $0-40
	MOVQ         s_base+0(FP), DI
	MOVQ         s_len+8(FP), CX
	VBROADCASTSD d+24(FP), Y0
	MOVQ         row+32(FP), SI
	XORQ         AX, AX
	MOVQ         CX, DX
	ANDQ         $-8, DX
	JEQ          tail

loop8:
	VMULPD  (SI)(AX*8), Y0, Y1
	VMULPD  32(SI)(AX*8), Y0, Y2
	VADDPD  (DI)(AX*8), Y1, Y1
	VADDPD  32(DI)(AX*8), Y2, Y2
	VMOVUPD Y1, (DI)(AX*8)
	VMOVUPD Y2, 32(DI)(AX*8)
	ADDQ    $8, AX
	CMPQ    AX, DX
	JLT     loop8

tail:
	CMPQ   AX, CX
	JGE    done
	VMULSD (SI)(AX*8), X0, X1
	VADDSD (DI)(AX*8), X1, X1
	VMOVSD X1, (DI)(AX*8)
	INCQ   AX
	JMP    tail

done:
	VZEROUPPER
	RET
