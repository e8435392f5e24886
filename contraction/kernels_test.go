package contraction

import (
	"math"
	"math/rand/v2"
	"testing"
)

// TestKernels checks dot and axpy against plain loops for every length up
// to 70 (common practice: kernels with tails are tested at each length).
func TestKernels(t *testing.T) {
	defer func(v bool) { useVector = v }(useVector)
	for _, vec := range []bool{useVector, false} {
		useVector = vec
		testKernels(t)
	}
}

func testKernels(t *testing.T) {
	rng := rand.New(rand.NewPCG(5, 5))
	for n := 0; n <= 70; n++ {
		x, y := make([]float64, n), make([]float64, n)
		for i := range x {
			x[i], y[i] = rng.NormFloat64(), rng.NormFloat64()
		}
		want, scale := 0.0, 0.0
		for i := range x {
			want += x[i] * y[i]
			scale += math.Abs(x[i] * y[i])
		}
		if got := dot(x, y); math.Abs(got-want) > 1e-14*math.Max(1, scale) {
			t.Fatalf("dot n=%d: %v, loop %v", n, got, want)
		}
		z := append([]float64(nil), y...)
		axpy(0.7, x, z)
		for i := range z {
			if w := y[i] + 0.7*x[i]; math.Abs(z[i]-w) > 1e-15*math.Max(1, math.Abs(w)) {
				t.Fatalf("axpy n=%d i=%d: %v, loop %v", n, i, z[i], w)
			}
		}
	}
}
