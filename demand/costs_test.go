package demand

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"slices"
	"strings"
	"testing"
)

// TestLogitSupplyReference estimates the plain logit jointly with a log
// marginal-cost equation on testdata/logit-supply and compares with the
// independent numpy/scipy implementation of the same conventions there
// (expected.json; cross-checked in R with the gmm package, r_crosscheck.json):
// β, γ, sandwich standard errors, the step-1 objective and Hansen J.
func TestLogitSupplyReference(t *testing.T) {
	raw, err := os.ReadFile("../testdata/logit-supply/expected.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Beta, Gamma, SEBeta, SEGamma []float64
		Step1                        struct{ Objective float64 }
		J                            float64
		JDF                          int `json:"j_df"`
	}
	ref2 := map[string]json.RawMessage{}
	json.Unmarshal(raw, &ref2)
	json.Unmarshal(raw, &ref)
	json.Unmarshal(ref2["se_beta"], &ref.SEBeta)
	json.Unmarshal(ref2["se_gamma"], &ref.SEGamma)
	_, res := estimateFile(t, "../testdata/logit-supply/spec.toml")
	worst := 0.0
	check := func(what string, got, want float64) {
		t.Helper()
		d := math.Abs(got-want) / math.Abs(want)
		worst = math.Max(worst, d)
		// Measured: 6.5e-12 at most (γ for the constant, whose value is
		// 0.012), 1e-13 elsewhere; both programs drive the gradient below
		// 1e-10.
		if d > 1e-10 {
			t.Errorf("%s: %.15g, reference %.15g (relative difference %.2g)", what, got, want, d)
		}
	}
	for k, c := range res.Beta {
		check("β "+c.Name, c.Value, ref.Beta[k])
		check("se β "+c.Name, c.StdErr(), ref.SEBeta[k])
	}
	for k, c := range res.Gamma {
		check("γ "+c.Name, c.Value, ref.Gamma[k])
		check("se γ "+c.Name, c.StdErr(), ref.SEGamma[k])
	}
	check("step-1 objective", res.Stages[0].Objective, ref.Step1.Objective)
	check("J", *res.GMM.J, ref.J)
	if res.GMM.JDF != ref.JDF {
		t.Errorf("J df %d, reference %d", res.GMM.JDF, ref.JDF)
	}
	t.Logf("largest relative difference %.2g; %d objective calls", worst, res.Convergence.ObjectiveCalls)
}

// supplyIncomeSpec is the synthetic-small spec with an invented demographic
// (see addIncome) interacting with price and a cost equation of the given
// form.
func supplyIncomeSpec(form string) string {
	return `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
random = ["price", "x1"]
demographics = ["income"]
interactions = { price = ["income"] }
[instruments]
excluded = ["z_cost", "z_own_x1", "z_own_x2", "z_rival_x1", "z_rival_x2", "z_diff_x1", "z_diff_x2", "z_rival_cost"]
[supply]
cost = ["1", "z_cost", "x1"]
form = "` + form + `"
excluded = ["z_own_x1", "z_rival_x1"]
[agents]
tastes = { price = "nu_price", x1 = "nu_x1" }
`
}

// TestSupplyGradient checks the analytic gradient of the stacked objective
// (demand and a log cost equation) with respect to the price coefficient,
// σ and Π against central differences, on the synthetic-small data with an
// invented demographic: ∂η/∂θ runs through the share model's derivatives of
// ∂s/∂p (contraction's PriceJacobianTheta).
func TestSupplyGradient(t *testing.T) {
	for _, form := range []string{"log", "linear"} {
		t.Run(form, func(t *testing.T) {
			spec := specIn(t, supplyIncomeSpec(form), addIncome(t))
			m, err := Load(spec)
			if err != nil {
				t.Fatal(err)
			}
			if got := strings.Join(m.ParamNames(), " "); got != "beta[price] sigma[price] sigma[x1] pi[price×income]" {
				t.Fatalf("parameters %s", got)
			}
			iv, err := m.NewIV()
			if err != nil {
				t.Fatal(err)
			}
			W, _ := iv.InitialWeight()
			iv.SetWeight(W)
			o, err := newObjective(m, iv, SettingsOf(spec), Monitor{}, nil)
			if err != nil {
				t.Fatal(err)
			}
			x := []float64{-2.2, 0.3, 1.5, 0.2}
			pt := o.at(x, true)
			if !pt.ok() {
				t.Fatalf("no evaluation at %v: %v", x, o.costErr)
			}
			for i := range x {
				h := 1e-5
				up, dn := append([]float64(nil), x...), append([]float64(nil), x...)
				up[i] += h
				dn[i] -= h
				fd := (o.at(up, false).q - o.at(dn, false).q) / (2 * h)
				t.Logf("%s: analytic %.12g, central difference %.12g", m.Params[i].Name(), pt.grad[i], fd)
				// O(h²) truncation, as in TestObjectiveAtStart.
				// (measured 3e-10 relative at most).
				if math.Abs(fd-pt.grad[i]) > 1e-8*math.Max(1, math.Abs(fd)) {
					t.Errorf("%s: analytic %.12g, central difference %.12g", m.Params[i].Name(), pt.grad[i], fd)
				}
			}
		})
	}
}

// TestSupplyWithFixedEffects: market fixed effects absorbed from demand
// (the constant dropped) leave the cost equation as it is; on the
// logit-supply data (true α = −1.5) the joint estimate converges near the
// truth.
func TestSupplyWithFixedEffects(t *testing.T) {
	raw, err := os.ReadFile("../testdata/logit-supply/spec.toml")
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(raw), `linear = ["1", "x1", "x2", "price"]`, "linear = [\"1\", \"x1\", \"x2\", \"price\"]\nabsorb = [\"market\"]", 1)
	// Rival sums are collinear with own sums and the characteristic once
	// market effects are removed (they add up to the market total).
	noRivals := strings.Replace(text, `, "rival_sum_x1", "rival_sum_x2"]`, `]`, 1)
	if !strings.Contains(text, `absorb = ["market"]`) || noRivals == text {
		t.Fatal("the spec was not edited: its [demand] linear or [instruments] excluded changed")
	}
	text = noRivals
	spec, err := ParseSpec("../testdata/logit-supply/fe.toml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	m, err := Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	if m.absorb == nil || slices.Contains(m.X1Names, "1") {
		t.Fatalf("market effects not absorbed: X1 %v", m.X1Names)
	}
	res, err := Estimate(m, SettingsOf(spec), Monitor{})
	if err != nil {
		t.Fatal(err)
	}
	if !res.Convergence.Converged || len(res.Gamma) != 3 {
		t.Fatalf("converged %v, γ %v", res.Convergence.Converged, res.Gamma)
	}
	nearTruth(t, res, "price", -1.5)
}

// TestNegativeCostsCountedAtEstimate: the warning about negative implied
// costs under form = "linear" counts them at the estimate, not at the
// points the curvature check evaluates next to it. On the logit-supply data
// (plain logit: η_j = 1/(α(1 − S_f)), negative c_j when α < a_j =
// 1/(p_j(1 − S_f))) the price coefficient is put half a curvature step
// below the largest a_j, so that exactly one cost is negative at the
// estimate and none a step away.
func TestNegativeCostsCountedAtEstimate(t *testing.T) {
	raw, err := os.ReadFile("../testdata/logit-supply/spec.toml")
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(raw), `form = "log"`, `form = "linear"`, 1)
	if text == string(raw) {
		t.Fatal(`the spec has no form = "log" to replace`)
	}
	spec, err := ParseSpec("../testdata/logit-supply/linear.toml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	m, err := Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	p := m.Products
	top, second := 0.0, 0.0
	for _, mk := range p.Markets {
		firm := map[int]float64{}
		for i := mk.Start; i < mk.End; i++ {
			firm[m.Supply.owner[i]] += p.Share[i]
		}
		for i := mk.Start; i < mk.End; i++ {
			a := 1 / (p.Price[i] * (1 - firm[m.Supply.owner[i]]))
			if a > top {
				top, second = a, top
			} else if a > second {
				second = a
			}
		}
	}
	h := 1e-5 * math.Max(1, top) // the curvature check's step
	if top-second < h {
		t.Fatalf("the two largest bounds %.15g and %.15g are within a step", top, second)
	}
	e, err := newEstimation(m, SettingsOf(spec), Monitor{})
	if err != nil {
		t.Fatal(err)
	}
	x := []float64{-(top - h/2)}
	if err := e.finish(stageResult{x: x, status: Converged, converged: true}); err != nil {
		t.Fatal(err)
	}
	res := e.res
	theta, err := m.ThetaOf(res)
	if err != nil {
		t.Fatal(err)
	}
	f, err := NewFitted(m, res.BetaValues(), theta)
	if err != nil {
		t.Fatal(err)
	}
	cost, _, err := f.Costs()
	if err != nil {
		t.Fatal(err)
	}
	want := countNegative(cost)
	if want != 1 {
		t.Fatalf("%d negative costs at the estimate, the test expects 1", want)
	}
	got := 0
	for _, n := range res.Notes {
		if strings.Contains(n, "implied marginal costs p − η are negative") {
			var total int
			if _, err := fmt.Sscanf(n, "warning: %d of %d", &got, &total); err != nil {
				t.Fatalf("note %q: %v", n, err)
			}
		}
	}
	if got != want {
		t.Errorf("the note counts %d negative costs, the estimate has %d (notes %q)", got, want, res.Notes)
	}
}

// TestCostSideAllocatesNothing: once a worker's buffers have grown to the
// largest market, evaluating the cost side of a market (costs, markups and
// their derivatives) allocates nothing.
func TestCostSideAllocatesNothing(t *testing.T) {
	spec := specIn(t, supplyIncomeSpec("log"), addIncome(t))
	m, err := Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	iv, err := m.NewIV()
	if err != nil {
		t.Fatal(err)
	}
	W, _ := iv.InitialWeight()
	iv.SetWeight(W)
	o, err := newObjective(m, iv, SettingsOf(spec), Monitor{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	x := []float64{-2.2, 0.3, 1.5, 0.2}
	if pt := o.at(x, true); !pt.ok() {
		t.Fatalf("no evaluation at %v: %v", x, o.costErr)
	}
	ce := o.costs
	cw := &costWorker{w: m.Problem.NewWorker()}
	theta2 := m.ShareTheta(x)
	n := m.N()
	ys, dys := make([]float64, n), make([]float64, n*len(x))
	all := func() {
		for mk := range m.Problem.Products {
			if err := ce.market(cw, mk, x[0], theta2, o.solver.Delta, o.jac, ys, dys); err != nil {
				t.Fatal(err)
			}
		}
	}
	all()
	for i, y := range ys {
		if y != o.y[n+i] {
			t.Fatalf("row %d: y_s %v, the objective's %v", i, y, o.y[n+i])
		}
	}
	if a := testing.AllocsPerRun(5, all); a != 0 {
		t.Errorf("%v allocations per pass over the markets", a)
	}
}

// TestPriceColumnIsDemeanedPrice: the demand rows of the joint objective
// subtract β_price times X1's price column, which must be the observed
// price with the fixed effects removed, to the bit.
func TestPriceColumnIsDemeanedPrice(t *testing.T) {
	raw, err := os.ReadFile("../testdata/logit-supply/spec.toml")
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Replace(string(raw), `linear = ["1", "x1", "x2", "price"]`, "linear = [\"x1\", \"x2\", \"price\"]\nabsorb = [\"market\", \"firm\"]", 1)
	text = strings.Replace(text, `, "rival_sum_x1", "rival_sum_x2"]`, `]`, 1)
	if !strings.Contains(text, "absorb") || strings.Contains(text, "rival_sum") {
		t.Fatal("the spec was not edited")
	}
	spec, err := ParseSpec("../testdata/logit-supply/fe2.toml", []byte(text))
	if err != nil {
		t.Fatal(err)
	}
	m, err := Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	want := slices.Clone(m.Products.Price)
	newDemeaner(m.absorb.groups).apply(want)
	iv, err := m.NewIV()
	if err != nil {
		t.Fatal(err)
	}
	o, err := newObjective(m, iv, SettingsOf(spec), Monitor{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(o.priceD, want) {
		t.Errorf("the objective's price differs from the demeaned price")
	}
}
