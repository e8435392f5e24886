package contraction

import "math"

// logFast is a table-driven natural logarithm for the nested logit's
// per-agent log-sums, of the same kind as exp (common practice in libm
// implementations): x = 2^k·m with m in [1/√2, √2), c = 1 + j/N the table
// point nearest m (N = 512, so |m − c| ≤ 1/1024 and the subtraction is
// exact), r = (m − c)/c with |r| < 1.4e-3, and
//
//	ln x = k ln2 + ln c + ln(1 + r),
//
// ln c from a table built by math.Log and ln(1 + r) from its Taylor
// polynomial of degree 6 (truncation r⁷/7 < 2e-20). k ln2 is split as in
// fdlibm so that k·ln2hi is exact. The error against math.Log is a few
// units in the last place of max(|k ln2|, |ln c|) (TestLogFast); zero,
// negative, subnormal, infinite and NaN arguments go to math.Log.
func logFast(x float64) float64 {
	if !(x >= 0x1p-1022 && x <= math.MaxFloat64) {
		return math.Log(x)
	}
	b := math.Float64bits(x)
	k := int64(b>>52) - 1023
	m := math.Float64frombits(b&(1<<52-1) | 1023<<52)
	if m > math.Sqrt2 {
		m *= 0.5
		k++
	}
	e := &logTable[int((m-1)*logN+(logN+0.5))]
	r := (m - e.c) * e.inv
	p := r * r * (-0.5 + r*(1.0/3+r*(-0.25+r*(0.2+r*(-1.0/6)))))
	kd := float64(k)
	return (kd*logLn2Hi + e.ln) + (kd*logLn2Lo + r + p)
}

const (
	logN     = 512
	logLn2Hi = 6.93147180369123816490e-01 // 0x3fe62e42fee00000: k·logLn2Hi is exact
	logLn2Lo = 1.90821492927058770002e-10 // ln 2 − logLn2Hi
)

// logTable holds, for c = 1 + (i − N)/N, c, 1/c and ln c.
var logTable [2 * logN]struct{ c, inv, ln float64 }

func init() {
	for i := range logTable {
		c := 1 + float64(i-logN)/logN
		if c > 0 {
			logTable[i].c, logTable[i].inv, logTable[i].ln = c, 1/c, math.Log(c)
		}
	}
}

// logVec sets dst[i] = ln xs[i] (len(dst) ≥ len(xs)). On amd64 with AVX2 it
// uses the vectorised kernel of log_amd64.s, four values per instruction
// (about 1.5 ns a value against 5.7 for logFast and 8 for math.Log), for all
// but the last len(xs) mod 4 values, and math.Log for any of those that is
// not a positive normal finite number (the kernel reports whether there is
// one); elsewhere, and for the tail, logFast.
func logVec(dst, xs []float64) {
	n := 0
	if useVector {
		n = len(xs) &^ 3
		if logAVX2(dst[:n], xs[:n]) {
			for i, x := range xs[:n] {
				if !(x >= 0x1p-1022 && x <= math.MaxFloat64) {
					dst[i] = math.Log(x)
				}
			}
		}
	}
	for i, x := range xs[n:] {
		dst[n+i] = logFast(x)
	}
}
