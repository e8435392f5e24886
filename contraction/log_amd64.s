// Code written for rcdemand: a vectorised natural logarithm (AVX2), the
// algorithm of FreeBSD's e_log.c as Go's math/log.go ports it, operation
// for operation and without fused multiply-adds, so that each lane equals
// that port's result bit for bit (TestLogVec).

#include "textflag.h"

DATA logmant<>+0(SB)/8, $0x000FFFFFFFFFFFFF
DATA logmant<>+8(SB)/8, $0x000FFFFFFFFFFFFF
DATA logmant<>+16(SB)/8, $0x000FFFFFFFFFFFFF
DATA logmant<>+24(SB)/8, $0x000FFFFFFFFFFFFF
GLOBL logmant<>(SB), RODATA|NOPTR, $32

DATA loghalf<>+0(SB)/8, $0x3FE0000000000000
DATA loghalf<>+8(SB)/8, $0x3FE0000000000000
DATA loghalf<>+16(SB)/8, $0x3FE0000000000000
DATA loghalf<>+24(SB)/8, $0x3FE0000000000000
GLOBL loghalf<>(SB), RODATA|NOPTR, $32

DATA logmagic<>+0(SB)/8, $0x4338000000000000
DATA logmagic<>+8(SB)/8, $0x4338000000000000
DATA logmagic<>+16(SB)/8, $0x4338000000000000
DATA logmagic<>+24(SB)/8, $0x4338000000000000
GLOBL logmagic<>(SB), RODATA|NOPTR, $32

DATA logmagicbias<>+0(SB)/8, $6755399441056766.0
DATA logmagicbias<>+8(SB)/8, $6755399441056766.0
DATA logmagicbias<>+16(SB)/8, $6755399441056766.0
DATA logmagicbias<>+24(SB)/8, $6755399441056766.0
GLOBL logmagicbias<>(SB), RODATA|NOPTR, $32

DATA logsqrthalf<>+0(SB)/8, $0.7071067811865476
DATA logsqrthalf<>+8(SB)/8, $0.7071067811865476
DATA logsqrthalf<>+16(SB)/8, $0.7071067811865476
DATA logsqrthalf<>+24(SB)/8, $0.7071067811865476
GLOBL logsqrthalf<>(SB), RODATA|NOPTR, $32

DATA logone<>+0(SB)/8, $1.0
DATA logone<>+8(SB)/8, $1.0
DATA logone<>+16(SB)/8, $1.0
DATA logone<>+24(SB)/8, $1.0
GLOBL logone<>(SB), RODATA|NOPTR, $32

DATA logtwo<>+0(SB)/8, $2.0
DATA logtwo<>+8(SB)/8, $2.0
DATA logtwo<>+16(SB)/8, $2.0
DATA logtwo<>+24(SB)/8, $2.0
GLOBL logtwo<>(SB), RODATA|NOPTR, $32

DATA loghalfc<>+0(SB)/8, $0.5
DATA loghalfc<>+8(SB)/8, $0.5
DATA loghalfc<>+16(SB)/8, $0.5
DATA loghalfc<>+24(SB)/8, $0.5
GLOBL loghalfc<>(SB), RODATA|NOPTR, $32

DATA logln2hi<>+0(SB)/8, $6.93147180369123816490e-01
DATA logln2hi<>+8(SB)/8, $6.93147180369123816490e-01
DATA logln2hi<>+16(SB)/8, $6.93147180369123816490e-01
DATA logln2hi<>+24(SB)/8, $6.93147180369123816490e-01
GLOBL logln2hi<>(SB), RODATA|NOPTR, $32

DATA logln2lo<>+0(SB)/8, $1.90821492927058770002e-10
DATA logln2lo<>+8(SB)/8, $1.90821492927058770002e-10
DATA logln2lo<>+16(SB)/8, $1.90821492927058770002e-10
DATA logln2lo<>+24(SB)/8, $1.90821492927058770002e-10
GLOBL logln2lo<>(SB), RODATA|NOPTR, $32

DATA logl1<>+0(SB)/8, $6.666666666666735130e-01
DATA logl1<>+8(SB)/8, $6.666666666666735130e-01
DATA logl1<>+16(SB)/8, $6.666666666666735130e-01
DATA logl1<>+24(SB)/8, $6.666666666666735130e-01
GLOBL logl1<>(SB), RODATA|NOPTR, $32

DATA logl2<>+0(SB)/8, $3.999999999940941908e-01
DATA logl2<>+8(SB)/8, $3.999999999940941908e-01
DATA logl2<>+16(SB)/8, $3.999999999940941908e-01
DATA logl2<>+24(SB)/8, $3.999999999940941908e-01
GLOBL logl2<>(SB), RODATA|NOPTR, $32

DATA logl3<>+0(SB)/8, $2.857142874366239149e-01
DATA logl3<>+8(SB)/8, $2.857142874366239149e-01
DATA logl3<>+16(SB)/8, $2.857142874366239149e-01
DATA logl3<>+24(SB)/8, $2.857142874366239149e-01
GLOBL logl3<>(SB), RODATA|NOPTR, $32

DATA logl4<>+0(SB)/8, $2.222219843214978396e-01
DATA logl4<>+8(SB)/8, $2.222219843214978396e-01
DATA logl4<>+16(SB)/8, $2.222219843214978396e-01
DATA logl4<>+24(SB)/8, $2.222219843214978396e-01
GLOBL logl4<>(SB), RODATA|NOPTR, $32

DATA logl5<>+0(SB)/8, $1.818357216161805012e-01
DATA logl5<>+8(SB)/8, $1.818357216161805012e-01
DATA logl5<>+16(SB)/8, $1.818357216161805012e-01
DATA logl5<>+24(SB)/8, $1.818357216161805012e-01
GLOBL logl5<>(SB), RODATA|NOPTR, $32

DATA logl6<>+0(SB)/8, $1.531383769920937332e-01
DATA logl6<>+8(SB)/8, $1.531383769920937332e-01
DATA logl6<>+16(SB)/8, $1.531383769920937332e-01
DATA logl6<>+24(SB)/8, $1.531383769920937332e-01
GLOBL logl6<>(SB), RODATA|NOPTR, $32

DATA logl7<>+0(SB)/8, $1.479819860511658591e-01
DATA logl7<>+8(SB)/8, $1.479819860511658591e-01
DATA logl7<>+16(SB)/8, $1.479819860511658591e-01
DATA logl7<>+24(SB)/8, $1.479819860511658591e-01
GLOBL logl7<>(SB), RODATA|NOPTR, $32

DATA logtiny<>+0(SB)/8, $0x0010000000000000
DATA logtiny<>+8(SB)/8, $0x0010000000000000
DATA logtiny<>+16(SB)/8, $0x0010000000000000
DATA logtiny<>+24(SB)/8, $0x0010000000000000
GLOBL logtiny<>(SB), RODATA|NOPTR, $32

DATA logmax<>+0(SB)/8, $0x7FEFFFFFFFFFFFFF
DATA logmax<>+8(SB)/8, $0x7FEFFFFFFFFFFFFF
DATA logmax<>+16(SB)/8, $0x7FEFFFFFFFFFFFFF
DATA logmax<>+24(SB)/8, $0x7FEFFFFFFFFFFFFF
GLOBL logmax<>(SB), RODATA|NOPTR, $32

// func logAVX2(dst, x []float64) (special bool)
// Sets dst[i] = ln x[i] for len(x) a multiple of 4 (len(dst) ≥ len(x)),
// for x[i] positive, normal and finite; other lanes get meaningless values
// that the caller replaces; special reports whether there is any such lane
// (zero, subnormal, negative, infinite or NaN). With x = f1·2^k, f1 in [0.5, 1) (doubled, and k
// lowered, when f1 < √2/2), f = f1 − 1, s = f/(2 + f):
// ln x = k·ln2hi − ((f²/2 − (s·(f²/2 + R(s²)) + k·ln2lo)) − f).
TEXT ·logAVX2(SB), NOSPLIT, $0-49
	MOVQ   dst_base+0(FP), DI
	MOVQ   x_base+24(FP), SI
	MOVQ   x_len+32(FP), CX
	MOVB   $0, special+48(FP)
	SHRQ   $2, CX
	JZ     done
	VXORPD Y11, Y11, Y11
	VMOVUPD logone<>(SB), Y15
	VMOVUPD logl7<>(SB), Y14
	VMOVUPD logl6<>(SB), Y13
	VMOVUPD loghalfc<>(SB), Y12

loop:
	VMOVUPD (SI), Y0
	// Lanes that are not positive normal finite numbers: not x ≥ 2^−1022
	// (NaN included), or x > the largest double.
	VCMPPD  $9, logtiny<>(SB), Y0, Y3
	VORPD   Y3, Y11, Y11
	VCMPPD  $14, logmax<>(SB), Y0, Y3
	VORPD   Y3, Y11, Y11
	// f1 = mantissa of x with the exponent of 0.5; k = biased exponent − 1022.
	VANDPD  logmant<>(SB), Y0, Y1
	VORPD   loghalf<>(SB), Y1, Y1
	VPSRLQ  $52, Y0, Y2
	VPADDQ  logmagic<>(SB), Y2, Y2
	VSUBPD  logmagicbias<>(SB), Y2, Y2
	// f1 < √2/2: f1 = 2·f1 (as f1 + f1), k = k − 1.
	VCMPPD  $1, logsqrthalf<>(SB), Y1, Y3
	VANDPD  Y3, Y1, Y4
	VADDPD  Y4, Y1, Y1
	VANDPD  Y3, Y15, Y4
	VSUBPD  Y4, Y2, Y2
	// f = f1 − 1, s = f/(2 + f), s2 = s·s, s4 = s2·s2.
	VSUBPD  Y15, Y1, Y1
	VADDPD  logtwo<>(SB), Y1, Y4
	VDIVPD  Y4, Y1, Y4
	VMULPD  Y4, Y4, Y5
	VMULPD  Y5, Y5, Y6
	// t1 = s2·(L1 + s4·(L3 + s4·(L5 + s4·L7))).
	VMULPD  Y14, Y6, Y7
	VADDPD  logl5<>(SB), Y7, Y7
	VMULPD  Y7, Y6, Y7
	VADDPD  logl3<>(SB), Y7, Y7
	VMULPD  Y7, Y6, Y7
	VADDPD  logl1<>(SB), Y7, Y7
	VMULPD  Y7, Y5, Y7
	// t2 = s4·(L2 + s4·(L4 + s4·L6)); R = t1 + t2.
	VMULPD  Y13, Y6, Y8
	VADDPD  logl4<>(SB), Y8, Y8
	VMULPD  Y8, Y6, Y8
	VADDPD  logl2<>(SB), Y8, Y8
	VMULPD  Y8, Y6, Y8
	VADDPD  Y8, Y7, Y7
	// hfsq = 0.5·f·f.
	VMULPD  Y12, Y1, Y9
	VMULPD  Y1, Y9, Y9
	// k·ln2hi − ((hfsq − (s·(hfsq + R) + k·ln2lo)) − f).
	VADDPD  Y7, Y9, Y7
	VMULPD  Y7, Y4, Y7
	VMULPD  logln2lo<>(SB), Y2, Y10
	VADDPD  Y10, Y7, Y7
	VSUBPD  Y7, Y9, Y9
	VSUBPD  Y1, Y9, Y9
	VMULPD  logln2hi<>(SB), Y2, Y10
	VSUBPD  Y9, Y10, Y10
	VMOVUPD Y10, (DI)
	ADDQ    $32, SI
	ADDQ    $32, DI
	DECQ    CX
	JNZ     loop
	VMOVMSKPD Y11, AX
	TESTQ   AX, AX
	SETNE   special+48(FP)
	VZEROUPPER

done:
	RET
