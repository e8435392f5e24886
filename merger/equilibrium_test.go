package merger

import (
	"math"
	"reflect"
	"slices"
	"strings"
	"testing"

	"rcdemand/contraction"
	"rcdemand/demand"
)

// priceMarket is one market of a random-coefficients logit whose only
// random column is price: agents' price coefficients are beta + sigma·nu_i
// with weights w, and mean utilities delta at prices price.
func priceMarket(price, delta, nu, w []float64, beta, sigma float64) *demand.Market {
	J := len(price)
	p := &contraction.Problem{K2: 1, Params: []contraction.Param{{Col: 0, Var: 0}}, X2: slices.Clone(price),
		LogShare: make([]float64, J), Products: []contraction.Span{{Start: 0, End: J}},
		Agents: []contraction.Span{{Start: 0, End: len(nu)}}, Weight: w, Vars: [][]float64{nu}, PriceCol: 0}
	pr := &demand.Pricing{Problem: p, Theta: []float64{sigma}, BetaPrice: beta, Price0: price, Delta0: delta}
	mk := pr.NewMarket()
	mk.Bind(0)
	return mk
}

// dollarMarket is a market of three products quoted in units of unit
// dollars: little price sensitivity per dollar (price coefficients
// −7.4e-5 ± 6e-6 per dollar), near-monopoly shares (the outside good keeps
// about 2%) and markups of 70–90%. It returns the market and the costs.
func dollarMarket(unit float64) (*demand.Market, []float64) {
	price := []float64{34163, 11927, 32267}
	cost := []float64{2910, 1580, 9146}
	nu := []float64{-1.5, -1, -0.5, 0, 0.5, 1, 1.5}
	w := make([]float64, len(nu))
	for i := range w {
		w[i] = 1 / float64(len(nu))
	}
	for j := range price {
		price[j] /= unit
		cost[j] /= unit
	}
	return priceMarket(price, []float64{2.36, 5.13, 0.594}, nu, w, -7.4e-5*unit, 4e-6*unit), cost
}

// TestEquilibriumInDollars: the equilibrium does not depend on the unit of
// prices (dividing prices, costs and 1/α by the same number divides the
// equilibrium prices by it; common practice). Quoted in dollars, prices of
// 10⁴ cannot meet max|Δp| < 1e-12 in doubles: before the tolerance
// followed the prices' magnitude, the ζ fixed point ran 5000 iterations
// without converging, and the finite-difference Newton fallback then
// returned, for single-product firms, a "converged" price of $495,350 for
// the third product (its share all but zero) and, for one owner, failed
// with prices of $2.3 million.
func TestEquilibriumInDollars(t *testing.T) {
	worst := 0.0
	for _, owner := range [][]int{{0, 1, 0}, {0, 1, 2}, {0, 0, 0}} {
		mkK, cK := dollarMarket(1000)
		inK := Equilibrium(mkK, cK, owner, mkK.Price0(), 1e-12)
		mkD, cD := dollarMarket(1)
		inD := Equilibrium(mkD, cD, owner, mkD.Price0(), 1e-12)
		if !inK.Converged || !inD.Converged {
			t.Fatalf("owners %v: converged %v in thousands, %v in dollars (%s)", owner, inK.Converged, inD.Converged, inD.Reason)
		}
		for j := range inD.Price {
			worst = math.Max(worst, rel(inD.Price[j], 1000*inK.Price[j]))
		}
		if inD.Iterations > 100 {
			t.Errorf("owners %v: %d iterations in dollars", owner, inD.Iterations)
		}
	}
	t.Logf("largest relative difference between the prices in dollars and in thousands: %.2g", worst)
	// Measured 1.5e-14: each solve stops once max|Δp| < 1e-12 in thousands
	// (about 2e-14 relative at prices of 25–75).
	if worst > 1e-13 {
		t.Errorf("prices in dollars differ from 1000 × prices in thousands by %.3g (relative)", worst)
	}
}

// TestEquilibriumWithoutRoot: one agent in twelve has a positive price
// coefficient (+0.05) and favours the niche second product, so that
// product's profit rises with its price at every price (its
// first-order condition has no root; checked on a grid of p₂ from 1 to
// 7.5 when the test was written). The solver tries every stage within its
// limits, reports the market as failed with the reason in words, and
// returns positive prices.
func TestEquilibriumWithoutRoot(t *testing.T) {
	mk := priceMarket([]float64{1.5, 1.5}, []float64{-2, -6}, []float64{0, 1}, []float64{0.92, 0.08}, -2, 2.05)
	sol := Equilibrium(mk, []float64{1, 1}, []int{0, 1}, []float64{1.5, 1.5}, 1e-12)
	if sol.Converged {
		t.Fatalf("converged at %v with residual %g", sol.Price, sol.Residual)
	}
	if !strings.Contains(sol.Reason, "1 of 2 agents have a price coefficient ≥ 0") {
		t.Errorf("reason %q does not name the agents with a price coefficient ≥ 0", sol.Reason)
	}
	if max := zetaMaxIter + newtonMaxIter + dampedMaxIter; sol.Iterations > max {
		t.Errorf("%d iterations, more than the %d the stages allow", sol.Iterations, max)
	}
	if slices.Min(sol.Price) <= 0 || !(sol.Residual > 1e-4) {
		t.Errorf("prices %v, residual %g", sol.Price, sol.Residual)
	}
}

// TestSecondOrderCondition: a monopolist sells one product to two agent
// types, nine in ten with price coefficient −2 and one in ten with −0.05.
// Its profit (p − 1)s(p) rises to a local maximum near p = 2.4, falls to a
// local minimum near p = 4.5 and then rises again (tabulated when the test
// was written), so the first-order condition has a root at the minimum.
// Started there, the ζ fixed point stops at once; before the second-order
// check that root was reported as a converged equilibrium. Started at
// p = 2, the solver finds the local maximum, which passes the check.
func TestSecondOrderCondition(t *testing.T) {
	mk := priceMarket([]float64{2}, []float64{1}, []float64{0, 1}, []float64{0.9, 0.1}, -2, 1.95)
	c, owner := []float64{1}, []int{0}
	lo := profitMinimum(t, mk, c, owner)
	sol := Equilibrium(mk, c, owner, []float64{lo}, 1e-12)
	if sol.Converged || !strings.Contains(sol.Reason, "second-order condition") {
		t.Errorf("at the profit minimum p = %.15g: converged %v, reason %q", lo, sol.Converged, sol.Reason)
	}
	sol = Equilibrium(mk, c, owner, []float64{2}, 1e-12)
	if !sol.Converged || math.Abs(sol.Price[0]-2.4) > 0.2 {
		t.Errorf("from p = 2: converged %v at %v (%s)", sol.Converged, sol.Price, sol.Reason)
	}
}

// profitMinimum returns the root of the one-product market's first-order
// condition between p = 4 and 5 (see TestSecondOrderCondition), by
// bisection.
func profitMinimum(t *testing.T, mk *demand.Market, c []float64, owner []int) float64 {
	t.Helper()
	foc := func(p float64) float64 {
		mk.SetPrices([]float64{p})
		r := make([]float64, 1)
		demand.FOC(r, mk.PriceJacobian(), mk.Shares(), []float64{p}, c, owner)
		return r[0]
	}
	lo, hi := 4.0, 5.0 // r < 0 at 4, > 0 at 5: the root at the profit minimum
	if foc(lo) >= 0 || foc(hi) <= 0 {
		t.Fatalf("r(4) = %g, r(5) = %g: no sign change", foc(lo), foc(hi))
	}
	for hi-lo > 1e-15*hi {
		if mid := (lo + hi) / 2; foc(mid) < 0 {
			lo = mid
		} else {
			hi = mid
		}
	}
	return lo
}

// TestSolverReuse: a solver reused from market to market (as a pool worker
// reuses it), through markets of 3, 2, 1, 1 and 3 products that converge,
// fail in every stage, fail the second-order check and converge again,
// returns exactly the solutions of a fresh solver for each market, and
// allocates less than fresh solvers do.
func TestSolverReuse(t *testing.T) {
	type problem struct {
		mk           func() *demand.Market
		c            []float64
		owner        []int
		start        []float64
		wantConverge bool
	}
	dollars := func(unit float64) func() *demand.Market {
		return func() *demand.Market { mk, _ := dollarMarket(unit); return mk }
	}
	_, cK := dollarMarket(1000)
	_, cD := dollarMarket(1)
	noRoot := func() *demand.Market {
		return priceMarket([]float64{1.5, 1.5}, []float64{-2, -6}, []float64{0, 1}, []float64{0.92, 0.08}, -2, 2.05)
	}
	twoTypes := func() *demand.Market {
		return priceMarket([]float64{2}, []float64{1}, []float64{0, 1}, []float64{0.9, 0.1}, -2, 1.95)
	}
	minimum := profitMinimum(t, twoTypes(), []float64{1}, []int{0})
	problems := []problem{
		{dollars(1000), cK, []int{0, 1, 0}, nil, true},
		{noRoot, []float64{1, 1}, []int{0, 1}, []float64{1.5, 1.5}, false},
		{twoTypes, []float64{1}, []int{0}, []float64{minimum}, false},
		{twoTypes, []float64{1}, []int{0}, []float64{2}, true},
		{dollars(1), cD, []int{0, 0, 0}, nil, true},
	}
	var s solver
	for k, pb := range problems {
		mk := pb.mk()
		start := pb.start
		if start == nil {
			start = mk.Price0()
		}
		got := s.equilibrium(mk, pb.c, pb.owner, start, 1e-12)
		fresh := pb.mk()
		want := Equilibrium(fresh, pb.c, pb.owner, start, 1e-12)
		if !reflect.DeepEqual(got, want) {
			t.Errorf("market %d: reused solver %+v, fresh %+v", k, got, want)
		}
		if got.Converged != pb.wantConverge {
			t.Errorf("market %d: converged %v (%s)", k, got.Converged, got.Reason)
		}
	}
	mk, c := dollarMarket(1000)
	owner, p0 := []int{0, 1, 0}, slices.Clone(mk.Price0())
	reused := testing.AllocsPerRun(20, func() { s.equilibrium(mk, c, owner, p0, 1e-12) })
	fresh := testing.AllocsPerRun(20, func() { Equilibrium(mk, c, owner, p0, 1e-12) })
	t.Logf("allocations per equilibrium: %.0f reused, %.0f fresh", reused, fresh)
	if reused >= fresh {
		t.Errorf("a reused solver allocates %.0f times, a fresh one %.0f", reused, fresh)
	}
}
