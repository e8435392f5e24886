package contraction

import (
	"math"
	"math/rand/v2"
	"testing"
)

func TestExp(t *testing.T) {
	rng := rand.New(rand.NewPCG(7, 7))
	worst := 0.0
	check := func(x float64) {
		got, want := exp(x), math.Exp(x)
		if want == 0 {
			if got != 0 {
				t.Fatalf("exp(%v) = %v, want 0", x, got)
			}
			return
		}
		r := math.Abs(got/want - 1)
		worst = math.Max(worst, r)
		if r > 8e-16 {
			t.Fatalf("exp(%v) = %v, math.Exp %v, relative error %g", x, got, want, r)
		}
	}
	for i := 0; i < 1_000_000; i++ {
		check((rng.Float64()*2 - 1) * 40)
		check(-rng.Float64() * 745)
	}
	for _, x := range []float64{0, -0.0, 1e-300, -1e-300, 699.9, -699.9, 700, -700, 709, -745, -800, math.Inf(-1)} {
		check(x)
	}
	if !math.IsInf(exp(800), 1) || !math.IsNaN(exp(math.NaN())) {
		t.Fatal("exp of 800 or NaN")
	}
	t.Logf("largest relative error against math.Exp: %g", worst)
}

var sink float64

func BenchmarkExp(b *testing.B) {
	x := -3.7
	for i := 0; i < b.N; i++ {
		sink += exp(x)
		x += 1e-9
	}
}

func BenchmarkMathExp(b *testing.B) {
	x := -3.7
	for i := 0; i < b.N; i++ {
		sink += math.Exp(x)
		x += 1e-9
	}
}

func BenchmarkExpSlice(b *testing.B) {
	xs := make([]float64, 10000)
	for i := range xs {
		xs[i] = -float64(i%500) / 50
	}
	ys := make([]float64, len(xs))
	b.Run("rcdemand", func(b *testing.B) {
		for n := 0; n < b.N; n++ {
			for i, x := range xs {
				ys[i] = exp(x)
			}
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*len(xs)), "ns/exp")
	})
	b.Run("math", func(b *testing.B) {
		for n := 0; n < b.N; n++ {
			for i, x := range xs {
				ys[i] = math.Exp(x)
			}
		}
		b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*len(xs)), "ns/exp")
	})
}

func BenchmarkExpInPlace(b *testing.B) {
	xs := make([]float64, 10000)
	for n := 0; n < b.N; n++ {
		for i := range xs {
			xs[i] = -float64(i%500) / 50
		}
		expInPlace(xs)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*len(xs)), "ns/exp")
}
