//go:build amd64 && !purego

#include "textflag.h"

// PAIRSUMS(re, im, lo, hi): one channel's products with the weights in
// Y0 and Y1 at node BX of its re and im rows, summed in pairs:
// lo = (r01, q01, r23, q23), hi = (r45, q45, r67, q67); Y2–Y5 are
// scratch. The one body of interpTapPowerAVX and interpPower2AVXAsm.
#define PAIRSUMS(re, im, lo, hi) \
	VMULPD  (re)(BX*8), Y0, Y2; \
	VMULPD  32(re)(BX*8), Y1, Y3; \
	VMULPD  (im)(BX*8), Y0, Y4; \
	VMULPD  32(im)(BX*8), Y1, Y5; \
	VHADDPD Y4, Y2, lo; \
	VHADDPD Y5, Y3, hi

// func interpTapPowerAVX(dst []float64, first bool, re, im []float64, idx, wrow []int32, wts *float64)
//
// For each i: r = Σ_j w[j]·re[idx[i]+j], q = Σ_j w[j]·im[idx[i]+j] with
// w = wts[wrow[i]:][:8], summed in the order of interpTapPower
// (((w0x0+w1x1)+(w2x2+w3x3))+((w4x4+w5x5)+(w6x6+w7x7))), then r·r+q·q is
// stored (first) or added to dst[i]: bit for bit the result of the Go code.
TEXT ·interpTapPowerAVX(SB), NOSPLIT, $0-136
	MOVQ    dst_base+0(FP), DI
	MOVQ    dst_len+8(FP), CX
	MOVBQZX first+24(FP), DX
	MOVQ    re_base+32(FP), SI
	MOVQ    im_base+56(FP), R8
	MOVQ    idx_base+80(FP), R9
	MOVQ    wrow_base+104(FP), R10
	MOVQ    wts+128(FP), R11
	XORQ    AX, AX
	TESTQ   CX, CX
	JEQ     done

loop:
	MOVLQSX      (R9)(AX*4), BX
	MOVLQSX      (R10)(AX*4), R12
	VMOVUPD      (R11)(R12*8), Y0
	VMOVUPD      32(R11)(R12*8), Y1
	PAIRSUMS(SI, R8, Y6, Y7)
	VEXTRACTF128 $1, Y6, X8
	VADDPD       X8, X6, X6         // (r0123, q0123)
	VEXTRACTF128 $1, Y7, X9
	VADDPD       X9, X7, X7         // (r4567, q4567)
	VADDPD       X7, X6, X6         // (r, q)
	VMULPD       X6, X6, X6         // (r², q²)
	VHADDPD      X6, X6, X6         // r² + q²
	TESTQ        DX, DX
	JNE          store
	VADDSD       (DI)(AX*8), X6, X6

store:
	VMOVSD X6, (DI)(AX*8)
	INCQ   AX
	CMPQ   AX, CX
	JLT    loop

done:
	VZEROUPPER
	RET

// func osc16AVX(dst []float64, first bool, c, a, b *float64)
//
// Sixteen cosine recursions x_{k+1} = c_n·x_k − x_{k−1} (current values
// a[0:16], previous b[0:16], coefficients c[0:16]); for each sample i, the
// four group sums g_j = (x_{4j}+x_{4j+1})+(x_{4j+2}+x_{4j+3}) are added to
// dst[i] in the order of four osc4 calls: ((((dst[i]) + g0) + g1) + g2) + g3,
// or g0 + g1 + g2 + g3 from g0 when first. len(dst) must be even. The same
// operations in the same order as the Go code, so the same bits.
TEXT ·osc16AVX(SB), NOSPLIT, $0-56
	MOVQ    dst_base+0(FP), DI
	MOVQ    dst_len+8(FP), CX
	MOVBQZX first+24(FP), DX
	MOVQ    c+32(FP), SI
	MOVQ    a+40(FP), R8
	MOVQ    b+48(FP), R9
	VMOVUPD (SI), Y12
	VMOVUPD 32(SI), Y13
	VMOVUPD 64(SI), Y14
	VMOVUPD 96(SI), Y15
	VMOVUPD (R8), Y0
	VMOVUPD 32(R8), Y1
	VMOVUPD 64(R8), Y2
	VMOVUPD 96(R8), Y3
	VMOVUPD (R9), Y4
	VMOVUPD 32(R9), Y5
	VMOVUPD 64(R9), Y6
	VMOVUPD 96(R9), Y7
	XORQ    AX, AX
	TESTQ   CX, CX
	JEQ     oscdone

oscloop:
	// sample AX: current values in Y0..Y3
	VHADDPD      Y1, Y0, Y8         // (x0+x1, x4+x5, x2+x3, x6+x7)
	VHADDPD      Y3, Y2, Y9
	VEXTRACTF128 $1, Y8, X10
	VADDPD       X10, X8, X8        // (g0, g1)
	VEXTRACTF128 $1, Y9, X11
	VADDPD       X11, X9, X9        // (g2, g3)
	TESTQ        DX, DX
	JNE          first0
	VADDSD       (DI)(AX*8), X8, X10
	JMP          sum0

first0:
	VMOVAPD X8, X10

sum0:
	VUNPCKHPD X8, X8, X11
	VADDSD    X11, X10, X10
	VADDSD    X9, X10, X10
	VUNPCKHPD X9, X9, X11
	VADDSD    X11, X10, X10
	VMOVSD    X10, (DI)(AX*8)
	VMULPD    Y0, Y12, Y8
	VSUBPD    Y4, Y8, Y4
	VMULPD    Y1, Y13, Y9
	VSUBPD    Y5, Y9, Y5
	VMULPD    Y2, Y14, Y10
	VSUBPD    Y6, Y10, Y6
	VMULPD    Y3, Y15, Y11
	VSUBPD    Y7, Y11, Y7
	INCQ      AX

	// sample AX: current values in Y4..Y7
	VHADDPD      Y5, Y4, Y8
	VHADDPD      Y7, Y6, Y9
	VEXTRACTF128 $1, Y8, X10
	VADDPD       X10, X8, X8
	VEXTRACTF128 $1, Y9, X11
	VADDPD       X11, X9, X9
	TESTQ        DX, DX
	JNE          first1
	VADDSD       (DI)(AX*8), X8, X10
	JMP          sum1

first1:
	VMOVAPD X8, X10

sum1:
	VUNPCKHPD X8, X8, X11
	VADDSD    X11, X10, X10
	VADDSD    X9, X10, X10
	VUNPCKHPD X9, X9, X11
	VADDSD    X11, X10, X10
	VMOVSD    X10, (DI)(AX*8)
	VMULPD    Y4, Y12, Y8
	VSUBPD    Y0, Y8, Y0
	VMULPD    Y5, Y13, Y9
	VSUBPD    Y1, Y9, Y1
	VMULPD    Y6, Y14, Y10
	VSUBPD    Y2, Y10, Y2
	VMULPD    Y7, Y15, Y11
	VSUBPD    Y3, Y11, Y3
	INCQ      AX
	CMPQ      AX, CX
	JLT       oscloop

oscdone:
	VZEROUPPER
	RET

// func interpPower3AVXAsm(dst []float64, first bool, re, im *float64, stride int, idx, wrow []int32, wts *float64)
//
// interpTapPowerAVX for three taps at once (tap t's row at re + t·stride
// bytes, likewise im): per sample, ((dst[i] + p_0) + p_1) + p_2, or
// (p_0 + p_1) + p_2 when first, each p_t computed as in interpTapPowerAVX.
TEXT ·interpPower3AVXAsm(SB), NOSPLIT, $0-112
	MOVQ    dst_base+0(FP), DI
	MOVQ    dst_len+8(FP), CX
	MOVBQZX first+24(FP), DX
	MOVQ    re+32(FP), SI
	MOVQ    im+40(FP), R8
	MOVQ    stride+48(FP), R13
	MOVQ    idx_base+56(FP), R9
	MOVQ    wrow_base+80(FP), R10
	MOVQ    wts+104(FP), R11
	XORQ    AX, AX
	TESTQ   CX, CX
	JEQ     done3

loop3:
	MOVLQSX (R10)(AX*4), R12
	VMOVUPD (R11)(R12*8), Y0
	VMOVUPD 32(R11)(R12*8), Y1
	MOVLQSX (R9)(AX*4), BX
	LEAQ    (SI)(BX*8), R12    // re row of tap 0 at the first node
	LEAQ    (R8)(BX*8), BX     // im row of tap 0 at the first node

	// tap 0 -> X10
	VMULPD       (R12), Y0, Y2
	VMULPD       32(R12), Y1, Y3
	VMULPD       (BX), Y0, Y4
	VMULPD       32(BX), Y1, Y5
	VHADDPD      Y4, Y2, Y6
	VHADDPD      Y5, Y3, Y7
	VEXTRACTF128 $1, Y6, X8
	VADDPD       X8, X6, X6
	VEXTRACTF128 $1, Y7, X9
	VADDPD       X9, X7, X7
	VADDPD       X7, X6, X6
	VMULPD       X6, X6, X6
	VHADDPD      X6, X6, X10

	// tap 1 -> X11
	VMULPD       (R12)(R13*1), Y0, Y2
	VMULPD       32(R12)(R13*1), Y1, Y3
	VMULPD       (BX)(R13*1), Y0, Y4
	VMULPD       32(BX)(R13*1), Y1, Y5
	VHADDPD      Y4, Y2, Y6
	VHADDPD      Y5, Y3, Y7
	VEXTRACTF128 $1, Y6, X8
	VADDPD       X8, X6, X6
	VEXTRACTF128 $1, Y7, X9
	VADDPD       X9, X7, X7
	VADDPD       X7, X6, X6
	VMULPD       X6, X6, X6
	VHADDPD      X6, X6, X11

	// tap 2 -> X12
	VMULPD       (R12)(R13*2), Y0, Y2
	VMULPD       32(R12)(R13*2), Y1, Y3
	VMULPD       (BX)(R13*2), Y0, Y4
	VMULPD       32(BX)(R13*2), Y1, Y5
	VHADDPD      Y4, Y2, Y6
	VHADDPD      Y5, Y3, Y7
	VEXTRACTF128 $1, Y6, X8
	VADDPD       X8, X6, X6
	VEXTRACTF128 $1, Y7, X9
	VADDPD       X9, X7, X7
	VADDPD       X7, X6, X6
	VMULPD       X6, X6, X6
	VHADDPD      X6, X6, X12

	TESTQ  DX, DX
	JNE    first3
	VADDSD (DI)(AX*8), X10, X10

first3:
	VADDSD X11, X10, X10
	VADDSD X12, X10, X10
	VMOVSD X10, (DI)(AX*8)
	INCQ   AX
	CMPQ   AX, CX
	JLT    loop3

done3:
	VZEROUPPER
	RET

// func interpPower2AVXAsm(dstA, dstB []float64, reA, imA, reB, imB *float64, idx, wrow *int32, wts *float64)
//
// interpTapPowerAVX (first) for two one-tap channels that share a plan
// (idx, wrow; len(dstA) samples, dstB as long): each sample's weights are
// loaded once and used for both; each channel's sums run the same
// operations in the same order as interpTapPowerAVX (the two halves of
// the 256-bit additions are the 128-bit additions of the one-channel
// kernel), so the same bits.
TEXT ·interpPower2AVXAsm(SB), NOSPLIT, $0-104
	MOVQ  dstA_base+0(FP), DI
	MOVQ  dstA_len+8(FP), CX
	MOVQ  dstB_base+24(FP), DX
	MOVQ  reA+48(FP), SI
	MOVQ  imA+56(FP), R8
	MOVQ  reB+64(FP), R13
	MOVQ  imB+72(FP), R14
	MOVQ  idx+80(FP), R9
	MOVQ  wrow+88(FP), R10
	MOVQ  wts+96(FP), R11
	XORQ  AX, AX
	TESTQ CX, CX
	JEQ   done2

loop2:
	MOVLQSX    (R9)(AX*4), BX
	MOVLQSX    (R10)(AX*4), R12
	VMOVUPD    (R11)(R12*8), Y0
	VMOVUPD    32(R11)(R12*8), Y1
	PAIRSUMS(SI, R8, Y6, Y7)    // A
	PAIRSUMS(R13, R14, Y8, Y9)  // B
	VPERM2F128 $0x20, Y8, Y6, Y10 // (A r01, q01, B r01, q01)
	VPERM2F128 $0x31, Y8, Y6, Y11 // (A r23, q23, B r23, q23)
	VADDPD     Y11, Y10, Y10      // (A r0123, q0123, B r0123, q0123)
	VPERM2F128 $0x20, Y9, Y7, Y12
	VPERM2F128 $0x31, Y9, Y7, Y13
	VADDPD     Y13, Y12, Y12      // (A r4567, q4567, B r4567, q4567)
	VADDPD     Y12, Y10, Y10      // (A r, q, B r, q)
	VMULPD     Y10, Y10, Y10
	VHADDPD    Y10, Y10, Y10      // (A r² + q², ., B r² + q², .)
	VMOVSD     X10, (DI)(AX*8)
	VEXTRACTF128 $1, Y10, X11
	VMOVSD     X11, (DX)(AX*8)
	INCQ       AX
	CMPQ       AX, CX
	JLT        loop2

done2:
	VZEROUPPER
	RET
