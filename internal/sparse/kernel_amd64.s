#include "textflag.h"

// func dot2x4avx(k int, a *float64, lda int, b *float64, ldb int, out *[8]float64)
//
// out[4i+j] = Σ_{t<k} a[i*lda+t]·b[j*ldb+t] for i < 2, j < 4, k a multiple
// of 4 (the caller adds the tail). AVX2 with FMA: eight accumulators of
// four lanes each, one B row loaded at a time against both A rows.
TEXT ·dot2x4avx(SB), NOSPLIT, $0-48
	MOVQ k+0(FP), CX
	MOVQ a+8(FP), SI
	MOVQ lda+16(FP), R8
	SHLQ $3, R8
	MOVQ b+24(FP), DI
	MOVQ ldb+32(FP), R9
	SHLQ $3, R9
	MOVQ out+40(FP), DX
	LEAQ (SI)(R8*1), R10
	LEAQ (DI)(R9*1), R11
	LEAQ (R11)(R9*1), R12
	LEAQ (R12)(R9*1), R13
	VXORPD Y4, Y4, Y4
	VXORPD Y5, Y5, Y5
	VXORPD Y6, Y6, Y6
	VXORPD Y7, Y7, Y7
	VXORPD Y8, Y8, Y8
	VXORPD Y9, Y9, Y9
	VXORPD Y10, Y10, Y10
	VXORPD Y11, Y11, Y11
	XORQ AX, AX
	SHRQ $2, CX
	JZ   reduce

loop:
	VMOVUPD (SI)(AX*1), Y0
	VMOVUPD (R10)(AX*1), Y1
	VMOVUPD (DI)(AX*1), Y2
	VFMADD231PD Y2, Y0, Y4
	VFMADD231PD Y2, Y1, Y8
	VMOVUPD (R11)(AX*1), Y3
	VFMADD231PD Y3, Y0, Y5
	VFMADD231PD Y3, Y1, Y9
	VMOVUPD (R12)(AX*1), Y2
	VFMADD231PD Y2, Y0, Y6
	VFMADD231PD Y2, Y1, Y10
	VMOVUPD (R13)(AX*1), Y3
	VFMADD231PD Y3, Y0, Y7
	VFMADD231PD Y3, Y1, Y11
	ADDQ $32, AX
	DECQ CX
	JNZ  loop

reduce:
	// Pairwise horizontal sums: hadd(Y4,Y5) = [a0+a1, b0+b1, a2+a3, b2+b3].
	VHADDPD Y5, Y4, Y4
	VHADDPD Y7, Y6, Y6
	VEXTRACTF128 $1, Y4, X0
	VADDPD X0, X4, X4
	VEXTRACTF128 $1, Y6, X1
	VADDPD X1, X6, X6
	VMOVUPD X4, 0(DX)
	VMOVUPD X6, 16(DX)
	VHADDPD Y9, Y8, Y8
	VHADDPD Y11, Y10, Y10
	VEXTRACTF128 $1, Y8, X0
	VADDPD X0, X8, X8
	VEXTRACTF128 $1, Y10, X1
	VADDPD X1, X10, X10
	VMOVUPD X8, 32(DX)
	VMOVUPD X10, 48(DX)
	VZEROUPPER
	RET

// func axpyavx(n int, alpha float64, x *float64, y *float64)
//
// y[i] += alpha·x[i] for i < n, n a multiple of 4 (the caller does the tail).
TEXT ·axpyavx(SB), NOSPLIT, $0-32
	MOVQ n+0(FP), CX
	VBROADCASTSD alpha+8(FP), Y0
	MOVQ x+16(FP), SI
	MOVQ y+24(FP), DI
	XORQ AX, AX
	SHRQ $2, CX
	JZ   axdone

axloop:
	VMOVUPD (DI)(AX*1), Y1
	VFMADD231PD (SI)(AX*1), Y0, Y1
	VMOVUPD Y1, (DI)(AX*1)
	ADDQ $32, AX
	DECQ CX
	JNZ  axloop

axdone:
	VZEROUPPER
	RET
