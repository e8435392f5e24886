package demand

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// nestedReference is testdata/nested-logit/expected.json: a plain nested
// logit estimated by R (AER 1.2.10 ivreg, gmm 1.7; see that folder's
// README), with numpy cross-checks.
type nestedReference struct {
	Coef       []float64 `json:"coef"`
	SE         []float64 `json:"se_sandwich"`
	Step1      []float64 `json:"step1_coef"`
	J          float64   `json:"j"`
	JDF        int       `json:"j_df"`
	WeakF      []float64 `json:"twosls_weak_instruments_f"`
	Elasticity struct {
		Alpha, Rho float64
		Matrix     [][]float64
	} `json:"elasticities_market1"`
}

func readNestedReference(t *testing.T) nestedReference {
	t.Helper()
	raw, err := os.ReadFile("../testdata/nested-logit/expected.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref nestedReference
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	return ref
}

// relDiff returns |a − b| / max(|b|, 1e-300).
func relDiff(a, b float64) float64 { return math.Abs(a-b) / math.Max(math.Abs(b), 1e-300) }

// TestNestedLogitMatchesR: with no random columns the nested logit's GMM
// estimate is the linear IV of ln s_j − ln s_0 on (1, x1, x2, price,
// ln s_{j|g}) with ρ the last coefficient. Estimated here with ρ as a
// nonlinear parameter (the nested inversion), against R: two-step GMM
// coefficients, sandwich standard errors and Hansen J from estimate.R's
// matrix algebra (= AER 1.2.10 ivreg at step 1, gmm 1.7 at step 2 to
// 1e-12; numbers in testdata/nested-logit/expected.json), and the weak-
// instrument F of AER's ivreg diagnostics for price and ln s_{j|g}.
func TestNestedLogitMatchesR(t *testing.T) {
	ref := readNestedReference(t)
	_, res := estimateFile(t, "../testdata/nested-logit/spec.toml")
	if len(res.Rho) != 1 || res.Rho[0].Name != "all" {
		t.Fatalf("rho %+v", res.Rho)
	}
	got := append(res.BetaValues(), res.Rho[0].Value)
	ses := []float64{}
	for _, c := range append(res.Beta, res.Rho[0]) {
		ses = append(ses, c.StdErr())
	}
	step1 := append(append([]float64(nil), res.Stages[0].Beta...), res.Stages[0].Theta2...)
	worst := map[string]float64{}
	for k := range got {
		worst["coefficients"] = math.Max(worst["coefficients"], relDiff(got[k], ref.Coef[k]))
		worst["standard errors"] = math.Max(worst["standard errors"], relDiff(ses[k], ref.SE[k]))
		worst["step-1 coefficients"] = math.Max(worst["step-1 coefficients"], relDiff(step1[k], ref.Step1[k]))
	}
	worst["J"] = relDiff(*res.GMM.J, ref.J)
	d := res.Diagnostics
	worst["first-stage F"] = math.Max(relDiff(d.FirstStage.F, ref.WeakF[0]), relDiff(d.FirstStageNest.F, ref.WeakF[1]))
	// Measured (relative, with and without the AVX2 kernels): coefficients
	// 2e-13, standard errors 2.5e-13, step 1 7.7e-13, J 3.7e-13, F 1e-15.
	// The tolerance leaves room for the optimiser's stopping point (Q is
	// quadratic in ρ here, so that is round-off).
	for what, w := range worst {
		t.Logf("%s: largest relative difference from R %.2g", what, w)
		if w > 1e-11 {
			t.Errorf("%s differ from R by %.3g (relative)", what, w)
		}
	}
	if res.GMM.JDF != ref.JDF {
		t.Errorf("J has %d degrees of freedom, R %d", res.GMM.JDF, ref.JDF)
	}
	if !res.Convergence.Converged {
		t.Errorf("not converged: %s", res.Convergence.Message)
	}
}

// TestNestedLogitElasticitiesThroughFitted: market 1's elasticities from the
// post-estimation path at the true α = −2, ρ = 0.5 against the closed forms
// of Berry (1994) and Verboven (1996) in expected.json (estimate.R, checked
// there by numpy finite differences).
func TestNestedLogitElasticitiesThroughFitted(t *testing.T) {
	ref := readNestedReference(t)
	m := loadFile(t, "../testdata/nested-logit/spec.toml")
	f, err := NewFitted(m, []float64{1, 1, 0.5, ref.Elasticity.Alpha}, []float64{ref.Elasticity.Rho})
	if err != nil {
		t.Fatal(err)
	}
	E := f.Elasticities(0)
	worst := 0.0
	for j, row := range ref.Elasticity.Matrix {
		for k, want := range row {
			worst = math.Max(worst, relDiff(E.At(j, k), want))
		}
	}
	t.Logf("largest relative difference from the closed forms: %.2g", worst)
	// Measured 5e-16.
	if worst > 1e-12 {
		t.Errorf("elasticities differ from the closed forms by %.3g", worst)
	}
}

// familySpec is the synthetic-small model with a family's keys added
// (extra goes into [demand]; estimation into [estimation]).
func familySpec(t *testing.T, random, extra, estimation string) *Spec {
	t.Helper()
	nu := map[string]string{`"1"`: `"1" = "nu_const"`, `"price"`: `price = "nu_price"`, `"x1"`: `x1 = "nu_x1"`}
	var tastes []string
	for _, c := range strings.Split(strings.Trim(random, "[]"), ",") {
		if c = strings.TrimSpace(c); c != "" {
			tastes = append(tastes, nu[c])
		}
	}
	return specIn(t, `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
random = `+random+`
`+extra+`
[instruments]
excluded = ["z_cost", "z_own_x1", "z_own_x2", "z_rival_x1", "z_rival_x2", "z_diff_x1", "z_diff_x2", "z_rival_cost"]
[agents]
tastes = { `+strings.Join(tastes, ", ")+` }
[estimation]
`+estimation+`
`, func(dir string) {
		addIncome(t)(dir)
		addColumn(t, filepath.Join(dir, "products.csv"), "segment", func(i int) string {
			return []string{"a", "b", "c"}[i%3]
		})
	})
}

// familyCases are one model of each family on the synthetic-small data (the
// data were drawn from a plain RC logit; gradient checks need no true
// model), with a point θ2 to check at.
var familyCases = []struct {
	name, random, extra string
	theta               []float64
}{
	{"random-coefficients nested logit", `["price", "x1"]`, `nests = "segment"`, []float64{0.4, 1.2, 0.45}},
	{"nested logit, rho by nest", `[]`, `nests = "segment"
nesting = "by-nest"`, []float64{0.3, 0.6, 0.5}},
	{"log-normal price with income", `["price", "x1"]`, `price_distribution = "lognormal"
demographics = ["income"]
interactions = { price = ["income"] }`, []float64{0.6, 0.3, 1.1, 0.2}},
	{"correlated tastes", `["1", "price", "x1"]`, `random_covariance = "full"`, []float64{0.8, 0.2, 0.5, -0.3, 0.4, 1.0}},
	{"all three", `["price", "x1"]`, `nests = "segment"
price_distribution = "lognormal"
random_covariance = "full"`, []float64{0.5, 0.3, 0.2, 1.0, 0.4}},
}

// TestFamilyGradients: the analytic gradient of Q for each family (ρ, the
// log-normal location and scale, Π on a log-normal price, the Cholesky
// factor) against central differences.
func TestFamilyGradients(t *testing.T) {
	for _, tc := range familyCases {
		t.Run(tc.name, func(t *testing.T) {
			m, err := Load(familySpec(t, tc.random, tc.extra, ""))
			if err != nil {
				t.Fatal(err)
			}
			if len(m.Params) != len(tc.theta) {
				t.Fatalf("parameters %v", m.ParamNames())
			}
			o := stepOneObjective(t, m)
			g := o.at(tc.theta, true).grad
			worst := 0.0
			for i := range tc.theta {
				h := 1e-5
				up, dn := append([]float64(nil), tc.theta...), append([]float64(nil), tc.theta...)
				up[i] += h
				dn[i] -= h
				fd := (o.at(up, false).q - o.at(dn, false).q) / (2 * h)
				worst = math.Max(worst, math.Abs(fd-g[i])/math.Max(1, math.Abs(fd)))
				// O(h²) truncation, as in TestPiGradient.
				if math.Abs(fd-g[i]) > 1e-7*math.Max(1, math.Abs(fd)) {
					t.Errorf("%s: analytic %.12g, central difference %.12g", m.Params[i].Name(), g[i], fd)
				}
			}
			t.Logf("%v: largest relative difference from central differences %.2g", m.ParamNames(), worst)
		})
	}
}

// stepOneObjective returns the objective of m under W1 = (Z'Z/N)⁻¹.
func stepOneObjective(t *testing.T, m *Model) *objective {
	t.Helper()
	iv, err := NewIV(m.X1, m.Z, m.X1Names, m.ZNames)
	if err != nil {
		t.Fatal(err)
	}
	W, _ := iv.InitialWeight()
	iv.SetWeight(W)
	o, err := newObjective(m, iv, SettingsOf(m.Spec), Monitor{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	return o
}

// TestDiagonalCholeskyIsDiagonal: with L diagonal the correlated-tastes
// model is the diagonal model with σ_k = L_kk: the same Q, and the same
// gradient in the diagonal entries.
func TestDiagonalCholeskyIsDiagonal(t *testing.T) {
	full, err := Load(familySpec(t, `["1", "price", "x1"]`, `random_covariance = "full"`, ""))
	if err != nil {
		t.Fatal(err)
	}
	diag, err := Load(familySpec(t, `["1", "price", "x1"]`, "", ""))
	if err != nil {
		t.Fatal(err)
	}
	sigma := []float64{0.8, 0.5, 1.1}
	// L row by row: (1,1), (price,1), (price,price), (x1,1), (x1,price), (x1,x1).
	L := []float64{0.8, 0, 0.5, 0, 0, 1.1}
	pf := stepOneObjective(t, full).at(L, true)
	pd := stepOneObjective(t, diag).at(sigma, true)
	worst := relDiff(pf.q, pd.q)
	for k, i := range []int{0, 2, 5} {
		worst = math.Max(worst, relDiff(pf.grad[i], pd.grad[k]))
	}
	t.Logf("largest relative difference: %.2g", worst)
	if worst > 1e-12 {
		t.Errorf("Q %v vs %v, gradients %v vs %v", pf.q, pd.q, pf.grad, pd.grad)
	}
}

// TestImpliedCovarianceDeltaMethod: the standard errors of σ_k = √(LLᵀ)_kk
// and of the correlations are √(g'Vg) with g their gradient in L; with V
// the identity that is |g|, here against the norm of a central-difference
// gradient.
func TestImpliedCovarianceDeltaMethod(t *testing.T) {
	m, err := Load(familySpec(t, `["1", "price", "x1"]`, `random_covariance = "full"`, ""))
	if err != nil {
		t.Fatal(err)
	}
	L := []float64{0.8, 0.3, 0.5, -0.4, 0.2, 1.1}
	P := len(L)
	V := mat.NewSymDense(P, nil)
	for i := 0; i < P; i++ {
		V.SetSym(i, i, 1)
	}
	implied := func(x []float64) []float64 {
		var r Results
		r.setImplied(m, x, nil, 0)
		var out []float64
		for _, c := range r.Sigma {
			out = append(out, c.Value)
		}
		for _, e := range r.Correlation {
			out = append(out, e.Value)
		}
		return out
	}
	var r Results
	r.setImplied(m, L, V, 0)
	var se []float64
	for _, c := range r.Sigma {
		se = append(se, *c.SE)
	}
	for _, e := range r.Correlation {
		se = append(se, *e.SE)
	}
	base := implied(L)
	if len(base) != 6 || len(se) != 6 {
		t.Fatalf("%d implied values, %d standard errors", len(base), len(se))
	}
	// Σ = LLᵀ by hand: σ_1 = 0.8, σ_price = √(0.3²+0.5²), σ_x1 = √(0.4²+0.2²+1.1²);
	// corr(price, 1) = 0.3·0.8/(0.8 σ_price).
	want := []float64{0.8, math.Sqrt(0.34), math.Sqrt(0.16 + 0.04 + 1.21), 0.3 / math.Sqrt(0.34)}
	for k, w := range want {
		if relDiff(base[k], w) > 1e-15 {
			t.Errorf("implied value %d: %.17g, by hand %.17g", k, base[k], w)
		}
	}
	h := 1e-6
	worst := 0.0
	for k := range base {
		norm := 0.0
		for i := range L {
			up, dn := append([]float64(nil), L...), append([]float64(nil), L...)
			up[i] += h
			dn[i] -= h
			d := (implied(up)[k] - implied(dn)[k]) / (2 * h)
			norm += d * d
		}
		worst = math.Max(worst, relDiff(se[k], math.Sqrt(norm)))
	}
	t.Logf("largest relative difference of the delta-method SE: %.2g", worst)
	if worst > 1e-8 {
		t.Errorf("delta-method standard errors differ from central differences by %.3g", worst)
	}
}

// TestFamilyResultsRoundTrip: each family's results carry its parameters by
// kind and name (rho by nest, cholesky by row and column, the log-normal
// location as a nonlinear beta) and read back into the same model, while a
// model of another family refuses them.
func TestFamilyResultsRoundTrip(t *testing.T) {
	models := map[string]*Model{}
	for _, tc := range familyCases {
		m, err := Load(familySpec(t, tc.random, tc.extra, ""))
		if err != nil {
			t.Fatal(err)
		}
		models[tc.name] = m
	}
	for _, tc := range familyCases {
		m := models[tc.name]
		K := len(m.X1Names)
		values := append(make([]float64, K), tc.theta...)
		V := mat.NewSymDense(len(values), nil)
		for i := range values {
			V.SetSym(i, i, 0.01)
		}
		r := Results{SpecFile: "spec.toml"}
		r.setEstimates(m, values, V)
		raw, _ := json.Marshal(&r)
		var back Results
		if err := json.Unmarshal(raw, &back); err != nil {
			t.Fatal(err)
		}
		if err := back.check("results.json"); err != nil {
			t.Errorf("%s: %v", tc.name, err)
		}
		theta, err := m.ThetaOf(&back)
		if err != nil {
			t.Fatalf("%s: %v", tc.name, err)
		}
		for i := range theta {
			if theta[i] != tc.theta[i] {
				t.Errorf("%s: %s read back as %v, was %v", tc.name, m.Params[i].Name(), theta[i], tc.theta[i])
			}
		}
		// Estimates must follow the covariance's order (merger draws pair them).
		byName := map[string]float64{}
		for k, c := range m.X1Names {
			byName[c] = values[k]
		}
		for i, p := range m.Params {
			byName[p.Name()] = tc.theta[i]
		}
		est := back.Estimates()
		if len(est) != len(back.Covariance.Names) {
			t.Fatalf("%s: %d estimates for covariance names %v", tc.name, len(est), back.Covariance.Names)
		}
		for a, name := range back.Covariance.Names {
			if est[a] != byName[name] {
				t.Errorf("%s: estimate %d is %v, the covariance names it %s = %v", tc.name, a, est[a], name, byName[name])
			}
		}
		if _, theta2 := m.FromEstimates(est); !slices.Equal(theta2, tc.theta) {
			t.Errorf("%s: FromEstimates gives θ %v, want %v", tc.name, theta2, tc.theta)
		}
		for other, m2 := range models {
			if other == tc.name {
				continue
			}
			if _, err := m2.ThetaOf(&back); err == nil && len(m2.Params) > 0 {
				same := true
				for i, p := range m2.Params {
					same = same && i < len(m.Params) && p == m.Params[i]
				}
				if !same {
					t.Errorf("results of %q read into a %q model without complaint", tc.name, other)
				}
			}
		}
	}
	nested := models["random-coefficients nested logit"]
	var r Results
	r.setEstimates(nested, append(make([]float64, 4), 0.4, 1.2, 0.45), nil)
	if len(r.Rho) != 1 || r.Rho[0].Name != "all" || r.Rho[0].Value != 0.45 || r.Rho[0].SE != nil {
		t.Errorf("rho %+v", r.Rho)
	}
	full := models["correlated tastes"]
	r.setEstimates(full, append(make([]float64, 4), 0.8, 0.2, 0.5, -0.3, 0.4, 1.0), nil)
	if len(r.Cholesky) != 6 || r.Cholesky[1].Row != "price" || r.Cholesky[1].Column != "1" || len(r.Sigma) != 3 || len(r.Correlation) != 3 {
		t.Errorf("cholesky %+v sigma %+v correlations %+v", r.Cholesky, r.Sigma, r.Correlation)
	}
	ln := models["log-normal price with income"]
	r.setEstimates(ln, append(make([]float64, 3), 0.6, 0.3, 1.1, 0.2), nil)
	last := r.Beta[len(r.Beta)-1]
	if last.Name != "price" || !last.Nonlinear || !strings.Contains(last.Note, "ln(−α") || r.PriceAlpha == nil || !(r.PriceAlpha.Mean < 0) {
		t.Errorf("log-normal price: beta %+v, price_sensitivity %+v", r.Beta, r.PriceAlpha)
	}
	if want := -math.Exp(0.6); r.PriceAlpha.AtLocation != want {
		t.Errorf("α at the location %v, want −exp(β) = %v", r.PriceAlpha.AtLocation, want)
	}
}
