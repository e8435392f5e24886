package study

import (
	"math"
	"path/filepath"
	"testing"

	"rcdemand/demand"
	"rcdemand/merger/synth"
)

// fittedFrom estimates a spec file and returns the results and the fitted
// model at the estimates.
func fittedFrom(t *testing.T, spec *demand.Spec) (*demand.Results, *demand.Fitted) {
	t.Helper()
	m, err := demand.Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	res, err := demand.Estimate(m, demand.SettingsOf(spec), demand.Monitor{})
	if err != nil {
		t.Fatal(err)
	}
	theta, err := m.ThetaOf(res)
	if err != nil {
		t.Fatal(err)
	}
	fit, err := demand.NewFitted(m, res.BetaValues(), theta)
	if err != nil {
		t.Fatal(err)
	}
	return res, fit
}

// synthesized draws a data set from the truth under the spec (seed 4) into
// dir, lets edit change it first when edit is not nil, and returns the spec
// synth writes beside it.
func synthesized(t *testing.T, dir, specText string, tr *synth.Truth, edit func(*synth.Synthetic)) *demand.Spec {
	t.Helper()
	spec, err := demand.ParseSpec(filepath.Join(dir, "in.toml"), []byte(specText))
	if err != nil {
		t.Fatal(err)
	}
	syn, err := synth.Synthesize(spec, tr, 4, nil)
	if err != nil {
		t.Fatal(err)
	}
	if edit != nil {
		edit(syn)
	}
	if err := syn.Write(dir, "csv", spec, tr, 4, nil); err != nil {
		t.Fatal(err)
	}
	out, err := demand.ReadSpec(filepath.Join(dir, "spec.toml"))
	if err != nil {
		t.Fatal(err)
	}
	return out
}

// TestStudyOfFamilies: the trust study runs on a nested logit (with markets
// resampled at scale 2, so the nests follow the rows drawn) and on a
// log-normal price sensitivity with correlated tastes, and lists the
// families' parameters (ρ, the log-normal location, the entries of L) with
// their statistics.
func TestStudyOfFamilies(t *testing.T) {
	nested, err := demand.ReadSpec("../../testdata/nested-logit/spec.toml")
	if err != nil {
		t.Fatal(err)
	}
	const lnSpec = `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1"]
random = ["price", "x1"]
price_distribution = "lognormal"
random_covariance = "full"
[instruments]
excluded = ["z_cost"]
generate = ["rival-sums", "differentiation-quadratic", "differentiation-local"]
[agents]
tastes = { price = "nu_price", x1 = "nu_x1" }
`
	tr := &synth.Truth{Markets: 40, Products: 8, Firms: 4, Agents: 60,
		Beta:            map[string]float64{"1": 0.5, "price": math.Log(2), "x1": 1},
		Cholesky:        map[string]map[string]float64{"price": {"price": 0.2}, "x1": {"price": 0.1, "x1": 0.8}},
		Characteristics: map[string][2]float64{"x1": {0, 1}},
	}
	tr.Cost.Constant = 0.5
	tr.Cost.Shifters = map[string]float64{"z_cost": 0.3}
	tr.Shocks.XiSD, tr.Shocks.OmegaSD, tr.Shocks.Correlation = 0.3, 0.15, 0.5
	lognormal := synthesized(t, t.TempDir(), lnSpec, tr, nil)
	tests := []struct {
		name  string
		spec  *demand.Spec
		scale []int
		want  map[string]bool // kind:name that must be listed
	}{
		{"nested logit", nested, []int{1, 2}, map[string]bool{"rho:all": true, "beta:price": true}},
		{"log-normal, correlated", lognormal, []int{1}, map[string]bool{"beta:price": true, "cholesky:x1,price": true, "cholesky:price,price": true}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			res, fit := fittedFrom(t, tc.spec)
			st, err := Run(res, fit, Options{Replications: 3, Seed: 2, Scales: tc.scale})
			if err != nil {
				t.Fatal(err)
			}
			if st.Failures > 0 {
				t.Errorf("%d replications failed: %v", st.Failures, st.FailedBy)
			}
			seen := map[string]bool{}
			for _, p := range st.Parameters {
				seen[p.Kind+":"+p.Name] = true
				if p.RMSE == nil || math.IsNaN(*p.RMSE) {
					t.Errorf("%s %s: no RMSE", p.Kind, p.Name)
				}
			}
			for k := range tc.want {
				if !seen[k] {
					t.Errorf("the study does not list %s (it lists %v)", k, seen)
				}
			}
			if len(st.Parameters) != len(res.Covariance.Names) {
				t.Errorf("%d parameters for a covariance of %d", len(st.Parameters), len(res.Covariance.Names))
			}
		})
	}
}
