package demand

import (
	"math"

	"rcdemand/contraction"
)

// Pricing says how every market's demand moves with its prices at fixed
// parameters, ξ and tastes: δ(p) = Delta0 + BetaPrice·(p − Price0), and
// prices enter the tastes where price has a random coefficient. It is what
// the supply side (markups, costs) and counterfactual equilibria work with.
type Pricing struct {
	Problem   *contraction.Problem
	Theta     []float64 // θ2
	BetaPrice float64   // coefficient of price in mean utility
	Price0    []float64 // N prices at which Delta0 holds
	Delta0    []float64 // N mean utilities at Price0
}

// Market is the demand of one market as a function of its prices (see
// Pricing). A Market is used by one goroutine and reused across markets: its
// buffers grow to the largest market it has been bound to.
type Market struct {
	pr *Pricing
	w  *contraction.Worker
	j  int

	price0, delta0 []float64 // views of the market's rows
	weight         []float64 // view

	delta, shares, lambda, dsdp []float64
	alpha, incl                 []float64
	u                           []float64 // J×J, Ω_jl (p_l − c_l)
	fd                          []float64 // 3J, scratch of focJacobianByDifferences
	foc                         []float64 // J, scratch of FOCResidual
}

// NewMarket returns a market evaluator for one goroutine.
func (pr *Pricing) NewMarket() *Market {
	return &Market{pr: pr, w: pr.Problem.NewWorker()}
}

// Bind points the evaluator at market t and evaluates it at Price0.
func (mk *Market) Bind(t int) bool {
	p := mk.pr.Problem
	span, agents := p.Products[t], p.Agents[t]
	mk.w.Set(t, mk.pr.Theta)
	J, I := span.Len(), agents.Len()
	mk.j = J
	mk.price0 = mk.pr.Price0[span.Start:span.End]
	mk.delta0 = mk.pr.Delta0[span.Start:span.End]
	mk.weight = p.Weight[agents.Start:agents.End]
	for _, b := range []*[]float64{&mk.delta, &mk.shares, &mk.lambda, &mk.foc} {
		*b = growFloats(*b, J)
	}
	mk.dsdp = growFloats(mk.dsdp, J*J)
	mk.u = growFloats(mk.u, J*J)
	mk.alpha = growFloats(mk.alpha, I)
	mk.incl = growFloats(mk.incl, I)
	mk.w.Alpha(mk.pr.BetaPrice, mk.alpha)
	return mk.SetPrices(mk.price0)
}

func growFloats(b []float64, n int) []float64 {
	if cap(b) < n {
		return make([]float64, n)
	}
	return b[:n]
}

// Len returns the number of products J of the bound market.
func (mk *Market) Len() int { return mk.j }

// Price0 returns the prices at which the market was observed (or set up).
func (mk *Market) Price0() []float64 { return mk.price0 }

// SetPrices evaluates the market at prices p: δ(p), the shares, ∂s/∂p and
// Λ. It reports whether the shares are positive and finite.
func (mk *Market) SetPrices(p []float64) bool {
	b := mk.pr.BetaPrice
	for j := range mk.delta {
		mk.delta[j] = mk.delta0[j] + b*(p[j]-mk.price0[j])
	}
	mk.w.Reprice(p)
	ok := mk.w.Shares(mk.delta, mk.shares)
	mk.w.PriceJacobian(mk.delta, mk.alpha, mk.dsdp, mk.lambda)
	for _, v := range mk.dsdp {
		ok = ok && !math.IsNaN(v) && !math.IsInf(v, 0)
	}
	return ok
}

// Shares returns the shares at the last prices set (the evaluator's buffer).
func (mk *Market) Shares() []float64 { return mk.shares }

// PriceJacobian returns ∂s/∂p at the last prices set (J×J, row j column l =
// ∂s_j/∂p_l; the evaluator's buffer).
func (mk *Market) PriceJacobian() []float64 { return mk.dsdp }

// FOCJacobian writes the Jacobian of the first-order conditions r(p) = s +
// (Ω∘(∂s/∂p)ᵀ)(p − c) (see FOC) at the last prices set, p, into dst (J×J,
// row j column m = ∂r_j/∂p_m):
//
//	∂r_j/∂p_m = ∂s_j/∂p_m + Ω_jm ∂s_m/∂p_j + Σ_l Ω_jl (p_l − c_l) ∂²s_l/∂p_j∂p_m,
//
// the second derivatives from the share model (contraction's PriceHessian)
// or, for a family without them in closed form, the whole Jacobian from
// central differences of r in prices (step 1e-6·max(1, |p_m|)); the market
// is left at p either way.
func (mk *Market) FOCJacobian(p, c []float64, owner []int, dst []float64) {
	J := mk.j
	u := mk.u[:J*J]
	for j := 0; j < J; j++ {
		for l := 0; l < J; l++ {
			u[j*J+l] = 0
			if owner[j] == owner[l] {
				u[j*J+l] = p[l] - c[l]
			}
		}
	}
	if !mk.w.PriceHessian(mk.delta, mk.alpha, u, dst) {
		mk.focJacobianByDifferences(p, c, owner, dst)
		return
	}
	D := mk.dsdp
	for j := 0; j < J; j++ {
		for m := 0; m < J; m++ {
			dst[j*J+m] += D[j*J+m]
			if owner[j] == owner[m] {
				dst[j*J+m] += D[m*J+j]
			}
		}
	}
}

// focJacobianByDifferences writes ∂r/∂p by central differences of FOC in
// each price, then sets the market back to p.
func (mk *Market) focJacobianByDifferences(p, c []float64, owner []int, dst []float64) {
	J := mk.j
	mk.fd = growFloats(mk.fd, 3*J)
	q, up, dn := mk.fd[:J], mk.fd[J:2*J], mk.fd[2*J:]
	for m := 0; m < J; m++ {
		h := 1e-6 * math.Max(1, math.Abs(p[m]))
		for side, r := range [][]float64{up, dn} {
			copy(q, p)
			q[m] += h * (1 - 2*float64(side))
			mk.SetPrices(q)
			FOC(r, mk.dsdp, mk.shares, q, c, owner)
		}
		for j := 0; j < J; j++ {
			dst[j*J+m] = (up[j] - dn[j]) / (2 * h)
		}
	}
	mk.SetPrices(p)
}

// Lambda returns the diagonal Λ of the split ∂s/∂p = diag(Λ) − Γ.
func (mk *Market) Lambda() []float64 { return mk.lambda }

// Alpha returns the agents' price coefficients.
func (mk *Market) Alpha() []float64 { return mk.alpha }

// ConsumerSurplus returns per-capita consumer surplus at the last prices
// set: Σ_i w_i ln(1 + Σ_j exp(δ_j + μ_ij)) / (−α_i) (Small & Rosen 1981,
// agent by agent; the family's log-sum in general, ln(1 + Σ_g D_ig^(1−ρ_g))
// for the nested logit).
func (mk *Market) ConsumerSurplus() float64 {
	mk.w.LogInclusive(mk.delta, mk.incl)
	cs := 0.0
	for i, a := range mk.alpha {
		cs += mk.weight[i] * mk.incl[i] / -a
	}
	return cs
}

// Markups returns the Bertrand–Nash markups η = Δ⁻¹s at the last prices
// set, under ownership owner (a firm index per product).
func (mk *Market) Markups(owner []int) ([]float64, error) {
	return Markups(mk.dsdp, mk.shares, owner)
}

// FOCResidual returns max_j |r_j|, the largest violation of the
// first-order conditions (see FOC) at the last prices set, p, and costs c.
func (mk *Market) FOCResidual(p, c []float64, owner []int) float64 {
	FOC(mk.foc, mk.dsdp, mk.shares, p, c, owner)
	return infNorm(mk.foc)
}
