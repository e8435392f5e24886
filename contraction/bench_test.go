package contraction

import (
	"math"
	"testing"
)

// benchProblem is the size the speed targets are stated for: 500 markets ×
// 20 products × 500 normal draws, 3 random coefficients (a constant and two
// characteristics uniform on [−1, 1], σ = 1, 0.5, 1), mean utility
// N(−3.7, 0.5²) so the outside share is about one half, fixed seed.
func benchProblem(b *testing.B) (*Solver, []float64) {
	theta := []float64{1.0, 0.5, 1.0}
	p, _ := synthetic(500, 20, 500, 3, theta, 42)
	s0 := 0.0
	for _, m := range p.Products {
		in := 0.0
		for n := m.Start; n < m.End; n++ {
			in += math.Exp(p.LogShare[n])
		}
		s0 += (1 - in) / float64(len(p.Products))
	}
	b.Logf("mean outside share %.3f", s0)
	s, err := NewSolver(p)
	if err != nil {
		b.Fatal(err)
	}
	return s, theta
}

// BenchmarkInversion is one full SQUAREM inversion of all markets from the
// logit start.
func BenchmarkInversion(b *testing.B) {
	s, theta := benchProblem(b)
	benchInversions(b, s, theta)
}

// benchInversions times full inversions of every market of s (500 of them)
// at theta from the start, reporting the map evaluations per market.
func benchInversions(b *testing.B, s *Solver, theta []float64) {
	s.Solve(theta, nil) // the pool's workers size their buffers once
	b.ReportAllocs()
	b.ResetTimer()
	evals := 0
	for i := 0; i < b.N; i++ {
		s.Reset()
		sum := s.Solve(theta, nil)
		if sum.Failures != 0 {
			b.Fatalf("%d failures", sum.Failures)
		}
		evals += sum.Iterations
	}
	b.ReportMetric(float64(evals)/float64(b.N)/500, "evals/market")
	b.ReportMetric(float64(b.Elapsed().Milliseconds())/float64(b.N), "ms/inversion")
}

// BenchmarkInversionJacobian adds ∂δ/∂θ2 for every market.
func BenchmarkInversionJacobian(b *testing.B) {
	s, theta := benchProblem(b)
	jac := make([]float64, len(s.Delta)*len(theta))
	s.Solve(theta, jac)
	b.ReportAllocs()
	b.ResetTimer()
	for i := 0; i < b.N; i++ {
		s.Reset()
		s.Solve(theta, jac)
	}
}

// BenchmarkJacobians is ∂δ/∂θ2 of one market of 20 products and 500 draws
// with 3 parameters, at its solution.
func BenchmarkJacobians(b *testing.B) {
	theta := []float64{1.0, 0.5, 1.0}
	p, truth := synthetic(1, 20, 500, 3, theta, 42)
	w := p.NewWorker()
	w.Set(0, theta)
	jac := make([]float64, 20*3)
	b.ReportAllocs()
	for i := 0; i < b.N; i++ {
		w.DeltaJacobian(truth, jac, nil)
	}
}

// BenchmarkNestedInversion is BenchmarkInversion for the random-coefficients
// nested logit: the same 500 markets × 20 products × 500 draws and 3 random
// coefficients, products in 2 nests with ρ = 0.5, from the family's start.
func BenchmarkNestedInversion(b *testing.B) {
	theta := []float64{1.0, 0.5, 1.0, 0.5}
	p, _ := nestedProblem(500, 20, 500, 3, 2, false, theta, 42)
	s, err := NewSolver(p)
	if err != nil {
		b.Fatal(err)
	}
	benchInversions(b, s, theta)
}
