package contraction

import (
	"encoding/json"
	"math"
	"math/rand/v2"
	"os"
	"testing"
)

// nestedProblem is synthetic(T, J, I, K2) with products in nests j mod
// nests, one ρ (or one per nest with byNest) after the taste parameters in
// theta, and shares regenerated from the true δ under the nested model.
func nestedProblem(T, J, I, K2, nests int, byNest bool, theta []float64, seed uint64) (*Problem, []float64) {
	p, truth := synthetic(T, J, I, max(K2, 1), make([]float64, max(K2, 1)), seed)
	if K2 == 0 {
		p.K2, p.X2, p.Params, p.Vars = 0, nil, nil, nil
	}
	fam := &Nested{Nests: nests, ByNest: byNest, Nest: make([]int, len(p.LogShare))}
	for n := range fam.Nest {
		fam.Nest[n] = (n % J) % nests
	}
	p.Family = fam
	w := p.NewWorker()
	s := make([]float64, J)
	for t := 0; t < T; t++ {
		w.Set(t, theta)
		m := p.Products[t]
		if !w.Shares(truth[m.Start:m.End], s) {
			panic("nestedProblem: shares failed")
		}
		for j := range s {
			p.LogShare[m.Start+j] = math.Log(s[j])
		}
	}
	return p, truth
}

// nestedByHand returns market t's shares, written out agent by agent from
// the definition without any shifting (Berry 1994; Grigolon & Verboven
// 2014): D_ig = Σ_{j∈g} exp((δ_j+μ_ij)/(1−ρ_g)), s_ij = exp((δ_j+μ_ij)/(1−ρ_g))
// / D_ig · D_ig^(1−ρ_g) / (1 + Σ_h D_ih^(1−ρ_h)). It also returns each
// agent's log-sum ln(1 + Σ_h D_ih^(1−ρ_h)).
func nestedByHand(p *Problem, t int, theta, delta []float64) (shares, logsum []float64) {
	fam := p.Family.(*Nested)
	m, a := p.Products[t], p.Agents[t]
	J := m.Len()
	rhoOf := func(g int) float64 {
		if fam.ByNest {
			return theta[len(p.Params)+g]
		}
		return theta[len(p.Params)]
	}
	shares = make([]float64, J)
	for i := a.Start; i < a.End; i++ {
		u := make([]float64, J)
		D := make([]float64, fam.Nests)
		for j := 0; j < J; j++ {
			n := m.Start + j
			u[j] = delta[j]
			for q, par := range p.Params {
				u[j] += theta[q] * p.X2[n*p.K2+par.Col] * p.Vars[par.Var][i]
			}
			g := fam.Nest[n]
			D[g] += math.Exp(u[j] / (1 - rhoOf(g)))
		}
		den := 1.0
		for g, d := range D {
			if d > 0 {
				den += math.Pow(d, 1-rhoOf(g))
			}
		}
		logsum = append(logsum, math.Log(den))
		for j := 0; j < J; j++ {
			g := fam.Nest[m.Start+j]
			rho := rhoOf(g)
			shares[j] += p.Weight[i] * math.Exp(u[j]/(1-rho)) / D[g] * math.Pow(D[g], 1-rho) / den
		}
	}
	return shares, logsum
}

// TestNestedSharesByHand: shares and log-sums of the implementation against
// the definition, for one ρ and one per nest, with and without tastes.
func TestNestedSharesByHand(t *testing.T) {
	tests := []struct {
		name      string
		K2, nests int
		byNest    bool
		theta     []float64
	}{
		{"nested logit, one rho", 0, 2, false, []float64{0.6}},
		{"nested logit, rho by nest", 0, 3, true, []float64{0.2, 0.7, 0.45}},
		{"random coefficients, one rho", 2, 2, false, []float64{0.9, 0.5, 0.55}},
		{"random coefficients, rho by nest", 2, 3, true, []float64{0.9, 0.5, 0.3, 0, 0.8}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			p, truth := nestedProblem(2, 7, 40, tc.K2, tc.nests, tc.byNest, tc.theta, 11)
			w := p.NewWorker()
			got, incl := make([]float64, 7), make([]float64, 40)
			for mk := 0; mk < 2; mk++ {
				w.Set(mk, tc.theta)
				delta := truth[mk*7 : (mk+1)*7]
				if !w.Shares(delta, got) {
					t.Fatal("shares failed")
				}
				want, logsum := nestedByHand(p, mk, tc.theta, delta)
				for j := range got {
					if d := math.Abs(got[j]/want[j] - 1); d > 1e-13 {
						t.Errorf("market %d share %d: %.17g, by hand %.17g", mk, j, got[j], want[j])
					}
				}
				w.LogInclusive(delta, incl)
				for i := range logsum {
					if d := math.Abs(incl[i] - logsum[i]); d > 1e-13 {
						t.Errorf("market %d agent %d: log-sum %.17g, by hand %.17g", mk, i, incl[i], logsum[i])
					}
				}
			}
		})
	}
}

// TestNestedLogitElasticities: the plain nested logit's ∂s/∂p against the
// closed forms of Berry (1994) and Verboven (1996) on market 1 of
// testdata/nested-logit (values computed by that folder's estimate.R and
// confirmed there by numpy finite differences), with α the magnitude of the
// price coefficient: own −αp_j(1/(1−ρ) − ρ/(1−ρ)s_{j|g} − s_j), same nest
// αp_k(ρ/(1−ρ)s_{k|g} + s_k), other nest αp_k s_k.
func TestNestedLogitElasticities(t *testing.T) {
	raw, err := os.ReadFile("../testdata/nested-logit/expected.json")
	if err != nil {
		t.Fatal(err)
	}
	var exp struct {
		E struct {
			Alpha, Rho float64
			Segment    []string
			Share      []float64
			Price      []float64
			Matrix     [][]float64
		} `json:"elasticities_market1"`
	}
	if err := json.Unmarshal(raw, &exp); err != nil {
		t.Fatal(err)
	}
	e := exp.E
	J := len(e.Share)
	nest := make([]int, J)
	for j, s := range e.Segment {
		if s == "sparkling" {
			nest[j] = 1
		}
	}
	p := &Problem{LogShare: make([]float64, J), Products: []Span{{0, J}}, Agents: []Span{{0, 1}},
		Weight: []float64{1}, PriceCol: -1, Family: &Nested{Nest: nest, Nests: 2}}
	for j, s := range e.Share {
		p.LogShare[j] = math.Log(s)
	}
	s, err := NewSolver(p)
	if err != nil {
		t.Fatal(err)
	}
	theta := []float64{e.Rho}
	if sum := s.Solve(theta, nil); sum.Failures != 0 {
		t.Fatal(sum)
	}
	w := p.NewWorker()
	w.Set(0, theta)
	alpha := []float64{0}
	w.Alpha(e.Alpha, alpha)
	dsdp, lambda := make([]float64, J*J), make([]float64, J)
	w.PriceJacobian(s.Delta, alpha, dsdp, lambda)
	// The closed forms written out here, with a = −α > 0 and s_{j|g} from
	// the segment sums.
	nestShare := map[int]float64{}
	for j, s := range e.Share {
		nestShare[nest[j]] += s
	}
	a, rho := -e.Alpha, e.Rho
	closed := func(j, k int) float64 {
		sk, skg := e.Share[k], e.Share[k]/nestShare[nest[k]]
		switch {
		case j == k:
			return -a * e.Price[j] * (1/(1-rho) - rho/(1-rho)*skg - sk)
		case nest[j] == nest[k]:
			return a * e.Price[k] * (rho/(1-rho)*skg + sk)
		}
		return a * e.Price[k] * sk
	}
	worst, worstClosed := 0.0, 0.0
	for j := 0; j < J; j++ {
		for k := 0; k < J; k++ {
			got := dsdp[j*J+k] * e.Price[k] / e.Share[j]
			worst = math.Max(worst, math.Abs(got-e.Matrix[j][k])/math.Abs(e.Matrix[j][k]))
			worstClosed = math.Max(worstClosed, math.Abs(got-closed(j, k))/math.Abs(closed(j, k)))
		}
	}
	// Measured 5e-16 against both.
	if worst > 1e-12 || worstClosed > 1e-12 {
		t.Errorf("elasticities differ from the reference by %.3g, from the closed forms by %.3g (relative)", worst, worstClosed)
	}
	t.Logf("largest relative difference from the reference %.3g, from the closed forms here %.3g", worst, worstClosed)
	for j := 0; j < J; j++ {
		if want := e.Alpha * e.Share[j] / (1 - e.Rho); math.Abs(lambda[j]-want) > 1e-15 {
			t.Errorf("Λ_%d = %.17g, want α s_j/(1−ρ) = %.17g", j, lambda[j], want)
		}
	}
}

// TestNestedReducesToLogit: at ρ = 0 the random-coefficients nested logit is
// the random-coefficients logit (shares, ∂s/∂δ, ∂s/∂θ, ∂s/∂p, log-sums and
// the inversion to 1e-12), whatever the nests.
func TestNestedReducesToLogit(t *testing.T) {
	taste := []float64{0.9, 0.5, 1.1}
	p, _ := synthetic(3, 8, 60, 3, taste, 5)
	p.PriceCol = 2
	q := *p
	fam := &Nested{Nests: 3, Nest: make([]int, len(p.LogShare))}
	for n := range fam.Nest {
		fam.Nest[n] = (n * 7) % 3
	}
	q.Family = fam
	theta := append(taste[:3:3], 0)
	sp, _ := NewSolver(p)
	sq, _ := NewSolver(&q)
	P := len(taste)
	jp, jq := make([]float64, len(p.LogShare)*P), make([]float64, len(p.LogShare)*(P+1))
	sp.Solve(taste, jp)
	if sum := sq.Solve(theta, jq); sum.Failures != 0 {
		t.Fatal(sum)
	}
	worst := 0.0
	for n := range sp.Delta {
		worst = math.Max(worst, math.Abs(sp.Delta[n]-sq.Delta[n]))
		for k := 0; k < P; k++ {
			worst = math.Max(worst, math.Abs(jp[n*P+k]-jq[n*(P+1)+k]))
		}
	}
	wp, wq := p.NewWorker(), q.NewWorker()
	J, I := 8, 60
	bufs := func() [][]float64 {
		return [][]float64{make([]float64, J*J), make([]float64, J*(P+1)), make([]float64, J*J), make([]float64, J), make([]float64, I), make([]float64, I)}
	}
	a, b := bufs(), bufs()
	for mk := 0; mk < 3; mk++ {
		delta := sp.Delta[mk*J : (mk+1)*J]
		wp.Set(mk, taste)
		wq.Set(mk, theta)
		for _, x := range []struct {
			w     *Worker
			b     [][]float64
			theta []float64
		}{{wp, a, taste}, {wq, b, theta}} {
			x.w.Jacobians(delta, x.b[0], x.b[1])
			x.w.Alpha(-2, x.b[4])
			x.w.PriceJacobian(delta, x.b[4], x.b[2], x.b[3])
			x.w.LogInclusive(delta, x.b[5])
		}
		for j := 0; j < J; j++ {
			for k := 0; k < P; k++ {
				worst = math.Max(worst, math.Abs(a[1][j*P+k]-b[1][j*(P+1)+k]))
			}
		}
		for _, k := range []int{0, 2, 3, 5} {
			for i := range a[k] {
				worst = math.Max(worst, math.Abs(a[k][i]-b[k][i]))
			}
		}
	}
	t.Logf("largest difference from the RC logit at ρ = 0: %.3g", worst)
	if worst > 1e-12 {
		t.Errorf("the nested logit at ρ = 0 differs from the RC logit by %.3g", worst)
	}
}

// TestNestedInversionAtZeroSigma: with σ = 0 the inversion is the closed form
// δ_j = ln s_j − ln s_0 − ρ_g ln s_{j|g} (Berry 1994), for one ρ and per nest;
// started away from it, the damped contraction gets there too.
func TestNestedInversionAtZeroSigma(t *testing.T) {
	for _, byNest := range []bool{false, true} {
		theta := []float64{0, 0, 0.35, 0.8}
		if !byNest {
			theta = theta[:3]
		}
		p, truth := nestedProblem(4, 9, 30, 2, 2, byNest, theta, 3)
		fam := p.Family.(*Nested)
		for _, accelerate := range []bool{true, false} {
			s, _ := NewSolver(p)
			s.Accelerate = accelerate
			s.MaxIterations = 100000
			s.Solve(theta, nil)
			for n := range s.Delta {
				s.Delta[n] += 0.3 // a warm start away from the answer
			}
			if sum := s.Solve(theta, nil); sum.Failures != 0 {
				t.Fatal(sum)
			}
			for mk, m := range p.Products {
				s0, sg := 1.0, map[int]float64{}
				for n := m.Start; n < m.End; n++ {
					s0 -= math.Exp(p.LogShare[n])
					sg[fam.Nest[n]] += math.Exp(p.LogShare[n])
				}
				for n := m.Start; n < m.End; n++ {
					g := fam.Nest[n]
					rho := theta[2]
					if byNest {
						rho = theta[2+g]
					}
					want := p.LogShare[n] - math.Log(s0) - rho*(p.LogShare[n]-math.Log(sg[g]))
					if d := math.Abs(s.Delta[n] - want); d > 1e-12 {
						t.Errorf("by nest %v, accelerate %v, market %d row %d: δ %.15g, closed form %.15g", byNest, accelerate, mk, n, s.Delta[n], want)
					}
					if d := math.Abs(s.Delta[n] - truth[n]); d > 1e-12 {
						t.Errorf("row %d: δ %.15g, truth %.15g", n, s.Delta[n], truth[n])
					}
				}
			}
		}
	}
}

// TestNestedWithoutTastesIsNestedLogit: the random-coefficients nested
// logit with σ = 0 gives the plain nested logit's shares and inversion.
func TestNestedWithoutTastesIsNestedLogit(t *testing.T) {
	rho := 0.55
	p, truth := nestedProblem(3, 6, 25, 2, 2, false, []float64{0, 0, rho}, 8)
	plain := &Problem{LogShare: p.LogShare, Products: p.Products, PriceCol: -1, Family: p.Family}
	for t := range p.Products {
		plain.Agents = append(plain.Agents, Span{t, t + 1})
		plain.Weight = append(plain.Weight, 1)
	}
	a, _ := NewSolver(p)
	b, _ := NewSolver(plain)
	a.Solve([]float64{0, 0, rho}, nil)
	b.Solve([]float64{rho}, nil)
	worst := 0.0
	for n := range truth {
		worst = math.Max(worst, math.Max(math.Abs(a.Delta[n]-b.Delta[n]), math.Abs(a.Delta[n]-truth[n])))
	}
	wa, wb := p.NewWorker(), plain.NewWorker()
	sa, sb := make([]float64, 6), make([]float64, 6)
	for mk := range p.Products {
		wa.Set(mk, []float64{0, 0, rho})
		wb.Set(mk, []float64{rho})
		d := []float64{-1, 0.5, -2, 0.1, -0.4, 1}
		wa.Shares(d, sa)
		wb.Shares(d, sb)
		for j := range sa {
			worst = math.Max(worst, math.Abs(sa[j]-sb[j]))
		}
	}
	if worst > 1e-12 {
		t.Errorf("σ = 0 differs from the plain nested logit by %.3g", worst)
	}
}

// TestNestedJacobiansMatchFiniteDifferences: ∂s/∂δ, ∂s/∂θ2 (tastes, one
// log-normal column, and ρ) and ∂s/∂p against central differences of the
// shares.
func TestNestedJacobiansMatchFiniteDifferences(t *testing.T) {
	for _, byNest := range []bool{false, true} {
		theta := []float64{0.7, 0.4, -0.5, 0.3, 0.6}
		if !byNest {
			theta = theta[:4]
		}
		p, truth := nestedProblem(2, 7, 50, 3, 2, byNest, theta, 21)
		p.LogNormal = []bool{false, false, true}
		p.PriceCol = 2
		P := p.NumParams()
		w := p.NewWorker()
		J := 7
		dsdd, dsdt := make([]float64, J*J), make([]float64, J*P)
		w.Set(1, theta)
		delta := truth[J : 2*J]
		w.Jacobians(delta, dsdd, dsdt)
		up, dn := make([]float64, J), make([]float64, J)
		h := 1e-6
		worst := 0.0
		defer func() { t.Logf("by nest %v: largest difference from central differences %.3g", byNest, worst) }()
		check := func(what string, j, l int, got float64) {
			fd := (up[j] - dn[j]) / (2 * h)
			worst = math.Max(worst, math.Abs(got-fd))
			if math.Abs(got-fd) > 1e-8*math.Max(1, math.Abs(fd)) {
				t.Errorf("by nest %v: ∂s_%d/∂%s%d = %.10g, central difference %.10g", byNest, j, what, l, got, fd)
			}
		}
		for l := 0; l < J; l++ {
			d := append([]float64(nil), delta...)
			d[l] += h
			w.Shares(d, up)
			d[l] -= 2 * h
			w.Shares(d, dn)
			for j := 0; j < J; j++ {
				check("δ", j, l, dsdd[j*J+l])
			}
		}
		for q := 0; q < P; q++ {
			th := append([]float64(nil), theta...)
			th[q] += h
			w.Set(1, th)
			w.Shares(delta, up)
			th[q] -= 2 * h
			w.Set(1, th)
			w.Shares(delta, dn)
			for j := 0; j < J; j++ {
				check("θ", j, q, dsdt[j*P+q])
			}
		}
		// ∂s/∂p with price in the tastes (log-normal column 2) and in δ.
		w.Set(1, theta)
		alpha := make([]float64, 50)
		w.Alpha(-0.5, alpha)
		dsdp, lambda := make([]float64, J*J), make([]float64, J)
		w.PriceJacobian(delta, alpha, dsdp, lambda)
		price := make([]float64, J)
		for j := range price {
			price[j] = p.X2[(J+j)*3+2]
		}
		for l := 0; l < J; l++ {
			for sgn, out := range map[float64][]float64{1: up, -1: dn} {
				pr := append([]float64(nil), price...)
				pr[l] += sgn * h
				d := append([]float64(nil), delta...)
				d[l] += sgn * h * -0.5
				w.Set(1, theta)
				w.Reprice(pr)
				w.Shares(d, out)
			}
			for j := 0; j < J; j++ {
				check("p", j, l, dsdp[j*J+l])
			}
		}
	}
}

// TestNestedDeltaJacobian: ∂δ/∂θ2 of the solver (implicit function theorem,
// ρ included) against central differences of the inversion.
func TestNestedDeltaJacobian(t *testing.T) {
	theta := []float64{0.8, 0.5, 0.3, 0.6, 0.45}
	p, _ := nestedProblem(3, 6, 60, 2, 3, true, theta, 7)
	worst := checkDeltaJacobian(t, p, theta, 1e-7)
	t.Logf("largest relative difference from central differences: %.3g", worst)
}

// TestNestedRhoOutOfRangeFails: a ρ outside [0, 1) is a failed evaluation
// (the optimiser must see +Inf), never a NaN that passes for a solution.
func TestNestedRhoOutOfRangeFails(t *testing.T) {
	p, _ := nestedProblem(2, 5, 20, 1, 2, false, []float64{0.5, 0.4}, 2)
	s, _ := NewSolver(p)
	for _, rho := range []float64{-0.1, 1, 1.5, math.NaN()} {
		if sum := s.Solve([]float64{0.5, rho}, nil); sum.Failures != 2 {
			t.Errorf("ρ = %v: %+v", rho, sum)
		}
	}
	if sum := s.Solve([]float64{0.5, 0.4}, nil); sum.Failures != 0 {
		t.Errorf("a failed ρ spoils the next solve: %+v", sum)
	}
}

// TestNestedNearOne: ρ close to 1 magnifies within-nest differences by
// 1/(1−ρ); the within-nest log-sum-exp keeps the shares finite and the
// inversion converging for shares spread over twelve orders of magnitude.
// The inversion stops when its step (1−ρ)|ln s_obs − ln s(δ)| is below
// 1e-14, so the log shares are reproduced to 1e-14/(1−ρ): δ cannot carry
// more digits than that.
func TestNestedNearOne(t *testing.T) {
	rng := rand.New(rand.NewPCG(4, 4))
	J := 8
	p := &Problem{LogShare: make([]float64, J), Products: []Span{{0, J}}, Agents: []Span{{0, 1}},
		Weight: []float64{1}, PriceCol: -1, Family: &Nested{Nest: []int{0, 0, 0, 0, 1, 1, 1, 1}, Nests: 2}}
	for j := range p.LogShare {
		p.LogShare[j] = math.Log(1e-12 + 0.1*rng.Float64())
	}
	for _, rho := range []float64{0.99, 0.999999} {
		s, _ := NewSolver(p)
		if sum := s.Solve([]float64{rho}, nil); sum.Failures != 0 {
			t.Fatalf("ρ = %v: %+v", rho, sum)
		}
		w := p.NewWorker()
		w.Set(0, []float64{rho})
		got := make([]float64, J)
		if !w.Shares(s.Delta, got) {
			t.Fatalf("ρ = %v: shares failed at the solution", rho)
		}
		for j := range got {
			if r := math.Abs(math.Log(got[j]) - p.LogShare[j]); r > 1e-14/(1-rho) {
				t.Errorf("ρ = %v: share %d off by %.3g in logs", rho, j, r)
			}
		}
	}
}

// TestNestedSolveAllocatesNothing: like the RC logit, a market solve of the
// nested family allocates nothing once the buffers are sized.
func TestNestedSolveAllocatesNothing(t *testing.T) {
	theta := []float64{0.8, 0.5, 0.3, 0.6}
	p, truth := nestedProblem(2, 10, 100, 2, 2, true, theta, 4)
	w := p.NewWorker()
	P := p.NumParams()
	delta := make([]float64, 10)
	jac := make([]float64, 10*P)
	factor := make([]float64, 100)
	alpha, incl := make([]float64, 100), make([]float64, 100)
	dsdp, lambda := make([]float64, 100), make([]float64, 10)
	w.Set(1, theta)
	allocs := testing.AllocsPerRun(20, func() {
		w.Set(0, theta)
		w.Start(p.LogShare[:10], delta)
		w.Invert(delta, p.LogShare[:10], 1e-14, 1000, true)
		w.DeltaJacobian(delta, jac, factor)
		w.ChordInvert(delta, p.LogShare[:10], factor, 1e-14, 50)
		w.Alpha(-1, alpha)
		w.PriceJacobian(truth[:10], alpha, dsdp, lambda)
		w.LogInclusive(truth[:10], incl)
	})
	if allocs != 0 {
		t.Fatalf("%v allocations per market solve", allocs)
	}
}

// TestNestedPriceJacobianTheta: the nested logit's d(∂s/∂p)/dθ2 (the worker's
// differences; it must not inherit the RC logit's closed form) equals the
// RC logit's closed form at ρ = 0 in the taste columns.
func TestNestedPriceJacobianTheta(t *testing.T) {
	p, _, delta := priceProblem()
	q := *p
	q.Family = &Nested{Nest: []int{0, 1, 0}, Nests: 2}
	theta := []float64{0.7, 0.4}
	ddelta := []float64{0.3, -0.2, 1.1, 0.4, -0.5, 0.8}
	logit, nested := p.NewWorker(), q.NewWorker()
	logit.Set(0, theta)
	nested.Set(0, []float64{0.7, 0.4, 0})
	got, want := make([]float64, 3*9), make([]float64, 2*9)
	logit.PriceJacobianTheta(delta, -2, ddelta, want)
	nd := []float64{0.3, -0.2, 0, 1.1, 0.4, 0, -0.5, 0.8, 0}
	nested.PriceJacobianTheta(delta, -2, nd, got)
	worst := 0.0
	for n := range want {
		worst = math.Max(worst, math.Abs(got[n]-want[n]))
	}
	t.Logf("largest difference from the RC logit's closed form: %.2g", worst)
	if worst > 1e-8 {
		t.Errorf("nested d(∂s/∂p)/dθ at ρ = 0 differs from the RC logit by %.3g", worst)
	}
	// The ρ block at ρ = 0, the bound: a central difference would step to
	// ρ < 0, outside the model, so the worker differences one-sidedly. Check
	// it against the second-order one-sided formula (−3f(0) + 4f(h) −
	// f(2h))/(2h) with h = 1e-3 by hand.
	at := func(rho float64) []float64 {
		nested.Set(0, []float64{0.7, 0.4, rho})
		J, I := nested.Size()
		alpha, out, lam := make([]float64, I), make([]float64, J*J), make([]float64, J)
		nested.Alpha(-2, alpha)
		nested.PriceJacobian(delta, alpha, out, lam)
		return out
	}
	const h = 1e-3
	f0, f1, f2 := at(0), at(h), at(2*h)
	worst = 0
	for n := 0; n < 9; n++ {
		ref := (-3*f0[n] + 4*f1[n] - f2[n]) / (2 * h)
		if math.IsNaN(got[18+n]) {
			t.Fatalf("d(∂s/∂p)/dρ at ρ = 0 is NaN (entry %d)", n)
		}
		worst = math.Max(worst, math.Abs(got[18+n]-ref))
	}
	t.Logf("ρ block at ρ = 0: largest difference from the second-order one-sided formula %.2g", worst)
	if worst > 1e-5 {
		t.Errorf("d(∂s/∂p)/dρ at ρ = 0 differs from the one-sided formula by %.3g", worst)
	}
	nested.Set(0, []float64{0.7, 0.4, 0})
	if n := testing.AllocsPerRun(10, func() { nested.PriceJacobianTheta(delta, -2, nd, got) }); n != 0 {
		t.Errorf("the differenced d(∂s/∂p)/dθ2 allocates %v times per market", n)
	}
}

// TestNestedDeclinesLogitClosedForms: the nested family shares the RC
// logit's taste code but not its closed-form second price derivatives or
// d(∂s/∂p)/dθ2: the worker reports no closed form (the caller then
// differences).
func TestNestedDeclinesLogitClosedForms(t *testing.T) {
	theta := []float64{0.5, 0.4}
	p, delta := nestedProblem(1, 6, 20, 1, 2, false, theta, 3)
	w := p.NewWorker()
	w.Set(0, theta)
	J, I := w.Size()
	alpha := make([]float64, I)
	w.Alpha(-2, alpha)
	u := make([]float64, J*J)
	for i := range u {
		u[i] = 0.1
	}
	if w.PriceHessian(delta[:J], alpha, u, make([]float64, J*J)) {
		t.Error("the nested logit used the RC logit's closed-form PriceHessian")
	}
}
