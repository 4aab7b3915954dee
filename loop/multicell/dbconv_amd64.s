//go:build amd64 && !purego

#include "textflag.h"

DATA dbc<>+0(SB)/8, $0.33219280948873623479 // log2(10)/10
DATA dbc<>+8(SB)/8, $1024.0                 // 2^linToDBBits, and the bias 1024
DATA dbc<>+16(SB)/8, $-3000.0
DATA dbc<>+24(SB)/8, $3000.0
DATA dbc<>+32(SB)/8, $1                     // int64 1
DATA dbc<>+40(SB)/8, $0x000fffffffffffff    // mantissa
DATA dbc<>+48(SB)/8, $0x000003ffffffffff    // mantissa bits below the table index (42)
DATA dbc<>+56(SB)/8, $0x4330000000000000    // 2^52: or-ed into an integer < 2^52 gives 2^52 + n
DATA dbc<>+64(SB)/8, $0x3d50000000000000    // 2^-42
DATA dbc<>+72(SB)/8, $1023.0
DATA dbc<>+80(SB)/8, $3.0102999566398119521 // 10·log10(2)
DATA dbc<>+88(SB)/8, $0x7ff
GLOBL dbc<>(SB), RODATA|NOPTR, $96

// func linFromDBAVX2(x []float64, table *float64) int
//
// linFromDBInPlace on groups of four, in AVX2, the same operations in the
// same order (so the same bits): yp = v·log2(10)/10 + 1024, e = trunc(yp),
// f = (yp − e)·1024, j = trunc(f), x = (lo + (f − j)·(hi − lo))·2^(e−1024)
// with lo, hi = table[j], table[j+1]. It stops before the first group
// holding a value outside (−3000, 3000) or NaN and returns the number of
// values converted (a multiple of 4).
TEXT ·linFromDBAVX2(SB), NOSPLIT, $0-40
	MOVQ         x_base+0(FP), SI
	MOVQ         x_len+8(FP), CX
	MOVQ         table+24(FP), R8
	VBROADCASTSD dbc<>+0(SB), Y8
	VBROADCASTSD dbc<>+8(SB), Y9
	VBROADCASTSD dbc<>+16(SB), Y10
	VBROADCASTSD dbc<>+24(SB), Y11
	VPBROADCASTQ dbc<>+32(SB), Y12
	XORQ         AX, AX

floop:
	LEAQ      4(AX), DX
	CMPQ      DX, CX
	JGT       fdone
	VMOVUPD   (SI)(AX*8), Y0
	VCMPPD    $0x1e, Y10, Y0, Y1 // v > −3000
	VCMPPD    $0x11, Y11, Y0, Y2 // v < 3000
	VANDPD    Y1, Y2, Y1
	VMOVMSKPD Y1, BX
	CMPQ      BX, $15
	JNE       fdone
	VMULPD    Y8, Y0, Y3         // v·log2(10)/10
	VADDPD    Y9, Y3, Y3         // yp
	VCVTTPD2DQY Y3, X4           // e
	VCVTDQ2PD X4, Y5
	VSUBPD    Y5, Y3, Y6         // yp − e
	VMULPD    Y9, Y6, Y6         // f
	VCVTTPD2DQY Y6, X7           // j
	VCVTDQ2PD X7, Y13
	VSUBPD    Y13, Y6, Y13       // f − j
	// lo, hi = table[j], table[j+1]: one 16-byte load per lane (gathers
	// are slow on some x86 cores), then regrouped.
	VMOVD     X7, R10
	VPEXTRD   $1, X7, R11
	VPEXTRD   $2, X7, R12
	VPEXTRD   $3, X7, R13
	VMOVUPD   (R8)(R10*8), X1
	VMOVUPD   (R8)(R11*8), X2
	VMOVUPD   (R8)(R12*8), X14
	VMOVUPD   (R8)(R13*8), X6
	VUNPCKLPD X2, X1, X5         // lo0 lo1
	VUNPCKHPD X2, X1, X2         // hi0 hi1
	VUNPCKLPD X6, X14, X1        // lo2 lo3
	VUNPCKHPD X6, X14, X14       // hi2 hi3
	VINSERTF128 $1, X1, Y5, Y1   // lo
	VINSERTF128 $1, X14, Y2, Y2  // hi
	VSUBPD    Y1, Y2, Y2         // hi − lo
	VMULPD    Y2, Y13, Y2        // (f − j)·(hi − lo)
	VADDPD    Y2, Y1, Y2         // lo + …
	VPMOVSXDQ X4, Y5
	VPSUBQ    Y12, Y5, Y5        // e − 1 (the exponent field of 2^(e−1024))
	VPSLLQ    $52, Y5, Y5
	VMULPD    Y5, Y2, Y2
	VMOVUPD   Y2, (SI)(AX*8)
	MOVQ      DX, AX
	JMP       floop

fdone:
	VZEROUPPER
	MOVQ AX, ret+32(FP)
	RET

// func linToDBAVX2(dst, src []float64, floor float64, table *float64) int
//
// linToDBFloorTo on groups of four (len(dst) >= len(src)), in AVX2, the
// same operations in the same order: x = max(floor, x) when floor > 0,
// e = exponent − 1023, j = top 10 mantissa bits, f = the other 42 bits
// over 2^42, dst = ((e + lo) + f·(hi − lo))·10·log10(2) with lo, hi =
// table[j], table[j+1]. It stops before the first group holding a value
// that is not positive and normal (zero, subnormal, negative, infinite,
// NaN) and returns the number of values converted (a multiple of 4).
TEXT ·linToDBAVX2(SB), NOSPLIT, $0-72
	MOVQ         dst_base+0(FP), DI
	MOVQ         src_base+24(FP), SI
	MOVQ         src_len+32(FP), CX
	VBROADCASTSD floor+48(FP), Y14
	MOVQ         table+56(FP), R8
	VXORPD       Y1, Y1, Y1
	VCMPPD       $0x1e, Y1, Y14, Y1 // floor > 0: all ones
	VMOVMSKPD    Y1, R10
	VPBROADCASTQ dbc<>+40(SB), Y8  // mantissa mask
	VPBROADCASTQ dbc<>+48(SB), Y9  // low 42 bits
	VPBROADCASTQ dbc<>+56(SB), Y10 // 2^52
	VBROADCASTSD dbc<>+64(SB), Y11 // 2^-42
	VBROADCASTSD dbc<>+72(SB), Y12 // 1023
	VBROADCASTSD dbc<>+80(SB), Y13 // 10·log10(2)
	VPBROADCASTQ dbc<>+88(SB), Y6  // 0x7ff
	XORQ         AX, AX

tloop:
	LEAQ      4(AX), DX
	CMPQ      DX, CX
	JGT       tdone
	VMOVUPD   (SI)(AX*8), Y0
	TESTQ     R10, R10
	JEQ       tnofloor
	VMAXPD    Y0, Y14, Y0        // max(floor, x): x when equal or NaN
tnofloor:
	VPSRLQ    $52, Y0, Y1
	VPAND     Y6, Y1, Y1         // exponent field
	VPXOR     Y2, Y2, Y2
	VPCMPEQQ  Y2, Y1, Y3         // exponent 0
	VPCMPEQQ  Y6, Y1, Y4         // exponent 0x7ff
	VPOR      Y4, Y3, Y3
	VPOR      Y0, Y3, Y3         // sign bit of x
	VMOVMSKPD Y3, BX
	TESTQ     BX, BX
	JNE       tdone
	VPOR      Y10, Y1, Y1
	VSUBPD    Y10, Y1, Y1        // float64(exponent)
	VSUBPD    Y12, Y1, Y1        // − 1023 (exact)
	VPAND     Y8, Y0, Y2         // m
	VPSRLQ    $42, Y2, Y3        // j
	VPAND     Y9, Y2, Y2
	VPOR      Y10, Y2, Y2
	VSUBPD    Y10, Y2, Y2        // float64(m mod 2^42)
	VMULPD    Y11, Y2, Y2        // f
	// lo, hi = table[j], table[j+1] as in linFromDBAVX2.
	VMOVQ     X3, R11
	VPEXTRQ   $1, X3, R12
	VEXTRACTI128 $1, Y3, X4
	VMOVQ     X4, R13
	VPEXTRQ   $1, X4, BX
	VMOVUPD   (R8)(R11*8), X3
	VMOVUPD   (R8)(R12*8), X4
	VMOVUPD   (R8)(R13*8), X5
	VMOVUPD   (R8)(BX*8), X7
	VUNPCKHPD X4, X3, X0         // hi0 hi1 (x is no longer needed)
	VUNPCKLPD X4, X3, X3         // lo0 lo1
	VUNPCKHPD X7, X5, X4         // hi2 hi3
	VUNPCKLPD X7, X5, X5         // lo2 lo3
	VINSERTF128 $1, X5, Y3, Y5   // lo
	VINSERTF128 $1, X4, Y0, Y7   // hi
	VSUBPD    Y5, Y7, Y7         // hi − lo
	VMULPD    Y7, Y2, Y2         // f·(hi − lo)
	VADDPD    Y5, Y1, Y1         // e + lo
	VADDPD    Y2, Y1, Y1
	VMULPD    Y13, Y1, Y1
	VMOVUPD   Y1, (DI)(AX*8)
	MOVQ      DX, AX
	JMP       tloop

tdone:
	VZEROUPPER
	MOVQ AX, ret+64(FP)
	RET
