package synth

import (
	"fmt"
	"math"
	"strings"
	"testing"
	"time"

	"rcdemand/demand"
)

// familySpec is a synth spec of one model family (extra goes into
// [demand]).
func familySpec(random, extra, generate string) string {
	var tastes []string
	for _, c := range strings.Split(strings.Trim(random, "[]"), ",") {
		if c = strings.Trim(strings.TrimSpace(c), `"`); c != "" {
			tastes = append(tastes, fmt.Sprintf("%s = %q", c, "nu_"+c))
		}
	}
	return `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
random = ` + random + `
` + extra + `
[instruments]
excluded = ["z_cost"]
generate = ` + generate + `
[agents]
tastes = { ` + strings.Join(tastes, ", ") + ` }
`
}

// familyTruth is mcTruth without demographics, with the family's values.
func familyTruth(markets, products, agents int, edit func(*Truth)) *Truth {
	tr := mcTruth(markets, products, agents)
	tr.Pi, tr.Demographics = nil, nil
	tr.Sigma = map[string]float64{}
	edit(tr)
	return tr
}

// TestFamiliesRecoverTruth draws a large data set from each family with
// synth (seeded) and estimates it with the same spec: every parameter is
// within four standard errors of its truth, and the estimate converged.
func TestFamiliesRecoverTruth(t *testing.T) {
	nestSets := `["nest-counts", "nest-sums", "rival-sums"]`
	rcSets := `["nest-counts", "nest-sums", "rival-sums", "differentiation-quadratic"]`
	tests := []struct {
		name string
		spec string
		tr   *Truth
		want map[string]float64 // parameter name (Param.Name, or the column of a linear β) → truth
	}{
		{"nested logit", familySpec(`[]`, `nests = "segment"`, nestSets),
			familyTruth(300, 10, 1, func(tr *Truth) { tr.Nests, tr.Rho = 2, 0.6 }),
			map[string]float64{"price": -2, "x1": 1, "x2": 0.5, "rho[all]": 0.6}},
		{"nested logit, rho by nest", familySpec(`[]`, "nests = \"segment\"\nnesting = \"by-nest\"", nestSets),
			familyTruth(300, 12, 1, func(tr *Truth) {
				tr.Nests, tr.NestNames, tr.Rho = 2, []string{"still", "sparkling"}, map[string]any{"still": 0.3, "sparkling": 0.7}
			}),
			map[string]float64{"price": -2, "x1": 1, "rho[still]": 0.3, "rho[sparkling]": 0.7}},
		{"random-coefficients nested logit", familySpec(`["x1"]`, `nests = "segment"`, rcSets),
			familyTruth(200, 10, 100, func(tr *Truth) { tr.Nests, tr.Rho, tr.Sigma["x1"] = 2, 0.5, 1 }),
			map[string]float64{"price": -2, "x1": 1, "sigma[x1]": 1, "rho[all]": 0.5}},
		{"log-normal price", familySpec(`["price", "x1"]`, `price_distribution = "lognormal"`, `["rival-sums", "differentiation-quadratic"]`),
			familyTruth(200, 10, 100, func(tr *Truth) {
				tr.Beta["price"], tr.Sigma["price"], tr.Sigma["x1"] = math.Log(2), 0.3, 1
			}),
			map[string]float64{"beta[price]": math.Log(2), "sigma[price]": 0.3, "sigma[x1]": 1, "x1": 1}},
		{"correlated tastes", familySpec(`["x1", "x2"]`, `random_covariance = "full"`, `["rival-sums", "differentiation-quadratic"]`),
			familyTruth(200, 10, 100, func(tr *Truth) {
				tr.Cholesky = map[string]map[string]float64{"x1": {"x1": 1}, "x2": {"x1": 0.5, "x2": 0.8}}
			}),
			map[string]float64{"price": -2, "cholesky[x1,x1]": 1, "cholesky[x2,x1]": 0.5, "cholesky[x2,x2]": 0.8}},
		// The diagonal of L from [sigma], [cholesky] only below it (the
		// convention of the spec's start_cholesky).
		{"correlated tastes, diagonal from [sigma]", familySpec(`["x1", "x2"]`, `random_covariance = "full"`, `["rival-sums", "differentiation-quadratic"]`),
			familyTruth(200, 10, 100, func(tr *Truth) {
				tr.Sigma = map[string]float64{"x1": 1, "x2": 0.8}
				tr.Cholesky = map[string]map[string]float64{"x2": {"x1": 0.5}}
			}),
			map[string]float64{"price": -2, "cholesky[x1,x1]": 1, "cholesky[x2,x1]": 0.5, "cholesky[x2,x2]": 0.8}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			began := time.Now()
			m := synthModelOf(t, tc.spec, tc.tr, 11)
			if m.Spec.LogNormalPrice() {
				// The default start of the location is ln(−α̂) of the plain logit.
				if x := m.Start()[0]; math.Abs(x-tc.want["beta[price]"]) > 0.5 {
					t.Errorf("start of the log-normal location %v, truth %v", x, tc.want["beta[price]"])
				}
			}
			res, err := demand.Estimate(m, demand.SettingsOf(m.Spec), demand.Monitor{})
			if err != nil {
				t.Fatal(err)
			}
			if !res.Convergence.Converged {
				t.Errorf("not converged: %s", res.Convergence.Message)
			}
			got := estimatesByName(res)
			for name, truth := range tc.want {
				c, ok := got[name]
				if !ok {
					t.Fatalf("no estimate of %s in %v", name, keys(got))
				}
				z := (c.Value - truth) / c.StdErr()
				t.Logf("%-18s estimate %9.5f (s.e. %.5f), truth %8.5f, %+.2f s.e.", name, c.Value, c.StdErr(), truth, z)
				if !(math.Abs(z) <= 4) {
					t.Errorf("%s: estimate %.5f is %.1f standard errors from the truth %.5f", name, c.Value, z, truth)
				}
			}
			t.Logf("%d rows, %.1f s", m.N(), time.Since(began).Seconds())
		})
	}
}

// estimatesByName indexes the estimates by Param.Name (a linear β by its
// column).
func estimatesByName(res *demand.Results) map[string]demand.Coef {
	out := map[string]demand.Coef{}
	for _, c := range res.Beta {
		if c.Nonlinear {
			out["beta["+c.Name+"]"] = c
		} else {
			out[c.Name] = c
		}
	}
	for _, c := range res.Sigma {
		if len(res.Cholesky) == 0 {
			out["sigma["+c.Name+"]"] = c
		}
	}
	for _, c := range res.Rho {
		out["rho["+c.Name+"]"] = c
	}
	for _, e := range res.Cholesky {
		out[fmt.Sprintf("cholesky[%s,%s]", e.Row, e.Column)] = demand.Coef{Name: e.Row, Value: e.Value, SE: e.SE}
	}
	return out
}

func keys[V any](m map[string]V) []string {
	var out []string
	for k := range m {
		out = append(out, k)
	}
	return out
}

// TestFamilySpecWrittenBack: the spec synth writes beside its data keeps the
// families' keys and starting values (start_rho as a table by nest,
// start_cholesky, start_price_location), so the written spec estimates the
// same model from the same start.
func TestFamilySpecWrittenBack(t *testing.T) {
	spec := familySpec(`["price", "x1"]`, "nests = \"segment\"\nnesting = \"by-nest\"\nprice_distribution = \"lognormal\"\nrandom_covariance = \"full\"",
		`["nest-counts"]`) + `[estimation]
start_rho = { still = 0.25, sparkling = 0.75 }
start_cholesky = { x1 = { price = 0.1 } }
start_price_location = 0.5
start = { price = 0.2, x1 = 0.9 }
`
	tr := familyTruth(4, 6, 20, func(tr *Truth) {
		tr.Nests, tr.NestNames, tr.Rho = 2, []string{"still", "sparkling"}, map[string]any{"still": 0.3, "sparkling": 0.6}
		tr.Beta["price"] = math.Log(2)
		tr.Cholesky = map[string]map[string]float64{"price": {"price": 0.3}, "x1": {"price": 0.2, "x1": 1}}
	})
	m := synthModelOf(t, spec, tr, 3)
	want := map[string]float64{"beta[price]": 0.5, "cholesky[price,price]": 0.2, "cholesky[x1,price]": 0.1,
		"cholesky[x1,x1]": 0.9, "rho[still]": 0.25, "rho[sparkling]": 0.75}
	start := m.Start()
	if len(start) != len(want) {
		t.Fatalf("parameters %v", m.ParamNames())
	}
	for i, name := range m.ParamNames() {
		if start[i] != want[name] {
			t.Errorf("start of %s: %v, want %v", name, start[i], want[name])
		}
	}
	if len(m.Nests) != 2 || m.Nests[0] != "still" {
		t.Errorf("nests %v", m.Nests)
	}
}
