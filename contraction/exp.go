package contraction

import "math"

// The share map spends its time exponentiating. exp below is a table-driven
// exponential of the usual kind (common practice in libm implementations):
// x = (k·N + m)·ln2/N + r with N = 4096, |r| ≤ ln2/(2N), so that
// exp(x) = 2^k · 2^(m/N) · exp(r), with 2^(m/N) from a table built by
// math.Exp2 (32 KB) and exp(r) from its Taylor polynomial of degree 3
// (truncation error r⁴/24 < 3e-18 on |r| ≤ 8.5e-5). Its relative error
// against math.Exp is a few units in the last place (TestExp); it is two to
// three times as fast, and it falls back to math.Exp outside [−700, 700].
const (
	expBits    = 12
	expN       = 1 << expBits
	expShift   = 0x1.8p52 // adding it rounds to an integer held in the low mantissa bits
	expInvLn2N = expN / math.Ln2
	expLn2NHi  = 0x1.62e42fe000000p-1 / expN  // ln2/N in two parts: the high part has
	expLn2NLo  = 0x1.f473de6af278fp-30 / expN // 25 trailing zero bits so k·hi is exact
)

var expTable [expN]float64

func init() {
	for m := range expTable {
		expTable[m] = math.Exp2(float64(m) / expN)
	}
}

func exp(x float64) float64 {
	if !(x > -700 && x < 700) {
		return math.Exp(x)
	}
	t := x*expInvLn2N + expShift
	k := int64(math.Float64bits(t)) // low bits hold round(x·N/ln2)
	kd := t - expShift
	r := x - kd*expLn2NHi - kd*expLn2NLo
	p := 1 + r*(1+r*(1.0/2+r*(1.0/6)))
	scale := math.Float64frombits(uint64((k>>expBits)+1023) << 52 & (0x7ff << 52))
	return expTable[k&(expN-1)] * p * scale
}

// expShifted replaces every x of xs by exp(max(x, −700)). It is for the
// max-shifted arguments of the share computation, which are ≤ 0: a term below
// e^−700 (< 1e-304) only ever meets terms of order one there, so treating it
// as e^−700 changes nothing representable. On amd64 with AVX2 and FMA it uses
// the vectorised kernel of exp_amd64.s, four values per instruction, for all
// but the last len(xs) mod 4 values; elsewhere the scalar exp.
func expShifted(xs []float64) {
	n := 0
	if useVector {
		n = len(xs) &^ 3
		expAVX2(xs[:n])
	}
	for i, x := range xs[n:] {
		xs[n+i] = exp(max(x, -700))
	}
}
