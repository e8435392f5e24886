package merger

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
	"rcdemand/demand"
)

// Market is the demand system of one market as a function of its prices,
// with everything else (ξ, tastes, other characteristics) held fixed.
type Market struct {
	J       int
	Price0  []float64 // observed prices
	Delta0  []float64 // δ at observed prices
	Alpha   []float64 // agent price coefficients
	Weight  []float64
	BetaP   float64
	K2      int
	PriceX2 int

	x2    []float64 // J×K2, price column updated
	delta []float64
	w     *contraction.Workspace
	d     *mat.Dense // ∂s/∂p
	lam   []float64
	gam   *mat.Dense
}

// MarketInput is what a Market is built from: the market's products at
// observed (or starting) prices and its agents.
type MarketInput struct {
	Price0  []float64 // J prices at which Delta0 holds
	Delta0  []float64 // J mean utilities at Price0
	BetaP   float64   // mean price coefficient
	X2      []float64 // J×K2 random characteristics at Price0
	K2      int
	PriceX2 int       // price column of X2, −1 if none
	Tastes  []float64 // I×K2 agent coefficient deviations
	Weight  []float64 // I
	Alpha   []float64 // I agent price coefficients
}

// NewMarketFrom builds a market with its own workspace.
func NewMarketFrom(in MarketInput) *Market {
	J, I := len(in.Price0), len(in.Weight)
	w := contraction.NewWorkspace(J, I, in.K2, 0)
	x2 := append([]float64(nil), in.X2...)
	w.SetMarket(x2, J, in.Tastes, in.Weight)
	mk := &Market{
		J: J, Price0: in.Price0, Delta0: in.Delta0, Alpha: in.Alpha, Weight: in.Weight,
		BetaP: in.BetaP, K2: in.K2, PriceX2: in.PriceX2, x2: x2, delta: make([]float64, J), w: w,
		d: mat.NewDense(J, J, nil), lam: make([]float64, J), gam: mat.NewDense(J, J, nil),
	}
	mk.SetPrices(mk.Price0)
	return mk
}

// NewMarket builds market t of a fitted model at its observed prices.
func NewMarket(f *demand.Fitted, t int) *Market {
	p := f.Model.Problem
	pm, am := p.Products[t], p.Agents[t]
	tastes := make([]float64, (am.End-am.Start)*p.K2)
	p.FillTastes(tastes, t, f.Theta)
	return NewMarketFrom(MarketInput{
		Price0:  f.Model.Products.Price[pm.Start:pm.End],
		Delta0:  f.Delta[pm.Start:pm.End],
		BetaP:   f.Beta[f.Model.PriceX1],
		X2:      p.X2[pm.Start*p.K2 : pm.End*p.K2],
		K2:      p.K2,
		PriceX2: f.Model.PriceX2,
		Tastes:  tastes,
		Weight:  p.Weight[am.Start:am.End],
		Alpha:   f.Alpha[am.Start:am.End],
	})
}

// SetPrices evaluates the market at prices p: δ(p), agent shares, ∂s/∂p,
// Λ and Γ.
func (m *Market) SetPrices(p []float64) bool {
	for j := range p {
		m.delta[j] = m.Delta0[j] + m.BetaP*(p[j]-m.Price0[j])
	}
	if m.PriceX2 >= 0 {
		for j := range p {
			m.x2[j*m.K2+m.PriceX2] = p[j]
		}
		m.w.SetX2(m.x2)
	}
	ok := m.w.AgentShares(m.delta)
	demand.PriceDerivatives(m.w, m.J, m.Alpha, m.Weight, m.d)
	for j := 0; j < m.J; j++ {
		sj := m.w.AgentShareRow(j)
		lam := 0.0
		for i, a := range m.Alpha {
			lam += m.Weight[i] * a * sj[i]
		}
		m.lam[j] = lam
		for l := 0; l < m.J; l++ {
			m.gam.Set(j, l, lam*boolf(j == l)-m.d.At(j, l))
		}
	}
	return ok
}

func boolf(b bool) float64 {
	if b {
		return 1
	}
	return 0
}

// Shares returns the current market shares.
func (m *Market) Shares() []float64 {
	s := make([]float64, m.J)
	for j := range s {
		s[j] = m.w.Share(j)
	}
	return s
}

// ConsumerSurplus returns per-capita consumer surplus at the current prices.
func (m *Market) ConsumerSurplus() float64 {
	return demand.ConsumerSurplus(m.w, m.delta, m.Alpha, m.Weight)
}

// Markups returns η = Δ⁻¹s at the current prices under ownership owner (a
// firm index per product).
func (m *Market) Markups(owner []int) ([]float64, error) {
	J := m.J
	delta := mat.NewDense(J, J, nil)
	for j := 0; j < J; j++ {
		for l := 0; l < J; l++ {
			if owner[j] == owner[l] {
				delta.Set(j, l, -m.d.At(l, j))
			}
		}
	}
	s := mat.NewVecDense(J, m.Shares())
	var eta mat.VecDense
	if err := eta.SolveVec(delta, s); err != nil {
		return nil, fmt.Errorf("the markup equations are singular: %v", err)
	}
	return eta.RawVector().Data, nil
}

// FOCResidual returns max_j |s_j + Σ_l Ω_jl ∂s_l/∂p_j (p_l − c_l)| at the
// current prices p.
func (m *Market) FOCResidual(p, c []float64, owner []int) float64 {
	s := m.Shares()
	worst := 0.0
	for j := 0; j < m.J; j++ {
		r := s[j]
		for l := 0; l < m.J; l++ {
			if owner[j] == owner[l] {
				r += m.d.At(l, j) * (p[l] - c[l])
			}
		}
		worst = math.Max(worst, math.Abs(r))
	}
	return worst
}

// Solution is a counterfactual equilibrium of one market.
type Solution struct {
	Price      []float64
	Shares     []float64
	Iterations int
	Residual   float64 // first-order-condition residual
	Converged  bool
	Method     string
}

// Solve finds prices with p = c + Δ(p)⁻¹s(p) under ownership owner from
// start, to max|Δp| < tol.
func (m *Market) Solve(c []float64, owner []int, start []float64, tol float64) Solution {
	J := m.J
	p := append([]float64(nil), start...)
	pn := make([]float64, J)
	margin := make([]float64, J)
	sol := Solution{Method: "zeta"}
	for it := 1; it <= 5000; it++ {
		if !m.SetPrices(p) {
			break
		}
		for j := range margin {
			margin[j] = p[j] - c[j]
		}
		diff := 0.0
		for j := 0; j < J; j++ {
			acc := 0.0
			for l := 0; l < J; l++ {
				if owner[j] == owner[l] {
					acc += m.gam.At(j, l) * margin[l]
				}
			}
			zeta := (acc - m.w.Share(j)) / m.lam[j]
			pn[j] = c[j] + zeta
			diff = math.Max(diff, math.Abs(pn[j]-p[j]))
		}
		copy(p, pn)
		sol.Iterations = it
		if math.IsNaN(diff) {
			break
		}
		if diff < tol {
			sol.Converged = true
			break
		}
	}
	if !sol.Converged {
		p = append(p[:0], start...)
		sol = m.newton(c, owner, p, tol)
	}
	m.SetPrices(p)
	sol.Price = p
	sol.Shares = m.Shares()
	sol.Residual = m.FOCResidual(p, c, owner)
	return sol
}

// newton solves the first-order conditions by damped Newton steps with a
// forward-difference Jacobian.
func (m *Market) newton(c []float64, owner []int, p []float64, tol float64) Solution {
	J := m.J
	sol := Solution{Method: "newton"}
	foc := func(p []float64) []float64 {
		m.SetPrices(p)
		s := m.Shares()
		r := make([]float64, J)
		for j := 0; j < J; j++ {
			r[j] = s[j]
			for l := 0; l < J; l++ {
				if owner[j] == owner[l] {
					r[j] += m.d.At(l, j) * (p[l] - c[l])
				}
			}
		}
		return r
	}
	norm := func(r []float64) float64 {
		n := 0.0
		for _, x := range r {
			n = math.Max(n, math.Abs(x))
		}
		return n
	}
	r := foc(p)
	for it := 1; it <= 100; it++ {
		sol.Iterations = it
		jac := mat.NewDense(J, J, nil)
		for l := 0; l < J; l++ {
			h := 1e-7 * math.Max(1, math.Abs(p[l]))
			q := append([]float64(nil), p...)
			q[l] += h
			rq := foc(q)
			for j := 0; j < J; j++ {
				jac.Set(j, l, (rq[j]-r[j])/h)
			}
		}
		var step mat.VecDense
		if err := step.SolveVec(jac, mat.NewVecDense(J, r)); err != nil {
			return sol
		}
		improved := false
		for lam := 1.0; lam > 1e-4; lam /= 2 {
			q := make([]float64, J)
			for j := range q {
				q[j] = p[j] - lam*step.AtVec(j)
			}
			rq := foc(q)
			if norm(rq) < norm(r) {
				maxStep := lam * norm(step.RawVector().Data)
				copy(p, q)
				r = rq
				improved = true
				if maxStep < tol {
					sol.Converged = true
					return sol
				}
				break
			}
		}
		if !improved {
			sol.Converged = norm(r) < 1e-10
			return sol
		}
	}
	return sol
}

// HHI returns Σ_f (100·S_f/Σ_j s_j)² for shares s owned by owner.
func HHI(s []float64, owner []int) float64 {
	total := 0.0
	nf := 0
	for _, o := range owner {
		nf = max(nf, o+1)
	}
	byFirm := make([]float64, nf) // indexed, so the sum has a fixed order
	for j, v := range s {
		total += v
		byFirm[owner[j]] += v
	}
	h := 0.0
	for _, v := range byFirm {
		x := 100 * v / total
		h += x * x
	}
	return h
}
