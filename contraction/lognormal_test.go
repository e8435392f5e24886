package contraction

import (
	"math"
	"math/rand/v2"
	"testing"
)

// lognormalProblem is T markets of J products with two random columns, a
// characteristic x and price, whose price coefficient is log-normal:
// α_i = −exp(β + σ_p ν_ip + π D_i). Agent variables: ν_x, ν_p, ones, D.
// θ2 = (σ_x, β, σ_p, π).
func lognormalProblem(T, J, I int, seed uint64) *Problem {
	rng := rand.New(rand.NewPCG(seed, 9))
	N := T * J
	p := &Problem{K2: 2, X2: make([]float64, 2*N), LogShare: make([]float64, N), PriceCol: 1,
		LogNormal: []bool{false, true},
		Params:    []Param{{Col: 0, Var: 0}, {Col: 1, Var: 2}, {Col: 1, Var: 1}, {Col: 1, Var: 3}}}
	p.Vars = make([][]float64, 4)
	for t := 0; t < T; t++ {
		p.Products = append(p.Products, Span{t * J, (t + 1) * J})
		p.Agents = append(p.Agents, Span{t * I, (t + 1) * I})
		for i := 0; i < I; i++ {
			p.Weight = append(p.Weight, 1/float64(I))
			p.Vars[0] = append(p.Vars[0], rng.NormFloat64())
			p.Vars[1] = append(p.Vars[1], rng.NormFloat64())
			p.Vars[2] = append(p.Vars[2], 1)
			p.Vars[3] = append(p.Vars[3], rng.NormFloat64())
		}
	}
	for n := 0; n < N; n++ {
		p.X2[2*n] = rng.Float64()*2 - 1
		p.X2[2*n+1] = 1 + rng.Float64()
	}
	for n := range p.LogShare {
		p.LogShare[n] = math.Log(0.3 / float64(J))
	}
	return p
}

// TestLogNormalSharesByHand: shares and α_i of the log-normal price
// coefficient against the definition written out agent by agent.
func TestLogNormalSharesByHand(t *testing.T) {
	p := lognormalProblem(1, 5, 30, 1)
	theta := []float64{0.6, 0.4, 0.5, -0.3}
	delta := []float64{0.5, -0.2, 0.1, 0.9, -1}
	w := p.NewWorker()
	w.Set(0, theta)
	got, alpha := make([]float64, 5), make([]float64, 30)
	w.Shares(delta, got)
	w.Alpha(0, alpha)
	want := make([]float64, 5)
	for i := 0; i < 30; i++ {
		a := -math.Exp(theta[1] + theta[2]*p.Vars[1][i] + theta[3]*p.Vars[3][i])
		if math.Abs(alpha[i]/a-1) > 1e-14 {
			t.Errorf("α_%d = %.17g, by hand %.17g", i, alpha[i], a)
		}
		den := 1.0
		e := make([]float64, 5)
		for j := range e {
			e[j] = math.Exp(delta[j] + theta[0]*p.Vars[0][i]*p.X2[2*j] + a*p.X2[2*j+1])
			den += e[j]
		}
		for j := range e {
			want[j] += p.Weight[i] * e[j] / den
		}
	}
	for j := range got {
		if math.Abs(got[j]/want[j]-1) > 1e-13 {
			t.Errorf("share %d: %.17g, by hand %.17g", j, got[j], want[j])
		}
	}
}

// TestLogNormalFixedCoefficient: at σ_price = 0 and π = 0 the log-normal
// model is the model with the fixed price coefficient α = −exp(β) in mean
// utility (shares, ∂s/∂p and the inversion, to 1e-12).
func TestLogNormalFixedCoefficient(t *testing.T) {
	p := lognormalProblem(3, 6, 40, 2)
	beta := 0.3
	theta := []float64{0.7, beta, 0, 0}
	alpha := -math.Exp(beta)
	fixed := &Problem{K2: 1, X2: make([]float64, len(p.LogShare)), LogShare: p.LogShare, Products: p.Products,
		Agents: p.Agents, Weight: p.Weight, Vars: p.Vars[:1], Params: []Param{{Col: 0, Var: 0}}, PriceCol: -1}
	for n := range fixed.X2 {
		fixed.X2[n] = p.X2[2*n]
	}
	sl, _ := NewSolver(p)
	sf, _ := NewSolver(fixed)
	sl.Solve(theta, nil)
	sf.Solve(theta[:1], nil)
	worst := 0.0
	wl, wf := p.NewWorker(), fixed.NewWorker()
	for mk, m := range p.Products {
		J := m.Len()
		for n := m.Start; n < m.End; n++ {
			// δ of the fixed model holds α p; the log-normal δ does not.
			worst = math.Max(worst, math.Abs(sf.Delta[n]-(sl.Delta[n]+alpha*p.X2[2*n+1])))
		}
		wl.Set(mk, theta)
		wf.Set(mk, theta[:1])
		al, af := make([]float64, 40), make([]float64, 40)
		wl.Alpha(0, al)
		wf.Alpha(alpha, af)
		dl, df := make([]float64, J*J), make([]float64, J*J)
		lam := make([]float64, J)
		wl.PriceJacobian(sl.Delta[m.Start:m.End], al, dl, lam)
		wf.PriceJacobian(sf.Delta[m.Start:m.End], af, df, lam)
		for k := range dl {
			worst = math.Max(worst, math.Abs(dl[k]-df[k]))
		}
	}
	t.Logf("largest difference from the fixed coefficient −exp(β): %.3g", worst)
	if worst > 1e-12 {
		t.Errorf("σ_price = 0 differs from the fixed coefficient −exp(β) by %.3g", worst)
	}
}

// TestLogNormalJacobians: ∂s/∂θ2 (∂a_ik/∂θ_p = a_ik v_ip on the log-normal
// column) against central differences of the shares, and ∂δ/∂θ2 against
// central differences of the inversion.
func TestLogNormalJacobians(t *testing.T) {
	p := lognormalProblem(2, 6, 50, 3)
	theta := []float64{0.6, 0.4, 0.5, -0.3}
	P := len(theta)
	w := p.NewWorker()
	w.Set(1, theta)
	delta := []float64{0.5, -0.2, 0.1, 0.9, -1, 0.3}
	dsdd, dsdt := make([]float64, 36), make([]float64, 6*P)
	w.Jacobians(delta, dsdd, dsdt)
	h := 1e-6
	up, dn := make([]float64, 6), make([]float64, 6)
	worst := 0.0
	for q := 0; q < P; q++ {
		th := append([]float64(nil), theta...)
		th[q] += h
		w.Set(1, th)
		w.Shares(delta, up)
		th[q] -= 2 * h
		w.Set(1, th)
		w.Shares(delta, dn)
		for j := 0; j < 6; j++ {
			fd := (up[j] - dn[j]) / (2 * h)
			worst = math.Max(worst, math.Abs(fd-dsdt[j*P+q]))
			if math.Abs(fd-dsdt[j*P+q]) > 1e-9 {
				t.Errorf("∂s_%d/∂θ_%d = %.10g, central difference %.10g", j, q, dsdt[j*P+q], fd)
			}
		}
	}
	t.Logf("∂s/∂θ2: largest difference from central differences %.3g", worst)
	worst = checkDeltaJacobian(t, p, theta, 1e-7)
	t.Logf("∂δ/∂θ2: largest relative difference from central differences %.3g", worst)
}

// TestLogNormalPriceJacobianTheta: the RC logit's closed-form d(∂s/∂p)/dθ2
// with a log-normal price column (∂α_i/∂θ_p = α_i v_ip) against the central
// differences every family gets.
func TestLogNormalPriceJacobianTheta(t *testing.T) {
	p := lognormalProblem(1, 5, 40, 6)
	theta := []float64{0.6, 0.4, 0.5, -0.3}
	P := len(theta)
	delta := []float64{0.5, -0.2, 0.1, 0.9, -1}
	ddelta := make([]float64, 5*P)
	for n := range ddelta {
		ddelta[n] = 0.1 * float64(n%7-3)
	}
	closed, fd := p.NewWorker(), p.NewWorker()
	fd.Market = plainMarket{fd.Market}
	got, want := make([]float64, P*25), make([]float64, P*25)
	closed.Set(0, theta)
	closed.PriceJacobianTheta(delta, 0, ddelta, got)
	fd.Set(0, theta)
	fd.PriceJacobianTheta(delta, 0, ddelta, want)
	worst := 0.0
	for n := range got {
		worst = math.Max(worst, math.Abs(got[n]-want[n]))
		if math.Abs(got[n]-want[n]) > 1e-8 {
			t.Errorf("entry %d: closed form %.12g, central differences %.12g", n, got[n], want[n])
		}
	}
	t.Logf("largest difference %.2g", worst)
}
