package demand

import (
	"math"
	"os"
	"testing"

	"rcdemand/contraction"
)

// TestLogitMarkupClosedForm: plain logit, single- and multi-product firms:
// η_j = 1/(α(1 − s_j)) and 1/(α(1 − S_f)) for every product of firm f
// (Anderson, de Palma & Thisse 1992; Werden & Froeb 1994), with α = −β_price.
func TestLogitMarkupClosedForm(t *testing.T) {
	csv := "market,product,firm,share,price,x\n" +
		"a,1,A,0.1,1.0,0.3\na,2,A,0.2,1.5,0.1\na,3,B,0.15,1.2,0.7\na,4,C,0.05,0.8,0.2\n" +
		"b,1,A,0.3,1.1,0.5\nb,2,B,0.25,0.9,0.2\nb,3,C,0.1,1.4,0.9\n"
	dir := t.TempDir()
	os.WriteFile(dir+"/p.csv", []byte(csv), 0o644)
	os.WriteFile(dir+"/m.toml", []byte(`[data]
products = "p.csv"
[demand]
linear = ["1", "price", "x"]
[instruments]
excluded = []
`), 0o644)
	spec, err := ReadSpec(dir + "/m.toml")
	if err != nil {
		t.Fatal(err)
	}
	m, err := Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	alpha := 2.5
	f, err := NewFitted(m, []float64{1, -alpha, 0.5}, nil)
	if err != nil {
		t.Fatal(err)
	}
	mk := f.Pricing().NewMarket()
	for tm, mkt := range m.Products.Markets {
		mk.Bind(tm)
		for _, single := range []bool{true, false} {
			owner := make([]int, mk.Len())
			firmShare := map[string]float64{}
			for j := range owner {
				owner[j] = j
				if !single {
					owner[j] = int(m.Products.Firm[mkt.Start+j][0])
				}
				firmShare[m.Products.Firm[mkt.Start+j]] += m.Products.Share[mkt.Start+j]
			}
			eta, err := mk.Markups(owner)
			if err != nil {
				t.Fatal(err)
			}
			for j := range eta {
				s := m.Products.Share[mkt.Start+j]
				if !single {
					s = firmShare[m.Products.Firm[mkt.Start+j]]
				}
				want := 1 / (alpha * (1 - s))
				if relDiff(eta[j], want) > 1e-12 {
					t.Errorf("market %s product %d single=%v: markup %.15g, closed form %.15g", mkt.ID, j, single, eta[j], want)
				}
			}
		}
		// Logit elasticities: own −α p_j (1 − s_j), cross α p_k s_k (Berry 1994).
		E := f.Elasticities(tm)
		for j := 0; j < mk.Len(); j++ {
			for k := 0; k < mk.Len(); k++ {
				pk, sk := mk.Price0()[k], m.Products.Share[mkt.Start+k]
				want := alpha * pk * sk
				if j == k {
					want = -alpha * pk * (1 - sk)
				}
				if relDiff(E.At(j, k), want) > 1e-12 {
					t.Errorf("market %s elasticity (%d,%d): %.15g, closed form %.15g", mkt.ID, j, k, E.At(j, k), want)
				}
			}
		}
	}
}

// pricedMarket is one market of five products of three firms with seven
// agents and a random price coefficient (price is the only column of X2).
func pricedMarket() (*Pricing, []int, []float64) {
	price := []float64{1.2, 0.8, 1.5, 1.1, 0.9}
	nu := []float64{-1.5, -0.8, -0.2, 0, 0.4, 1.1, 1.7}
	w := make([]float64, len(nu))
	for i := range w {
		w[i] = 1 / float64(len(nu))
	}
	p := &contraction.Problem{K2: 1, Params: []contraction.Param{{Col: 0, Var: 0}}, X2: price,
		LogShare: make([]float64, 5), Products: []contraction.Span{{Start: 0, End: 5}},
		Agents: []contraction.Span{{Start: 0, End: 7}}, Weight: w, Vars: [][]float64{nu}, PriceCol: 0}
	pr := &Pricing{Problem: p, Theta: []float64{0.6}, BetaPrice: -2, Price0: price,
		Delta0: []float64{-1, -1.5, -0.7, -1.2, -2}}
	cost := make([]float64, 5)
	for j := range cost {
		cost[j] = 0.6 * price[j]
	}
	return pr, []int{0, 0, 1, 1, 2}, cost
}

// TestFOCJacobian compares the analytic Jacobian of the first-order
// conditions with central differences of FOC, away from the observed prices
// so that the curvature term Σ_l Ω_jl (p_l − c_l) ∂²s_l/∂p_j∂p_m matters.
func TestFOCJacobian(t *testing.T) {
	pr, owner, cost := pricedMarket()
	mk := pr.NewMarket()
	mk.Bind(0)
	p := []float64{1.4, 1.0, 1.3, 1.6, 1.2}
	mk.SetPrices(p)
	got := make([]float64, 25)
	mk.FOCJacobian(p, cost, owner, got)
	foc := func(q []float64) []float64 {
		mk.SetPrices(q)
		r := make([]float64, 5)
		FOC(r, mk.PriceJacobian(), mk.Shares(), q, cost, owner)
		return r
	}
	worst := 0.0
	for m := 0; m < 5; m++ {
		h := 1e-5
		up, dn := append([]float64(nil), p...), append([]float64(nil), p...)
		up[m] += h
		dn[m] -= h
		ru, rd := foc(up), foc(dn)
		for j := 0; j < 5; j++ {
			worst = math.Max(worst, math.Abs(got[j*5+m]-(ru[j]-rd[j])/(2*h)))
		}
	}
	t.Logf("largest difference from central differences: %.2g", worst)
	// Measured 2.4e-11 at h = 1e-5; the difference falls as h² (2.2e-7 at
	// h = 1e-3, 2.2e-9 at 1e-4), so it is the differences' truncation error.
	if worst > 5e-11 {
		t.Errorf("FOC Jacobian differs from central differences by %.3g", worst)
	}
}

// plainFamily hides the closed-form second price derivatives of the family
// it wraps, as a family without them would be.
type plainFamily struct{ contraction.Family }

func (f plainFamily) NewMarket(p *contraction.Problem) contraction.Market {
	return struct{ contraction.Market }{f.Family.NewMarket(p)}
}

// TestFOCJacobianWithoutClosedForm: for a family without PriceHessian the
// Jacobian of the first-order conditions comes from central differences in
// prices; it agrees with the closed form of the random-coefficients logit,
// and the market is left at the prices it was at.
func TestFOCJacobianWithoutClosedForm(t *testing.T) {
	pr, owner, cost := pricedMarket()
	p := []float64{1.4, 1.0, 1.3, 1.6, 1.2}
	closed := pr.NewMarket()
	closed.Bind(0)
	closed.SetPrices(p)
	want := make([]float64, 25)
	closed.FOCJacobian(p, cost, owner, want)
	pr.Problem.Family = plainFamily{contraction.RCLogit}
	plain := pr.NewMarket()
	plain.Bind(0)
	plain.SetPrices(p)
	got := make([]float64, 25)
	plain.FOCJacobian(p, cost, owner, got)
	worst := 0.0
	for n := range got {
		worst = math.Max(worst, math.Abs(got[n]-want[n]))
	}
	t.Logf("largest difference between differences and the closed form: %.2g", worst)
	// Measured 8.7e-11 (h = 1e-6: rounding of order 1e-16/h dominates).
	if worst > 3e-10 {
		t.Errorf("finite-difference FOC Jacobian differs from the closed form by %.3g", worst)
	}
	for j, s := range plain.Shares() {
		if s != closed.Shares()[j] {
			t.Fatalf("the market was not left at p: share %d is %v, want %v", j, s, closed.Shares()[j])
		}
	}
}

// TestFOCResidual: the residual is the largest |r_j| of FOC, and computing
// it allocates nothing.
func TestFOCResidual(t *testing.T) {
	pr, owner, cost := pricedMarket()
	mk := pr.NewMarket()
	mk.Bind(0)
	p := []float64{1.4, 1.0, 1.3, 1.6, 1.2}
	mk.SetPrices(p)
	r := make([]float64, 5)
	FOC(r, mk.PriceJacobian(), mk.Shares(), p, cost, owner)
	want := 0.0
	for _, v := range r {
		want = math.Max(want, math.Abs(v))
	}
	if got := mk.FOCResidual(p, cost, owner); got != want || want == 0 {
		t.Errorf("residual %v, largest |r_j| %v", got, want)
	}
	if a := testing.AllocsPerRun(10, func() { mk.FOCResidual(p, cost, owner) }); a != 0 {
		t.Errorf("%v allocations", a)
	}
}
