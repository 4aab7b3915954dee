//go:build amd64 && !purego

#include "textflag.h"

// func prefetchLines(p unsafe.Pointer, n int)
//
// PREFETCHT0 of the n 64-byte lines from p: a hint, it reads nothing the
// program sees and cannot fault.
TEXT ·prefetchLines(SB), NOSPLIT, $0-16
	MOVQ p+0(FP), AX
	MOVQ n+8(FP), CX

ploop:
	TESTQ      CX, CX
	JEQ        pdone
	PREFETCHT0 (AX)
	ADDQ       $64, AX
	DECQ       CX
	JMP        ploop

pdone:
	RET
