// Dot product and axpy kernels for AVX2 and FMA, used by the share map.

#include "textflag.h"

// func dotAVX2(x, y []float64) float64
// Returns Σ x[i]·y[i] over the first len(x) &^ 15 elements (the caller adds
// the rest), with four accumulators.
TEXT ·dotAVX2(SB), NOSPLIT, $0-56
	MOVQ   x_base+0(FP), SI
	MOVQ   x_len+8(FP), CX
	MOVQ   y_base+24(FP), DI
	VXORPD Y0, Y0, Y0
	VXORPD Y1, Y1, Y1
	VXORPD Y2, Y2, Y2
	VXORPD Y3, Y3, Y3
	SHRQ   $4, CX
	JZ     reduce

dotloop:
	VMOVUPD     (SI), Y4
	VMOVUPD     32(SI), Y5
	VMOVUPD     64(SI), Y6
	VMOVUPD     96(SI), Y7
	VFMADD231PD (DI), Y4, Y0
	VFMADD231PD 32(DI), Y5, Y1
	VFMADD231PD 64(DI), Y6, Y2
	VFMADD231PD 96(DI), Y7, Y3
	ADDQ        $128, SI
	ADDQ        $128, DI
	DECQ        CX
	JNZ         dotloop

reduce:
	VADDPD       Y1, Y0, Y0
	VADDPD       Y3, Y2, Y2
	VADDPD       Y2, Y0, Y0
	VEXTRACTF128 $1, Y0, X1
	VADDPD       X1, X0, X0
	VHADDPD      X0, X0, X0
	VZEROUPPER
	MOVSD        X0, ret+48(FP)
	RET

// func axpyAVX2(a float64, x, y []float64)
// y[i] += a·x[i] over the first len(x) &^ 15 elements (the caller does the
// rest).
TEXT ·axpyAVX2(SB), NOSPLIT, $0-56
	VBROADCASTSD a+0(FP), Y8
	MOVQ         x_base+8(FP), SI
	MOVQ         x_len+16(FP), CX
	MOVQ         y_base+32(FP), DI
	SHRQ         $4, CX
	JZ           axpydone

axpyloop:
	VMOVUPD     (DI), Y0
	VMOVUPD     32(DI), Y1
	VMOVUPD     64(DI), Y2
	VMOVUPD     96(DI), Y3
	VFMADD231PD (SI), Y8, Y0
	VFMADD231PD 32(SI), Y8, Y1
	VFMADD231PD 64(SI), Y8, Y2
	VFMADD231PD 96(SI), Y8, Y3
	VMOVUPD     Y0, (DI)
	VMOVUPD     Y1, 32(DI)
	VMOVUPD     Y2, 64(DI)
	VMOVUPD     Y3, 96(DI)
	ADDQ        $128, SI
	ADDQ        $128, DI
	DECQ        CX
	JNZ         axpyloop
	VZEROUPPER

axpydone:
	RET
