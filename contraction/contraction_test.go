package contraction

import (
	"math"
	"math/rand/v2"
	"testing"
)

// synthetic builds a problem of T markets, J products, I agents and K2 random
// columns with one σ per column, and shares generated from known δ at theta.
func synthetic(T, J, I, K2 int, theta []float64, seed uint64) (*Problem, []float64) {
	rng := rand.New(rand.NewPCG(seed, 1))
	N := T * J
	p := &Problem{K2: K2, X2: make([]float64, N*K2), LogShare: make([]float64, N), PriceCol: -1}
	for k := 0; k < K2; k++ {
		p.Params = append(p.Params, Param{Col: k, Var: k})
		p.Vars = append(p.Vars, make([]float64, T*I))
	}
	p.Weight = make([]float64, T*I)
	for t := 0; t < T; t++ {
		p.Products = append(p.Products, Span{t * J, (t + 1) * J})
		p.Agents = append(p.Agents, Span{t * I, (t + 1) * I})
		for i := t * I; i < (t+1)*I; i++ {
			p.Weight[i] = 1 / float64(I)
			for k := range p.Vars {
				p.Vars[k][i] = rng.NormFloat64()
			}
		}
	}
	for n := 0; n < N; n++ {
		p.X2[n*K2] = 1
		for k := 1; k < K2; k++ {
			p.X2[n*K2+k] = rng.Float64()*2 - 1
		}
	}
	truth := make([]float64, N)
	for n := range truth {
		truth[n] = -3.7 + rng.NormFloat64()*0.5
	}
	w := p.NewWorker()
	s := make([]float64, J)
	for t := 0; t < T; t++ {
		w.Set(t, theta)
		m := p.Products[t]
		w.Shares(truth[m.Start:m.End], s)
		for j := range s {
			p.LogShare[m.Start+j] = math.Log(s[j])
		}
	}
	return p, truth
}

func TestLogitInversionAtZeroSigma(t *testing.T) {
	// Berry (1994): with θ2 = 0, δ_j = ln s_j − ln s_0 exactly.
	p, truth := synthetic(5, 6, 50, 2, []float64{0, 0}, 1)
	s, err := NewSolver(p)
	if err != nil {
		t.Fatal(err)
	}
	// A first Solve starts from the logit inversion; the second starts
	// away from the answer.
	s.Solve([]float64{0, 0}, nil)
	s.Delta[0] += 0.5
	sum := s.Solve([]float64{0, 0}, nil)
	if sum.Iterations == 0 {
		t.Fatal("the second Solve did not iterate: it did not start away from the answer")
	}
	if sum.Failures != 0 {
		t.Fatalf("failures: %+v", sum)
	}
	logit := p.LogitStart()
	for n := range truth {
		if d := math.Abs(s.Delta[n] - logit[n]); d > 1e-12 {
			t.Fatalf("row %d: δ %v, logit %v", n, s.Delta[n], logit[n])
		}
		if d := math.Abs(s.Delta[n] - truth[n]); d > 1e-12 {
			t.Fatalf("row %d: δ %v, truth %v", n, s.Delta[n], truth[n])
		}
	}
}

// TestColdMarketsStartFromTheWorker: a market not solved since NewSolver or
// Reset starts from the worker's start whatever Delta holds, for the RC
// logit as for a family with a start of its own, so the solve matches a new
// solver's iteration for iteration and bit for bit.
func TestColdMarketsStartFromTheWorker(t *testing.T) {
	theta := []float64{0.8, 0.5}
	p, _ := synthetic(4, 5, 60, 2, theta, 7)
	fresh, _ := NewSolver(p)
	want := fresh.Solve(theta, nil)
	s, _ := NewSolver(p)
	for round := 0; round < 2; round++ {
		for n := range s.Delta {
			s.Delta[n] = math.NaN()
		}
		got := s.Solve(theta, nil)
		if got != want {
			t.Errorf("round %d: %+v, a new solver %+v", round, got, want)
		}
		for n, d := range s.Delta {
			if math.Float64bits(d) != math.Float64bits(fresh.Delta[n]) {
				t.Fatalf("round %d row %d: δ %v, a new solver's %v", round, n, d, fresh.Delta[n])
			}
		}
		s.Reset()
	}
}

func TestPlainAndSquaremAgree(t *testing.T) {
	theta := []float64{1.0, 0.7, 1.5}
	p, truth := synthetic(8, 10, 200, 3, theta, 2)
	for _, acc := range []bool{false, true} {
		s, _ := NewSolver(p)
		s.Accelerate = acc
		s.MaxIterations = 100000
		sum := s.Solve(theta, nil)
		if sum.Failures != 0 {
			t.Fatalf("accelerate=%v: %+v", acc, sum)
		}
		for n := range truth {
			if d := math.Abs(s.Delta[n] - truth[n]); d > 1e-12 {
				t.Fatalf("accelerate=%v row %d: δ %v, truth %v", acc, n, s.Delta[n], truth[n])
			}
		}
		t.Logf("accelerate=%v: %d map evaluations in all, at most %d per market", acc, sum.Iterations, sum.MaxIterations)
	}
}

func TestTwoPointClosedForm(t *testing.T) {
	// With two agents at ν = ±1 of weight 1/2, the share is the average of two
	// plain logit shares, written out by hand (common practice).
	x := []float64{1, 0.5, 2}
	delta := []float64{-1, 0.3, -2}
	sigma := 0.8
	p := &Problem{K2: 1, Params: []Param{{0, 0}}, X2: x, LogShare: make([]float64, 3),
		Products: []Span{{0, 3}}, Agents: []Span{{0, 2}}, Weight: []float64{0.5, 0.5},
		Vars: [][]float64{{1, -1}}, PriceCol: -1}
	w := p.NewWorker()
	w.Set(0, []float64{sigma})
	got := make([]float64, 3)
	w.Shares(delta, got)
	for j := range x {
		want := 0.0
		for _, nu := range []float64{1, -1} {
			den := 1.0
			for l := range x {
				den += math.Exp(delta[l] + sigma*nu*x[l])
			}
			want += 0.5 * math.Exp(delta[j]+sigma*nu*x[j]) / den
		}
		if math.Abs(got[j]-want) > 1e-15 {
			t.Errorf("share %d: got %v want %v", j, got[j], want)
		}
	}
}

func TestExtremeSharesAndSigma(t *testing.T) {
	// σ = 10 on a characteristic up to 3 and shares down to 1e-12 must invert
	// without overflow or NaN; an absurd δ is reported as a failure, not NaN.
	theta := []float64{10, 10}
	p, _ := synthetic(2, 4, 100, 2, theta, 5)
	p.LogShare[0] = math.Log(1e-12)
	p.LogShare[5] = math.Log(3e-12)
	s, _ := NewSolver(p)
	sum := s.Solve(theta, nil)
	if sum.Failures != 0 {
		t.Fatalf("failures %+v", sum)
	}
	for n, d := range s.Delta {
		if math.IsNaN(d) || math.IsInf(d, 0) {
			t.Fatalf("row %d: δ = %v", n, d)
		}
	}
	w := p.NewWorker()
	w.Set(0, theta)
	got := make([]float64, 4)
	for j := 0; j < 4; j++ {
		w.Shares(s.Delta[:4], got)
		if r := math.Abs(got[0]/1e-12 - 1); r > 1e-9 {
			t.Fatalf("share 1e-12 reproduced as %v", got[0])
		}
	}
	if w.Shares([]float64{2000, -2000, 0, 0}, got) {
		t.Fatalf("absurd δ accepted: shares %v", got)
	}
}

func TestJacobianMatchesFiniteDifferences(t *testing.T) {
	theta := []float64{0.8, 0.5, 1.2}
	p, _ := synthetic(3, 5, 100, 3, theta, 3)
	// Central differences with h = 1e-6 carry rounding of about 1e-10
	// relative; measured 5e-10 here, 1e-7 leaves room for other kernels.
	t.Logf("largest relative difference %.3g", checkDeltaJacobian(t, p, theta, 1e-7))
}

// checkDeltaJacobian compares the solver's ∂δ/∂θ2 at theta with central
// differences of the inversion (h = 1e-6), each entry within tol relative
// to max(1, |difference|), and returns the largest relative difference.
func checkDeltaJacobian(t *testing.T, p *Problem, theta []float64, tol float64) float64 {
	t.Helper()
	s, _ := NewSolver(p)
	P := len(theta)
	N := len(p.LogShare)
	jac := make([]float64, N*P)
	if sum := s.Solve(theta, jac); sum.Failures != 0 {
		t.Fatal(sum)
	}
	h := 1e-6
	worst := 0.0
	for q := 0; q < P; q++ {
		up := append([]float64(nil), theta...)
		dn := append([]float64(nil), theta...)
		up[q] += h
		dn[q] -= h
		s.Solve(up, nil)
		dUp := append([]float64(nil), s.Delta...)
		s.Solve(dn, nil)
		for n := 0; n < N; n++ {
			fd := (dUp[n] - s.Delta[n]) / (2 * h)
			rel := math.Abs(fd-jac[n*P+q]) / math.Max(1, math.Abs(fd))
			worst = math.Max(worst, rel)
			if rel > tol {
				t.Errorf("row %d param %d: analytic %v, central difference %v", n, q, jac[n*P+q], fd)
			}
		}
	}
	return worst
}

func TestMarketSolveAllocatesNothing(t *testing.T) {
	theta := []float64{0.8, 0.5, 1.2}
	p, _ := synthetic(2, 10, 100, 3, theta, 4)
	w := p.NewWorker()
	delta := make([]float64, 10)
	jac := make([]float64, 30)
	factor := make([]float64, 100)
	start := p.LogitStart()
	w.Set(1, theta) // size the buffers once, as a pool worker is
	allocs := testing.AllocsPerRun(20, func() {
		w.Set(0, theta)
		copy(delta, start[:10])
		w.Invert(delta, p.LogShare[:10], 1e-14, 1000, true)
		w.DeltaJacobian(delta, jac, factor)
		w.ChordInvert(delta, p.LogShare[:10], factor, 1e-14, 50)
	})
	if allocs != 0 {
		t.Fatalf("%v allocations per market solve", allocs)
	}
}
