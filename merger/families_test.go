package merger

import (
	"math"
	"testing"

	"rcdemand/contraction"
	"rcdemand/demand"
)

// nestedFitted is the nested logit of testdata/nested-logit at R's two-step
// estimates (expected.json: β for 1, x1, x2, price, then ρ).
func nestedFitted(t *testing.T) *demand.Fitted {
	t.Helper()
	spec, err := demand.ReadSpec("../testdata/nested-logit/spec.toml")
	if err != nil {
		t.Fatal(err)
	}
	m, err := demand.Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	beta := []float64{0.98346557393422385, 0.98869752681316847, 0.47978977457296373, -1.9628596938960352}
	f, err := demand.NewFitted(m, beta, []float64{0.51828518234871224})
	if err != nil {
		t.Fatal(err)
	}
	return f
}

// TestNestedZetaFixedPoint: with the nested logit's split ∂s/∂p = diag(Λ) −
// Γ, Λ_j = Σ_i w_i α_i s_ij/(1−ρ), the ζ map p ↦ c + Λ⁻¹(Ω∘Γ)(p − c) −
// Λ⁻¹s (Morrow & Skerlos 2011) has the Bertrand–Nash prices as its fixed
// point: at the observed prices with the costs recovered from the
// first-order conditions, the map returns the prices, and the post-merger
// equilibrium it finds satisfies the first-order conditions.
func TestNestedZetaFixedPoint(t *testing.T) {
	f := nestedFitted(t)
	owner, err := f.Model.Firms()
	if err != nil {
		t.Fatal(err)
	}
	pool := contraction.NewPool(f.Pricing().NewMarket)
	markets := len(f.Model.Products.Markets)
	worstMap, worstFOC := make([]float64, markets), make([]float64, markets)
	pool.Run(markets, func(mk *demand.Market, t int) {
		span := f.Model.Products.Markets[t]
		mk.Bind(t)
		o := localOwners(owner[span.Start:span.End])
		eta, err := mk.Markups(o)
		if err != nil {
			worstMap[t] = math.Inf(1)
			return
		}
		p := mk.Price0()
		J := len(p)
		c := make([]float64, J)
		for j := range c {
			c[j] = p[j] - eta[j]
		}
		var s solver
		s.reset(mk, c, o, 1e-12)
		if !s.eval(p) {
			worstMap[t] = math.Inf(1)
			return
		}
		worstMap[t] = s.zetaMap(make([]float64, J), p) // max_j |c_j + ζ_j(p) − p_j|
		worstFOC[t] = mk.FOCResidual(p, c, o)
	})
	wm, wf := 0.0, 0.0
	for t := range worstMap {
		wm, wf = math.Max(wm, worstMap[t]), math.Max(wf, worstFOC[t])
	}
	t.Logf("observed prices: ζ map moves them by at most %.2g; FOC residual %.2g", wm, wf)
	if wm > 1e-12 || wf > 1e-13 {
		t.Errorf("the Bertrand–Nash prices are not a fixed point of the ζ map: %.3g, FOC %.3g", wm, wf)
	}
	res, err := Simulate(f, Scenario{Combine: []string{"Copperleaf", "Elmstead"}})
	if err != nil {
		t.Fatal(err)
	}
	worst := 0.0
	for _, m := range res.Markets {
		worst = math.Max(worst, m.FOCPost)
		if !m.Converged || m.Method != "zeta" {
			t.Errorf("market %s: converged %v by %s", m.Market, m.Converged, m.Method)
		}
	}
	t.Logf("post-merger FOC residual at most %.2g", worst)
	if worst > 1e-10 {
		t.Errorf("post-merger first-order conditions violated by %.3g", worst)
	}
	if res.Summary.PriceChangePctMerging <= 0 || res.Summary.CSChangePerConsumerMean >= 0 {
		t.Errorf("a merger without cost savings should raise prices and lower consumer surplus: %+v", res.Summary)
	}
}

// TestNestedConsumerSurplus: consumer surplus of the plain nested logit is
// the log-sum ln(1 + Σ_g D_g^(1−ρ))/|α| (Small & Rosen 1981 for the nested
// logit), D_g = Σ_{j∈g} exp(δ_j/(1−ρ)), written out by hand for market 1.
func TestNestedConsumerSurplus(t *testing.T) {
	f := nestedFitted(t)
	mk := f.Pricing().NewMarket()
	mk.Bind(0)
	span := f.Model.Products.Markets[0]
	rho, alpha := f.Theta[0], f.Beta[3]
	D := map[int]float64{}
	for n := span.Start; n < span.End; n++ {
		D[f.Model.NestOf[n]] += math.Exp(f.Delta[n] / (1 - rho))
	}
	sum := 1.0
	for _, d := range D {
		sum += math.Pow(d, 1-rho)
	}
	want := math.Log(sum) / -alpha
	if got := mk.ConsumerSurplus(); math.Abs(got-want) > 1e-14*want {
		t.Errorf("consumer surplus %.17g, by hand %.17g", got, want)
	}
}
