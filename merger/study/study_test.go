package study

import (
	"math"
	"slices"
	"strings"
	"testing"

	"rcdemand/demand"
	"rcdemand/merger/synth"
)

// coverageSpec and coverageTruth are the known model of the studies here.
const coverageSpec = `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
random = ["price", "x1"]
[instruments]
excluded = ["z_cost"]
generate = ["rival-sums"]
[agents]
tastes = { price = "nu_price", x1 = "nu_x1" }
`

func coverageTruth() *synth.Truth {
	tr := &synth.Truth{Markets: 40, Products: 8, Firms: 4, Agents: 80,
		Beta:            map[string]float64{"1": 0.5, "price": -2, "x1": 1, "x2": 0.5},
		Sigma:           map[string]float64{"price": 0.2, "x1": 1},
		Characteristics: map[string][2]float64{"x1": {0, 1}, "x2": {0, 1}},
	}
	tr.Cost.Constant = 0.5
	tr.Cost.Shifters = map[string]float64{"z_cost": 0.3}
	tr.Shocks.XiSD, tr.Shocks.OmegaSD, tr.Shocks.Correlation = 0.3, 0.15, 0.5
	return tr
}

// TestCoverageOnKnownModel draws a data set from a known random-coefficients
// model with synth, estimates it, and runs a study of 30 replications at the
// estimates. The 95% intervals of the well-identified parameters (the β of
// the characteristics and σ_x1) must cover the study's truth in 85–100% of
// replications: with 30 replications a correct 95% coverage falls below
// 85% with probability under 2% (binomial; common practice).
func TestCoverageOnKnownModel(t *testing.T) {
	res, fit := fittedFrom(t, synthesized(t, t.TempDir(), coverageSpec, coverageTruth(), nil))
	st, err := Run(res, fit, Options{Replications: 30, Seed: 9})
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range st.Verdicts {
		t.Log(v)
	}
	if st.Failures > 3 {
		t.Errorf("%d of 30 replications failed: %v", st.Failures, st.FailedBy)
	}
	for _, p := range st.Parameters {
		t.Logf("%s %s: truth %.4f bias %.4f rmse %.4f sd %.4f median se %.4f coverage %.2f", p.Kind, p.Name, p.Truth, *p.Bias, *p.RMSE, *p.SD, *p.MedianSE, *p.Coverage95)
		wellIdentified := (p.Kind == "beta" && p.Name != "1" && p.Name != "price") || (p.Kind == "sigma" && p.Name == "x1")
		if wellIdentified && !(*p.Coverage95 >= 0.85) {
			t.Errorf("%s %s: coverage %.2f", p.Kind, p.Name, *p.Coverage95)
		}
		if math.IsNaN(*p.RMSE) {
			t.Errorf("%s %s: RMSE NaN", p.Kind, p.Name)
		}
	}
}

// TestMarketWithoutEquilibriumIsLeftOut: in the user's data, ten of the 80
// agents of market "3" have a price taste draw of 20, so at the estimates
// (σ_price about 0.2, β_price about −2) their price coefficient is about +2
// and market 3 has no Bertrand–Nash equilibrium in the simulated data sets.
// Each replication leaves market 3 out and is estimated on the other 39
// markets instead of failing; the study counts the markets left out and
// says so.
func TestMarketWithoutEquilibriumIsLeftOut(t *testing.T) {
	// Ten agents of market "3" get a price taste draw of 20.
	spec := synthesized(t, t.TempDir(), coverageSpec, coverageTruth(), func(syn *synth.Synthetic) {
		nu := syn.Agents.Cols[slices.Index(syn.Agents.Names, "nu_price")].([]float64)
		ids := syn.Agents.Cols[slices.Index(syn.Agents.Names, "market")].([]string)
		first := slices.Index(ids, "3")
		for i := first; i < first+10; i++ {
			nu[i] = 20
		}
	})
	res, fit := fittedFrom(t, spec)
	st, err := Run(res, fit, Options{Replications: 3, Seed: 9})
	if err != nil {
		t.Fatal(err)
	}
	for _, v := range st.Verdicts {
		t.Log(v)
	}
	for _, r := range st.Runs {
		if strings.HasPrefix(r.Failure, "equilibrium") || !slices.Equal(r.WithoutEquilibrium, []string{"3"}) {
			t.Errorf("replication %d: failure %q, markets left out %v", r.Index, r.Failure, r.WithoutEquilibrium)
		}
	}
	if st.WithoutEquilibrium != 3 || st.ReplicationsWithout != 3 || !slices.ContainsFunc(st.Verdicts, func(v string) bool {
		return strings.Contains(v, "3 drawn markets in 3 replications had no Bertrand–Nash equilibrium")
	}) {
		t.Errorf("study: %d markets left out in %d replications; verdicts %q", st.WithoutEquilibrium, st.ReplicationsWithout, st.Verdicts)
	}
}

// TestVerdictsAllowForMonteCarloError: one outlying replication inflates
// the standard deviation of the estimates but not their robust spread, so
// standard errors that match the bulk of the replications draw no verdict;
// a clear understatement still does.
func TestVerdictsAllowForMonteCarloError(t *testing.T) {
	runs := func(outlier float64) []Replication {
		var out []Replication
		for r := 0; r < 40; r++ {
			z := float64(r%8)/3.5 - 1 // a spread of about 0.7, symmetric around 0
			x := 1 + 0.1*z
			if r == 0 {
				x = outlier
			}
			se := 0.07
			out = append(out, Replication{Index: r, Scale: 1, Converged: true, Estimates: []float64{x}, SE: []*float64{&se}})
		}
		return out
	}
	kinds := []paramKind{{Kind: "sigma", Name: "x"}}
	for _, tc := range []struct {
		outlier float64
		se      float64
		want    bool
	}{{1.0, 0.07, false}, {4.0, 0.07, false}, {1.0, 0.02, true}} {
		rs := runs(tc.outlier)
		for i := range rs {
			se := tc.se
			rs[i].SE = []*float64{&se}
		}
		sc := summarizeScale(rs, []float64{1}, kinds)
		v := parameterVerdicts(sc.Parameters[0], 40)
		got := false
		for _, s := range v {
			if strings.Contains(s, "understate") {
				got = true
			}
		}
		if got != tc.want {
			t.Errorf("outlier %v, se %v: verdicts %q", tc.outlier, tc.se, v)
		}
	}
}

// TestParameterNamesWithoutCovariance: results without a covariance have
// their parameters named from the estimates; two interactions of price with
// different demographics keep distinct names (before, both were
// "pi[price]", so the study could not tell them apart).
func TestParameterNamesWithoutCovariance(t *testing.T) {
	res := &demand.Results{
		Beta:  []demand.Coef{{Name: "1"}, {Name: "price"}},
		Sigma: []demand.Coef{{Name: "price"}},
		Pi:    []demand.Coef{{Name: "price", Demographic: "income"}, {Name: "price", Demographic: "age"}},
	}
	kinds, names := parameters(res)
	want := []string{"beta[1]", "beta[price]", "sigma[price]", "pi[price×income]", "pi[price×age]"}
	if !slices.Equal(names, want) || len(kinds) != len(want) {
		t.Errorf("names %q, want %q", names, want)
	}
	// The same text as demand's own names, which a covariance carries.
	if p := (demand.Param{Kind: demand.Pi, Column: "price", Demographic: "age"}); names[4] != p.Name() {
		t.Errorf("%q, demand names it %q", names[4], p.Name())
	}
	res.Covariance.Names = []string{"a", "b", "c", "d", "e"}
	if _, names := parameters(res); !slices.Equal(names, res.Covariance.Names) {
		t.Errorf("with a covariance: %q", names)
	}
}

// TestVerdictsStateTheirAllowance: with 4 replications the checks allow for
// their Monte Carlo error, and the verdicts say how much (82% for standard
// errors, 2/√(2·3)) rather than the 20% of many replications; a change of
// RMSE·√N across scales within the Monte Carlo error of so few replications
// (±100% at 4 and 4) is "too few to tell", not weak identification, while
// with 400 a doubling is a verdict.
func TestVerdictsStateTheirAllowance(t *testing.T) {
	f := func(x float64) *float64 { return &x }
	stats := func(n int) ParameterStats {
		return ParameterStats{Kind: "sigma", Name: "price", Truth: 1, Mean: f(1), Bias: f(0), SD: f(0.1), SDRobust: f(0.1),
			MedianSE: f(0.1), Coverage95: f(0.95), Used: n}
	}
	study := func(n int, rmse2 float64) *Study {
		return &Study{Scales: []Scale{
			{Markets: 50, Replications: n, Parameters: []ParameterStats{stats(n)}, RMSESqrtN: []*float64{f(1)}},
			{Markets: 100, Replications: n, Parameters: []ParameterStats{stats(n)}, RMSESqrtN: []*float64{f(rmse2)}},
		}}
	}
	has := func(v []string, s string) bool {
		return slices.ContainsFunc(v, func(x string) bool { return strings.Contains(x, s) })
	}
	few := verdicts(study(4, 1.9))
	if !has(few, "too few replications to tell how the RMSE of σ[price] scales") || has(few, "identify it weakly") {
		t.Errorf("4 replications, RMSE·√N ×1.9: %q", few)
	}
	one := func(n int) *Study { st := study(n, 1); st.Scales = st.Scales[:1]; return st }
	quiet := verdicts(one(4))
	if !has(quiet, "within 82%") || !has(quiet, "these checks allow for their Monte Carlo error and are weak") {
		t.Errorf("4 replications, no signs: %q", quiet)
	}
	many := verdicts(study(400, 2.02))
	if !has(many, "falls more slowly than 1/√N from 50 to 100 markets (RMSE·√N changes by +102%") {
		t.Errorf("400 replications, RMSE·√N ×2.02: %q", many)
	}
	if v := verdicts(study(400, 1.1)); !has(v, "falls like 1/√N") {
		t.Errorf("400 replications, RMSE·√N ×1.1: %q", v)
	}
	if v := verdicts(one(400)); !has(v, "within 20%") || has(v, "are weak") {
		t.Errorf("400 replications, no signs: %q", v)
	}
}
