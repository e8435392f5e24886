package contraction

import (
	"math"
	"runtime"
	"sync/atomic"
	"testing"
)

// TestPoolGrowsWithGOMAXPROCS: a pool (and a solver) made while GOMAXPROCS
// is 1 serves a later dispatch under 2 with one worker per goroutine. Before
// the pool sized its workers at dispatch, the solver indexed a one-element
// slice of workspaces from the second goroutine and panicked.
func TestPoolGrowsWithGOMAXPROCS(t *testing.T) {
	defer runtime.GOMAXPROCS(runtime.GOMAXPROCS(1))
	type worker struct{ busy atomic.Int32 }
	made := 0
	pool := NewPool(func() *worker { made++; return &worker{} })
	theta := []float64{0.8, 0.5}
	p, truth := synthetic(6, 5, 80, 2, theta, 9)
	s, err := NewSolver(p)
	if err != nil {
		t.Fatal(err)
	}
	runtime.GOMAXPROCS(2)
	var shared atomic.Int32
	pool.Run(200, func(w *worker, item int) {
		if w.busy.Add(1) != 1 {
			shared.Add(1)
		}
		for i := 0; i < 1000; i++ {
			_ = math.Sqrt(float64(i + item))
		}
		w.busy.Add(-1)
	})
	if shared.Load() != 0 {
		t.Fatalf("a worker was used by two goroutines at once %d times", shared.Load())
	}
	if made != 2 {
		t.Fatalf("%d workers made for 2 goroutines", made)
	}
	if sum := s.Solve(theta, nil); sum.Failures != 0 {
		t.Fatalf("%+v", sum)
	}
	for n := range truth {
		if math.Abs(s.Delta[n]-truth[n]) > 1e-12 {
			t.Fatalf("row %d: δ %v, truth %v", n, s.Delta[n], truth[n])
		}
	}
}

// TestNonFiniteThetaFails: a θ2 with NaN or ±Inf fails every market at once
// instead of "converging" on NaN shares.
func TestNonFiniteThetaFails(t *testing.T) {
	p, _ := synthetic(3, 4, 50, 2, []float64{0.5, 0.5}, 2)
	s, _ := NewSolver(p)
	for _, bad := range [][]float64{{math.NaN(), 0.5}, {0.5, math.Inf(1)}} {
		if sum := s.Solve(bad, nil); sum.Failures != 3 || sum.Iterations != 0 {
			t.Errorf("θ2 = %v: %+v", bad, sum)
		}
	}
	if sum := s.Solve([]float64{0.5, 0.5}, nil); sum.Failures != 0 {
		t.Errorf("a failed θ2 spoils the next solve: %+v", sum)
	}
}

// priceProblem is one market of three products whose second random column
// is price, with two agents at ν = ±1 of weight ½ and a σ on price.
func priceProblem() (*Problem, []float64, []float64) {
	price := []float64{1.0, 1.6, 0.7}
	x := []float64{0.5, -0.2, 1.1}
	p := &Problem{K2: 2, Params: []Param{{Col: 0, Var: 0}, {Col: 1, Var: 0}},
		X2: []float64{x[0], price[0], x[1], price[1], x[2], price[2]}, LogShare: make([]float64, 3),
		Products: []Span{{0, 3}}, Agents: []Span{{0, 2}}, Weight: []float64{0.5, 0.5},
		Vars: [][]float64{{1, -1}}, PriceCol: 1}
	return p, price, []float64{-1.2, 0.4, -0.3}
}

// TestPriceJacobianByHand: ∂s_j/∂p_l = Σ_i w_i α_i s_ij (1[j=l] − s_il) and
// Λ_j = Σ_i w_i α_i s_ij, with the agent shares written out by hand
// (common practice: the logit derivative agent by agent), and the whole
// matrix against central differences of the shares in price (δ moves by
// β_price·Δp and the tastes by σ_price ν Δp).
func TestPriceJacobianByHand(t *testing.T) {
	p, price, delta := priceProblem()
	theta := []float64{0.7, 0.4}
	beta := -2.0
	w := p.NewWorker()
	w.Set(0, theta)
	alpha := make([]float64, 2)
	w.Alpha(beta, alpha)
	dsdp, lambda := make([]float64, 9), make([]float64, 3)
	w.PriceJacobian(delta, alpha, dsdp, lambda)
	nu := []float64{1, -1}
	share := func(i, j int, d, pr []float64) float64 {
		u := func(l int) float64 { return d[l] + theta[0]*nu[i]*p.X2[2*l] + theta[1]*nu[i]*pr[l] }
		den := 1.0
		for l := 0; l < 3; l++ {
			den += math.Exp(u(l))
		}
		return math.Exp(u(j)) / den
	}
	for i, a := range alpha {
		if want := beta + theta[1]*nu[i]; math.Abs(a-want) > 1e-15 {
			t.Errorf("α_%d = %v, want %v", i, a, want)
		}
	}
	for j := 0; j < 3; j++ {
		lam := 0.0
		for i := range nu {
			lam += 0.5 * alpha[i] * share(i, j, delta, price)
		}
		if math.Abs(lambda[j]-lam) > 1e-15 {
			t.Errorf("Λ_%d = %.17g, by hand %.17g", j, lambda[j], lam)
		}
		for l := 0; l < 3; l++ {
			want := 0.0
			for i := range nu {
				ind := 0.0
				if j == l {
					ind = 1
				}
				want += 0.5 * alpha[i] * share(i, j, delta, price) * (ind - share(i, l, delta, price))
			}
			if math.Abs(dsdp[j*3+l]-want) > 1e-15 {
				t.Errorf("∂s_%d/∂p_%d = %.17g, by hand %.17g", j, l, dsdp[j*3+l], want)
			}
			h := 1e-6
			up, dn := append([]float64(nil), price...), append([]float64(nil), price...)
			up[l] += h
			dn[l] -= h
			dUp, dDn := append([]float64(nil), delta...), append([]float64(nil), delta...)
			dUp[l] += beta * h
			dDn[l] -= beta * h
			fd := 0.0
			for i := range nu {
				fd += 0.5 * (share(i, j, dUp, up) - share(i, j, dDn, dn)) / (2 * h)
			}
			if math.Abs(dsdp[j*3+l]-fd) > 1e-9 {
				t.Errorf("∂s_%d/∂p_%d = %.12g, central difference %.12g", j, l, dsdp[j*3+l], fd)
			}
		}
	}
}

// TestRepriceAndLogInclusive: after Reprice the shares are those of the new
// prices, and the log-inclusive value is ln(1 + Σ_j exp(δ_j + μ_ij)) agent
// by agent (written out by hand).
func TestRepriceAndLogInclusive(t *testing.T) {
	p, _, delta := priceProblem()
	theta := []float64{0.7, 0.4}
	w := p.NewWorker()
	w.Set(0, theta)
	newPrice := []float64{1.3, 1.1, 0.9}
	w.Reprice(newPrice)
	incl := make([]float64, 2)
	w.LogInclusive(delta, incl)
	got := make([]float64, 3)
	w.Shares(delta, got)
	nu := []float64{1, -1}
	want := make([]float64, 3)
	for i := range nu {
		den := 1.0
		e := make([]float64, 3)
		for l := 0; l < 3; l++ {
			e[l] = math.Exp(delta[l] + theta[0]*nu[i]*p.X2[2*l] + theta[1]*nu[i]*newPrice[l])
			den += e[l]
		}
		if math.Abs(incl[i]-math.Log(den)) > 1e-14 {
			t.Errorf("agent %d: inclusive value %.17g, by hand %.17g", i, incl[i], math.Log(den))
		}
		for l := range want {
			want[l] += 0.5 * e[l] / den
		}
	}
	for j := range got {
		if math.Abs(got[j]-want[j]) > 1e-15 {
			t.Errorf("share %d after repricing: %.17g, by hand %.17g", j, got[j], want[j])
		}
	}
	if p.X2[1] != 1.0 {
		t.Errorf("Reprice changed the problem's X2")
	}
}

// plainMarket hides the optional closed-form PriceJacobianTheta of the
// family it wraps, so Worker falls back to finite differences.
type plainMarket struct{ Market }

// TestPriceJacobianTheta compares the closed form of d(∂s/∂p)/dθ2 of the
// random-coefficients logit (σ on a characteristic and on price, so the
// α_i term is exercised) with the finite-difference fallback every family
// gets, moving δ along an arbitrary ∂δ/∂θ2.
func TestPriceJacobianTheta(t *testing.T) {
	p, _, delta := priceProblem()
	p.Weight = []float64{0.3, 0.7}
	theta := []float64{0.7, 0.4}
	ddelta := []float64{0.3, -0.2, 1.1, 0.4, -0.5, 0.8}
	closed, fd := p.NewWorker(), p.NewWorker()
	fd.Market = plainMarket{fd.Market}
	got, want := make([]float64, 2*9), make([]float64, 2*9)
	closed.Set(0, theta)
	closed.PriceJacobianTheta(delta, -2.0, ddelta, got)
	fd.Set(0, theta)
	fd.PriceJacobianTheta(delta, -2.0, ddelta, want)
	worst := 0.0
	for n := range got {
		worst = math.Max(worst, math.Abs(got[n]-want[n]))
		// Central differences with h = 1e-6: O(h²) truncation and about
		// 1e-10 of rounding; measured 1e-10.
		if math.Abs(got[n]-want[n]) > 1e-8 {
			t.Errorf("entry %d: closed form %.12g, central differences %.12g", n, got[n], want[n])
		}
	}
	t.Logf("largest difference %.2g", worst)
}

// TestPriceHessian checks dst_jm = Σ_l u_jl ∂²s_l/∂p_j∂p_m two ways: against
// the second derivative written out agent by agent,
// Σ_i w_i α_i² s_il [(1[l=j] − s_ij)(1[l=m] − s_im) − s_ij(1[j=m] − s_im)]
// (differentiating ∂s_l/∂p_j = Σ_i w_i α_i s_il (1[l=j] − s_ij) once more,
// worked by hand), and against central differences of ∂s/∂p in price (δ
// moves by β_price·Δp and the tastes by the price column of X2). The market
// has six products, nine agents and a random price coefficient, and u has
// zeros where an ownership mask would put them.
func TestPriceHessian(t *testing.T) {
	theta := []float64{0.5, 0.8}
	p, delta := synthetic(1, 6, 9, 2, theta, 4)
	p.PriceCol = 1
	J, beta := 6, -1.5
	price := make([]float64, J)
	for j := range price {
		price[j] = 1 + p.X2[j*2+1]
		p.X2[j*2+1] = price[j]
	}
	u := make([]float64, J*J)
	for j := 0; j < J; j++ {
		for l := 0; l < J; l++ {
			if j%2 == l%2 { // two "firms": even and odd products
				u[j*J+l] = 0.3 + 0.1*float64(l) - 0.05*float64(j)
			}
		}
	}
	w := p.NewWorker()
	w.Set(0, theta)
	alpha := make([]float64, 9)
	w.Alpha(beta, alpha)
	got := make([]float64, J*J)
	if !w.PriceHessian(delta, alpha, u, got) {
		t.Fatal("the random-coefficients logit has no closed-form PriceHessian")
	}

	// By hand from the agent shares.
	sij := make([][]float64, 9) // agent i, product j
	for i := range sij {
		sij[i] = make([]float64, J)
		den := 1.0
		for j := 0; j < J; j++ {
			sij[i][j] = math.Exp(delta[j] + theta[0]*p.Vars[0][i]*p.X2[j*2] + theta[1]*p.Vars[1][i]*price[j])
			den += sij[i][j]
		}
		for j := range sij[i] {
			sij[i][j] /= den
		}
	}
	ind := func(a, b int) float64 {
		if a == b {
			return 1
		}
		return 0
	}
	worstHand, worstFD := 0.0, 0.0
	dUp, dDn := make([]float64, J*J), make([]float64, J*J)
	lam := make([]float64, J)
	for m := 0; m < J; m++ {
		h := 1e-5
		pu, pd := append([]float64(nil), price...), append([]float64(nil), price...)
		du, dd := append([]float64(nil), delta...), append([]float64(nil), delta...)
		pu[m], pd[m], du[m], dd[m] = pu[m]+h, pd[m]-h, du[m]+beta*h, dd[m]-beta*h
		w.Reprice(pu)
		w.PriceJacobian(du, alpha, dUp, lam)
		w.Reprice(pd)
		w.PriceJacobian(dd, alpha, dDn, lam)
		for j := 0; j < J; j++ {
			hand, fd := 0.0, 0.0
			for l := 0; l < J; l++ {
				for i := range sij {
					s := sij[i]
					hand += u[j*J+l] * p.Weight[i] * alpha[i] * alpha[i] * s[l] *
						((ind(l, j)-s[j])*(ind(l, m)-s[m]) - s[j]*(ind(j, m)-s[m]))
				}
				fd += u[j*J+l] * (dUp[l*J+j] - dDn[l*J+j]) / (2 * h)
			}
			worstHand = math.Max(worstHand, math.Abs(got[j*J+m]-hand))
			worstFD = math.Max(worstFD, math.Abs(got[j*J+m]-fd))
		}
	}
	t.Logf("largest differences: %.2g by hand, %.2g central differences", worstHand, worstFD)
	// Measured: 6.9e-18 by hand (entries of order 1e-2) and 7.5e-13 against
	// central differences with h = 1e-5 (truncation error of order h²).
	if worstHand > 5e-17 || worstFD > 3e-12 {
		t.Errorf("PriceHessian differs by %.3g from the formula and %.3g from central differences", worstHand, worstFD)
	}
	w.Reprice(price)
	allocs := testing.AllocsPerRun(20, func() { w.PriceHessian(delta, alpha, u, got) })
	if allocs != 0 {
		t.Errorf("%v allocations per PriceHessian", allocs)
	}
}
