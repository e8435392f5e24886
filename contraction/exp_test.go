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

func BenchmarkExpShifted(b *testing.B) {
	src := make([]float64, 10000)
	for i := range src {
		src[i] = -float64(i%500) / 50
	}
	xs := make([]float64, len(src))
	for n := 0; n < b.N; n++ {
		copy(xs, src)
		expShifted(xs)
	}
	b.ReportMetric(float64(b.Elapsed().Nanoseconds())/float64(b.N*len(xs)), "ns/exp")
}

// TestExpShifted checks the vectorised path (and its scalar tail) against
// math.Exp on slices of every length up to 11 and on a long random slice.
func TestExpShifted(t *testing.T) {
	defer func(v bool) { useVector = v }(useVector)
	for _, vec := range []bool{useVector, false} {
		useVector = vec
		testExpShifted(t)
	}
}

func testExpShifted(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	worst := 0.0
	for n := 0; n < 12; n++ {
		for rep := 0; rep < 200; rep++ {
			xs := make([]float64, n)
			for i := range xs {
				xs[i] = (rng.Float64()*2 - 1) * 699
			}
			want := make([]float64, n)
			for i, x := range xs {
				want[i] = math.Exp(x)
			}
			expShifted(xs)
			for i := range xs {
				r := math.Abs(xs[i]/want[i] - 1)
				worst = math.Max(worst, r)
				if r > 1e-15 {
					t.Fatalf("n=%d: exp = %v, math.Exp %v (relative error %g)", n, xs[i], want[i], r)
				}
			}
		}
	}
	// Arguments below −700 count as −700, on both paths.
	xs := []float64{-800, 0, -1e4, -700, -1, 0}
	expShifted(xs)
	if e := math.Exp(-700); math.Abs(xs[0]/e-1) > 1e-15 || xs[1] != 1 || math.Abs(xs[2]/e-1) > 1e-15 || math.Abs(xs[5]-1) > 0 {
		t.Fatalf("clamped values: %v", xs)
	}
	t.Logf("vector path %v, largest relative error %g", useVector, worst)
}

// TestLogFast: the table-driven logarithm against math.Log, in absolute
// error relative to max(1, |ln x|) (what the nested logit's exponents need),
// over twenty orders of magnitude either side of one and near one.
func TestLogFast(t *testing.T) {
	rng := rand.New(rand.NewPCG(3, 3))
	worst := 0.0
	check := func(x float64) {
		got, want := logFast(x), math.Log(x)
		if math.IsNaN(want) || math.IsInf(want, 0) {
			if !(math.IsNaN(got) && math.IsNaN(want)) && got != want {
				t.Fatalf("logFast(%v) = %v, want %v", x, got, want)
			}
			return
		}
		r := math.Abs(got-want) / math.Max(1, math.Abs(want))
		worst = math.Max(worst, r)
		if r > 4e-16 {
			t.Fatalf("logFast(%v) = %.17g, math.Log %.17g, error %g", x, got, want, r)
		}
	}
	for i := 0; i < 1_000_000; i++ {
		check(math.Exp((rng.Float64()*2 - 1) * 46))
		check(1 + (rng.Float64()*2-1)*1e-3)
		check(rng.Float64() * 3)
	}
	for _, x := range []float64{1, math.Sqrt2, math.Nextafter(math.Sqrt2, 2), 2, 0.5, 1e-300, 1e300, math.MaxFloat64,
		0x1p-1022, 5e-324, 0, -0.0, -1, math.Inf(1), math.NaN()} {
		check(x)
	}
	t.Logf("largest error against math.Log: %g", worst)
}

func BenchmarkLogFast(b *testing.B) {
	x := 0.37
	for i := 0; i < b.N; i++ {
		sink += logFast(x)
		x += 1e-9
	}
}

func BenchmarkMathLog(b *testing.B) {
	x := 0.37
	for i := 0; i < b.N; i++ {
		sink += math.Log(x)
		x += 1e-9
	}
}
