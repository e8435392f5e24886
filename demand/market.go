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
	t  int
	j  int

	price0, delta0 []float64 // views of the market's rows
	weight         []float64 // view

	delta, shares, lambda, dsdp []float64
	alpha, incl                 []float64
}

// NewMarket returns a market evaluator for one goroutine.
func (pr *Pricing) NewMarket() *Market {
	return &Market{pr: pr, w: pr.Problem.NewWorker()}
}

// Bind points the evaluator at market t and evaluates it at Price0.
func (mk *Market) Bind(t int) bool {
	p := mk.pr.Problem
	span, agents := p.Products[t], p.Agents[t]
	mk.t = t
	mk.w.Set(t, mk.pr.Theta)
	J, I := span.Len(), agents.Len()
	mk.j = J
	mk.price0 = mk.pr.Price0[span.Start:span.End]
	mk.delta0 = mk.pr.Delta0[span.Start:span.End]
	mk.weight = p.Weight[agents.Start:agents.End]
	for _, b := range []*[]float64{&mk.delta, &mk.shares, &mk.lambda} {
		*b = growFloats(*b, J)
	}
	mk.dsdp = growFloats(mk.dsdp, J*J)
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

// Market returns the index of the bound market.
func (mk *Market) Market() int { return mk.t }

// Len returns the number of products J of the bound market.
func (mk *Market) Len() int { return mk.j }

// Price0 returns the prices at which the market was observed (or set up).
func (mk *Market) Price0() []float64 { return mk.price0 }

// Delta0 returns the mean utilities at Price0.
func (mk *Market) Delta0() []float64 { return mk.delta0 }

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

// Delta returns the mean utilities at the last prices set.
func (mk *Market) Delta() []float64 { return mk.delta }

// PriceJacobian returns ∂s/∂p at the last prices set (J×J, row j column l =
// ∂s_j/∂p_l; the evaluator's buffer).
func (mk *Market) PriceJacobian() []float64 { return mk.dsdp }

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

// FOCResidual returns the largest first-order-condition residual at prices
// p and costs c (see FOCResidual).
func (mk *Market) FOCResidual(p, c []float64, owner []int) float64 {
	return FOCResidual(mk.dsdp, mk.shares, p, c, owner)
}
