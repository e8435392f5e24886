package contraction

import (
	"math"
	"math/rand/v2"
	"testing"
)

// fdlibmLog is the natural logarithm of FreeBSD's e_log.c as Go's
// math/log.go ports it (the function log there, Go 1.26), for normal
// positive finite x: the reference the vector kernel must equal bit for bit.
func fdlibmLog(x float64) float64 {
	const (
		Ln2Hi = 6.93147180369123816490e-01 /* 3fe62e42 fee00000 */
		Ln2Lo = 1.90821492927058770002e-10 /* 3dea39ef 35793c76 */
		L1    = 6.666666666666735130e-01   /* 3FE55555 55555593 */
		L2    = 3.999999999940941908e-01   /* 3FD99999 9997FA04 */
		L3    = 2.857142874366239149e-01   /* 3FD24924 94229359 */
		L4    = 2.222219843214978396e-01   /* 3FCC71C5 1D8E78AF */
		L5    = 1.818357216161805012e-01   /* 3FC74664 96CB03DE */
		L6    = 1.531383769920937332e-01   /* 3FC39A09 D078C69F */
		L7    = 1.479819860511658591e-01   /* 3FC2F112 DF3E5244 */
	)
	f1, ki := math.Frexp(x)
	if f1 < math.Sqrt2/2 {
		f1 *= 2
		ki--
	}
	f := f1 - 1
	k := float64(ki)
	s := f / (2 + f)
	s2 := s * s
	s4 := s2 * s2
	t1 := s2 * (L1 + s4*(L3+s4*(L5+s4*L7)))
	t2 := s4 * (L2 + s4*(L4+s4*L6))
	R := t1 + t2
	hfsq := 0.5 * f * f
	return k*Ln2Hi - ((hfsq - (s*(hfsq+R) + k*Ln2Lo)) - f)
}

// TestLogVec: on the vector path every lane equals the fdlibm algorithm
// exactly and is within one unit in the last place of math.Log; the values
// that are not positive normal finite numbers, and the tail of each length,
// agree with math.Log (or logFast's accuracy). Lengths 0 to 13 cover every
// tail; the arguments span the doubles from subnormal to the largest, near
// one, and the reduction's switch at √2/2.
func TestLogVec(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 8))
	var xs []float64
	for range 200_000 {
		xs = append(xs, math.Exp((rng.Float64()*2-1)*700), 1+(rng.Float64()*2-1)*1e-6, rng.Float64()*2)
	}
	xs = append(xs, 1, math.Sqrt2/2, math.Nextafter(math.Sqrt2/2, 0), math.Nextafter(math.Sqrt2/2, 1), 0.5, 2, 0x1p-1022,
		math.MaxFloat64, 5e-324, 1e-310, 0, -0.0, -1, math.Inf(1), math.Inf(-1), math.NaN())
	worst := 0.0
	for n := 0; n <= 13; n++ {
		for start := 0; start+n <= len(xs); start += n + 1 + len(xs)/40 {
			in := xs[start : start+n]
			out := make([]float64, n)
			logVec(out, in)
			for i, x := range in {
				want := math.Log(x)
				if math.IsNaN(want) || math.IsInf(want, 0) {
					if out[i] != want && !(math.IsNaN(out[i]) && math.IsNaN(want)) {
						t.Fatalf("n=%d: log(%v) = %v, want %v", n, x, out[i], want)
					}
					continue
				}
				ulp := math.Abs(math.Nextafter(want, math.Inf(1)) - want)
				r := math.Abs(out[i]-want) / math.Max(ulp, 4e-16*math.Max(1, math.Abs(want)))
				worst = math.Max(worst, math.Abs(out[i]-want)/ulp)
				if r > 1 {
					t.Fatalf("n=%d: log(%v) = %.17g, math.Log %.17g", n, x, out[i], want)
				}
				vector := useVector && i < n&^3 && x >= 0x1p-1022 && x <= math.MaxFloat64
				if vector && out[i] != fdlibmLog(x) {
					t.Fatalf("n=%d, lane %d: log(%v) = %.17g, the fdlibm algorithm %.17g", n, i, x, out[i], fdlibmLog(x))
				}
			}
		}
	}
	// Each value that is not a positive normal finite number, in each lane
	// of a vector among ordinary ones.
	for _, v := range []float64{0, math.Copysign(0, -1), -1, 5e-324, 1e-310, math.Inf(1), math.Inf(-1), math.NaN()} {
		for lane := range 8 {
			in := []float64{0.3, 1.7, 2.5, 9, 1e-5, 4e7, 0.9, 1.1}
			in[lane] = v
			out := make([]float64, len(in))
			logVec(out, in)
			for i, x := range in {
				want := math.Log(x)
				exact := math.IsNaN(want) || math.IsInf(want, 0) || x < 0x1p-1022
				if exact && out[i] != want && !(math.IsNaN(out[i]) && math.IsNaN(want)) ||
					!exact && math.Abs(out[i]-want) > 4e-16*math.Max(1, math.Abs(want)) {
					t.Fatalf("log(%v) in lane %d of %v = %v, want %v", x, i, in, out[i], want)
				}
			}
		}
	}
	t.Logf("vector path %v, largest difference from math.Log %.2g ulp", useVector, worst)
}

func BenchmarkLogVec(b *testing.B) {
	xs := make([]float64, 1000)
	for i := range xs {
		xs[i] = 0.37 + float64(i)*1e-3
	}
	dst := make([]float64, len(xs))
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		logVec(dst, xs)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*len(xs)), "ns/log")
}
