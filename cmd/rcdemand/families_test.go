package main

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
)

// TestNestedLogitEndToEnd runs the nested logit of testdata/nested-logit
// through every command a user would: estimate (ρ against R's two-step
// GMM, AER 1.2.10 / gmm 1.7, in that folder's expected.json), elasticities,
// merger with parameter draws, and report.
func TestNestedLogitEndToEnd(t *testing.T) {
	dir := t.TempDir()
	for _, f := range []string{"products.csv", "spec.toml"} {
		raw, err := os.ReadFile(filepath.Join("../../testdata/nested-logit", f))
		if err != nil {
			t.Fatal(err)
		}
		os.WriteFile(filepath.Join(dir, f), raw, 0o644)
	}
	res := filepath.Join(dir, "results.json")
	code, out, errs := runCLI(t, "estimate", filepath.Join(dir, "spec.toml"), "--out", res, "--quiet", "--latex", filepath.Join(dir, "t.tex"))
	if code != 0 {
		t.Fatalf("estimate exit %d: %s", code, errs)
	}
	for _, want := range []string{"nesting parameters (ρ)\n    all ", "first stage for ln s_j|g"} {
		if !strings.Contains(out, want) {
			t.Errorf("estimate output lacks %q:\n%s", want, out)
		}
	}
	var r struct {
		Rho []struct {
			Name  string   `json:"name"`
			Value float64  `json:"value"`
			SE    *float64 `json:"se"`
		} `json:"rho"`
		GMM struct{ J float64 } `json:"gmm"`
	}
	raw, _ := os.ReadFile(res)
	if err := json.Unmarshal(raw, &r); err != nil {
		t.Fatal(err)
	}
	// R: ρ̂ = 0.51828518234871224 (0.014066912074049576), J = 5.5305007765590819.
	if len(r.Rho) != 1 || r.Rho[0].Name != "all" || math.Abs(r.Rho[0].Value-0.51828518234871224) > 1e-10 ||
		r.Rho[0].SE == nil || math.Abs(*r.Rho[0].SE-0.014066912074049576) > 1e-10 || math.Abs(r.GMM.J-5.5305007765590819) > 1e-9 {
		t.Errorf("rho %+v, J %v", r.Rho, r.GMM.J)
	}
	if tex, _ := os.ReadFile(filepath.Join(dir, "t.tex")); !strings.Contains(string(tex), `Nesting parameters ($\rho$)`) {
		t.Errorf("LaTeX table lacks the nesting parameter:\n%s", tex)
	}
	// Product 1's own-price elasticity in market 1 at the estimates: the
	// closed form α p_j (1/(1−ρ) − ρ/(1−ρ) s_{j|g} − s_j) (Verboven 1996) at
	// R's α̂ and ρ̂ and the market-1 prices and shares, all from expected.json.
	if own := nestedOwnElasticity(t); fmt.Sprintf("%.3f", own) != "-5.668" {
		t.Errorf("closed-form own elasticity of product 1 %.6f, want -5.668", own)
	}
	if code, out, errs := runCLI(t, "elasticities", res, "--market", "1"); code != 0 || !strings.Contains(out, "-5.668") {
		t.Errorf("elasticities exit %d: %s%s", code, out, errs)
	}
	mj := filepath.Join(dir, "merger.json")
	code, out, errs = runCLI(t, "merger", res, "--combine", "Copperleaf,Elmstead", "--draws", "100", "--quiet", "--out", mj)
	if code != 0 || !strings.Contains(out, "100 of 100 draws kept") {
		t.Fatalf("merger exit %d: %s%s", code, out, errs)
	}
	html := filepath.Join(dir, "report.html")
	if code, _, errs := runCLI(t, "report", res, "--merger", mj, "--out", html); code != 0 {
		t.Fatalf("report exit %d: %s", code, errs)
	}
	page, _ := os.ReadFile(html)
	for _, want := range []string{"nesting parameters (ρ)", "nested logit with 2 nests", `column &#34;segment&#34;`} {
		if !strings.Contains(string(page), want) {
			t.Errorf("report lacks %q", want)
		}
	}
}

// TestLogNormalAndCorrelatedEndToEnd draws data with "rcdemand synth" from a
// log-normal price sensitivity and from correlated tastes, and runs
// estimate, merger (with draws: a log-normal α is negative for every
// consumer, so no draw is set aside for it) and report on each.
func TestLogNormalAndCorrelatedEndToEnd(t *testing.T) {
	tests := []struct {
		name, demand, truth string
		want                []string // in the estimate output
		json                string   // a key of the results file
	}{
		{"log-normal", `random = ["price"]
price_distribution = "lognormal"`, `[beta]
"1" = 1.0
price = 0.7
x1 = 1.0
[sigma]
price = 0.3`, []string{"location of ln(−α) (log-normal price sensitivity)\n    price ", "price sensitivity: log-normal", "mean α over the sample's agents"}, `"price_sensitivity"`},
		{"correlated", `random = ["1", "x1"]
random_covariance = "full"`, `[beta]
"1" = 1.0
price = -2.0
x1 = 1.0
[cholesky]
"1" = { "1" = 0.6 }
x1 = { "1" = 0.3, x1 = 0.9 }`, []string{"Cholesky factor of the taste covariance (L)", "    x1, 1 ", "taste correlations", "taste standard deviations (σ, from L)\n    1 "}, `"correlations"`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			sim := synthFolder(t, tc.demand, tc.truth)
			res := filepath.Join(sim, "results.json")
			code, out, errs := runCLI(t, "estimate", filepath.Join(sim, "spec.toml"), "--out", res, "--quiet")
			if code != 0 {
				t.Fatalf("estimate exit %d: %s\n%s", code, errs, out)
			}
			for _, want := range tc.want {
				if !strings.Contains(out, want) {
					t.Errorf("estimate output lacks %q:\n%s", want, out)
				}
			}
			if raw, _ := os.ReadFile(res); !strings.Contains(string(raw), tc.json) {
				t.Errorf("results lack %s", tc.json)
			}
			mj := filepath.Join(sim, "merger.json")
			code, out, errs = runCLI(t, "merger", res, "--combine", "F1,F2", "--draws", "100", "--quiet", "--out", mj)
			if code != 0 {
				t.Fatalf("merger exit %d: %s%s", code, out, errs)
			}
			var mr struct {
				Draws struct {
					Used        int `json:"used"`
					FailedAlpha int `json:"failed_nonnegative_alpha"`
				} `json:"draws"`
				Markets []struct {
					FOC float64 `json:"foc_residual_post"`
				} `json:"markets"`
			}
			raw, _ := os.ReadFile(mj)
			if err := json.Unmarshal(raw, &mr); err != nil {
				t.Fatal(err)
			}
			if tc.name == "log-normal" && (mr.Draws.FailedAlpha != 0 || mr.Draws.Used != 100) {
				t.Errorf("draws: %+v", mr.Draws)
			}
			for _, m := range mr.Markets {
				if m.FOC > 1e-9 {
					t.Errorf("post-merger FOC residual %g", m.FOC)
				}
			}
			if code, _, errs := runCLI(t, "report", res, "--merger", mj, "--out", filepath.Join(sim, "report.html")); code != 0 {
				t.Fatalf("report exit %d: %s", code, errs)
			}
		})
	}
}

// synthFolder writes a spec with the given [demand] keys and a truth file
// with the given parameter tables, and draws a data set with "rcdemand
// synth" into a new folder, which it returns.
func synthFolder(t *testing.T, demandKeys, params string) string {
	t.Helper()
	dir := t.TempDir()
	spec := `[data]
products = "products.csv"
[demand]
linear = ["1", "price", "x1"]
` + demandKeys + `
[instruments]
excluded = ["z_cost"]
generate = ["rival-sums", "differentiation-quadratic"]
`
	truth := `markets = 60
products = 8
firms = 3
agents = 60
seed = 5
` + params + `
[characteristics]
x1 = [0.0, 1.0]
[cost]
constant = 0.5
shifters = { z_cost = 0.3 }
[shocks]
xi_sd = 0.3
omega_sd = 0.1
correlation = 0.3
`
	os.WriteFile(filepath.Join(dir, "model.toml"), []byte(spec), 0o644)
	os.WriteFile(filepath.Join(dir, "truth.toml"), []byte(truth), 0o644)
	sim := filepath.Join(dir, "sim")
	if code, _, errs := runCLI(t, "synth", "--spec", filepath.Join(dir, "model.toml"), "--truth", filepath.Join(dir, "truth.toml"), "--out", sim); code != 0 {
		t.Fatalf("synth exit %d: %s", code, errs)
	}
	return sim
}

// nestedOwnElasticity computes, from testdata/nested-logit/expected.json,
// the own-price elasticity of market 1's first product at R's two-step
// GMM estimates of α (price) and ρ (ln_s_jg), by the formula that file
// gives for its elasticities at the truth.
func nestedOwnElasticity(t *testing.T) float64 {
	t.Helper()
	var e struct {
		Names []string  `json:"names"`
		Coef  []float64 `json:"coef"`
		M1    struct {
			Price  []float64 `json:"price"`
			Share  []float64 `json:"share"`
			Within []float64 `json:"share_within_segment"`
		} `json:"elasticities_market1"`
	}
	if err := json.Unmarshal([]byte(readFile(t, "../../testdata/nested-logit/expected.json")), &e); err != nil {
		t.Fatal(err)
	}
	coef := map[string]float64{}
	for k, n := range e.Names {
		coef[n] = e.Coef[k]
	}
	alpha, rho := coef["price"], coef["ln_s_jg"]
	p, s, sg := e.M1.Price[0], e.M1.Share[0], e.M1.Within[0]
	return alpha * p * (1/(1-rho) - rho/(1-rho)*sg - s)
}
