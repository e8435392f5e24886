package synth

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"rcdemand/data"
	"rcdemand/demand"
)

const mcSpec = `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
random = ["price", "x1"]
demographics = ["income"]
interactions = { price = ["income"] }
[instruments]
excluded = ["z_cost"]
generate = ["rival-sums", "differentiation-quadratic"]
[agents]
tastes = { price = "nu_price", x1 = "nu_x1" }
`

func mcTruth(markets, products, agents int) *Truth {
	tr := &Truth{Markets: markets, Products: products, Firms: 4, Agents: agents,
		Beta:            map[string]float64{"1": 0.5, "price": -2, "x1": 1, "x2": 0.5},
		Sigma:           map[string]float64{"price": 0.25, "x1": 1},
		Pi:              map[string]map[string]float64{"price": {"income": 0.2}},
		Characteristics: map[string][2]float64{"x1": {0, 1}, "x2": {0, 1}},
		Demographics:    map[string][2]float64{"income": {0, 1}},
	}
	tr.Cost.Constant = 0.5
	tr.Cost.Shifters = map[string]float64{"z_cost": 0.3}
	tr.Cost.Characteristics = map[string]float64{"x1": 0.1}
	tr.Shocks.XiSD, tr.Shocks.OmegaSD, tr.Shocks.Correlation = 0.3, 0.15, 0.5
	return tr
}

func synthModel(tb testing.TB, tr *Truth, seed uint64) *demand.Model {
	tb.Helper()
	return synthModelOf(tb, mcSpec, tr, seed)
}

// synthModelOf draws a data set from tr under the spec text and loads it.
func synthModelOf(tb testing.TB, specText string, tr *Truth, seed uint64) *demand.Model {
	tb.Helper()
	spec, err := demand.ParseSpec(filepath.Join(tb.TempDir(), "in.toml"), []byte(specText))
	if err != nil {
		tb.Fatal(err)
	}
	syn, err := Synthesize(spec, tr, seed, nil)
	if err != nil {
		tb.Fatal(err)
	}
	if syn.MaxFOC > 1e-10 {
		tb.Fatalf("equilibrium FOC residual %g", syn.MaxFOC)
	}
	dir := tb.TempDir()
	if err := syn.Write(dir, "csv", spec, tr, seed, nil); err != nil {
		tb.Fatal(err)
	}
	s2, err := demand.ReadSpec(filepath.Join(dir, "spec.toml"))
	if err != nil {
		tb.Fatal(err)
	}
	m, err := demand.Load(s2)
	if err != nil {
		tb.Fatal(err)
	}
	return m
}

// TestMonteCarloOnSynth estimates a handful of synth data sets and checks the
// estimates centre on the truth; the coverage of the 95% intervals is logged
// (with five replications it is not asserted).
func TestMonteCarloOnSynth(t *testing.T) {
	tr := mcTruth(30, 8, 100)
	truth := map[string]float64{"price": -2, "x1": 1, "x2": 0.5}
	sum := map[string]float64{}
	covered, total := 0, 0
	const reps = 5
	for seed := uint64(1); seed <= reps; seed++ {
		m := synthModel(t, tr, seed)
		res, err := demand.Estimate(m, demand.SettingsOf(m.Spec), demand.Monitor{})
		if err != nil {
			t.Fatal(err)
		}
		for _, b := range res.Beta {
			if v, ok := truth[b.Name]; ok {
				sum[b.Name] += b.Value / reps
				total++
				if lo, hi, ok := b.Interval(); ok && lo <= v && v <= hi {
					covered++
				}
			}
		}
	}
	for name, v := range truth {
		t.Logf("%s: mean estimate %.4f, truth %.4f", name, sum[name], v)
		if math.Abs(sum[name]-v) > 0.35*math.Abs(v) {
			t.Errorf("%s: mean estimate %.4f over %d data sets is far from the truth %.4f", name, sum[name], reps, v)
		}
	}
	t.Logf("95%% intervals covered the truth in %d of %d cases", covered, total)
}

// BenchmarkEstimateMedium is a whole two-step estimation of 100 markets × 12
// products × 300 agents with one demographic (price × income).
func BenchmarkEstimateMedium(b *testing.B) {
	m := synthModel(b, mcTruth(100, 12, 300), 7)
	b.ReportAllocs()
	b.ResetTimer()
	calls := 0
	for i := 0; i < b.N; i++ {
		res, err := demand.Estimate(m, demand.SettingsOf(m.Spec), demand.Monitor{})
		if err != nil {
			b.Fatal(err)
		}
		if !res.Convergence.Converged {
			b.Logf("not converged: %s", res.Convergence.Message)
		}
		calls += res.Convergence.ObjectiveCalls
	}
	b.ReportMetric(b.Elapsed().Seconds()/float64(b.N), "s/estimation")
	b.ReportMetric(float64(calls)/float64(b.N), "objective-calls/estimate")
}

// TestBoundaryMonteCarlo draws data sets whose true σ_price is 0, so about
// half the estimates should sit on the bound. The objective is smooth in σ
// and the bound is the optimiser's: every replication must converge, and
// σ_price is either on its bound with the gradient pointing out of the
// parameter space, or interior with a vanishing gradient. With |σ| folded
// into the objective, several such replications used to stop with "line
// search failed" at σ = 0.
func TestBoundaryMonteCarlo(t *testing.T) {
	tr := mcTruth(30, 8, 100)
	tr.Sigma["price"] = 0
	tr.Pi, tr.Demographics = nil, nil // the spec has no demographics
	const spec = `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
random = ["price", "x1"]
[instruments]
excluded = ["z_cost"]
generate = ["rival-sums", "differentiation-quadratic"]
[agents]
tastes = { price = "nu_price", x1 = "nu_x1" }
`
	onBound, crossing := 0, 0
	const reps = 12
	for seed := uint64(1); seed <= reps; seed++ {
		m := synthModelOf(t, spec, tr, seed)
		res, err := demand.Estimate(m, demand.SettingsOf(m.Spec), demand.Monitor{})
		if err != nil {
			t.Fatal(err)
		}
		c := res.Convergence
		if !c.Converged {
			t.Errorf("seed %d: not converged: %s", seed, c.Message)
			continue
		}
		sp := res.Sigma[0]
		switch {
		case sp.Value == 0 && slices.Contains(c.OnBound, "sigma[price]"):
			onBound++
		case sp.Value > 0 && !slices.Contains(c.OnBound, "sigma[price]"):
			// An interior σ_price whose interval reaches below 0 is named
			// in a note, and one whose interval does not is not.
			lo, _, ok := sp.Interval()
			noted := slices.ContainsFunc(res.Notes, func(n string) bool {
				return strings.Contains(n, "95% intervals of sigma[price]") && strings.Contains(n, "reach past the bounds")
			})
			if ok && (lo < 0) != noted {
				t.Errorf("seed %d: σ_price interval from %.4f, note %v", seed, lo, noted)
			}
			if lo < 0 {
				crossing++
			}
		default:
			t.Errorf("seed %d: σ_price %v with on_bound %v", seed, sp.Value, c.OnBound)
		}
		t.Logf("seed %d: σ_price %.4f, %d objective calls, status %s", seed, sp.Value, c.ObjectiveCalls, c.Status)
	}
	t.Logf("σ_price on its bound in %d of %d replications, interior with an interval reaching below 0 in %d", onBound, reps, crossing)
	if crossing == 0 {
		t.Error("no interior σ_price with an interval reaching below 0: the note went untested")
	}
}

// supplySpec is mcSpec with a log cost equation.
const supplySpec = mcSpec + `[supply]
cost = ["1", "z_cost", "x1"]
form = "log"
`

// TestSupplyRecoversTruth estimates demand and the log marginal-cost
// equation jointly on a large data set drawn by synth (whose costs are ln c
// = 0.5 + 0.3·z_cost + 0.1·x1 + ω): every parameter must lie within four
// standard errors of its truth.
func TestSupplyRecoversTruth(t *testing.T) {
	tr := mcTruth(200, 10, 200)
	m := synthModelOf(t, supplySpec, tr, 11)
	res, err := demand.Estimate(m, demand.SettingsOf(m.Spec), demand.Monitor{})
	if err != nil {
		t.Fatal(err)
	}
	if !res.Convergence.Converged {
		t.Fatalf("not converged: %s", res.Convergence.Message)
	}
	truth := map[string]float64{"beta 1": 0.5, "beta price": -2, "beta x1": 1, "beta x2": 0.5,
		"sigma price": 0.25, "sigma x1": 1, "pi price": 0.2, "gamma 1": 0.5, "gamma z_cost": 0.3, "gamma x1": 0.1}
	for kind, list := range map[string][]demand.Coef{"beta": res.Beta, "sigma": res.Sigma, "pi": res.Pi, "gamma": res.Gamma} {
		for _, c := range list {
			want := truth[kind+" "+c.Name]
			z := (c.Value - want) / c.StdErr()
			t.Logf("%s %s: %.4f (se %.4f), truth %.4f, z %.2f", kind, c.Name, c.Value, c.StdErr(), want, z)
			if !(math.Abs(z) < 4) {
				t.Errorf("%s %s: %.4f is %.1f standard errors from the truth %.4f", kind, c.Name, c.Value, z, want)
			}
		}
	}
}

// TestSupplyImprovesPrice is a small seeded Monte Carlo: with weak demand
// instruments (BLP sums only, the cost shifter left out of demand), the
// cost moments — whose instruments are the cost columns and the BLP sums of
// the cost shifters, which move the markups — should estimate the price
// coefficient at least as well as demand alone. The two RMSEs are logged;
// only "joint is not worse" is asserted.
func TestSupplyImprovesPrice(t *testing.T) {
	if testing.Short() {
		t.Skip("32 estimations (about ten seconds; slow under the race detector)")
	}
	const base = `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
random = ["price", "x1"]
[instruments]
generate = ["rival-sums"]
[agents]
tastes = { price = "nu_price", x1 = "nu_x1" }
`
	joint := base + "[supply]\ncost = [\"1\", \"z_cost\", \"x1\"]\nform = \"log\"\n"
	tr := mcTruth(40, 8, 100)
	tr.Pi, tr.Demographics = nil, nil // the spec has no demographics
	var se [2]float64
	reps := 16
	for seed := uint64(1); seed <= uint64(reps); seed++ {
		for k, spec := range []string{base, joint} {
			m := synthModelOf(t, spec, tr, seed)
			res, err := demand.Estimate(m, demand.SettingsOf(m.Spec), demand.Monitor{})
			if err != nil {
				t.Fatal(err)
			}
			for _, c := range res.Beta {
				if c.Name == "price" {
					se[k] += (c.Value + 2) * (c.Value + 2) / float64(reps)
				}
			}
		}
	}
	rmseDemand, rmseJoint := math.Sqrt(se[0]), math.Sqrt(se[1])
	t.Logf("RMSE of the price coefficient over %d data sets: demand alone %.4f, with the supply side %.4f", reps, rmseDemand, rmseJoint)
	if rmseJoint > rmseDemand {
		t.Errorf("joint estimation is worse: RMSE %.4f against %.4f", rmseJoint, rmseDemand)
	}
}

// column returns a frame's column by name.
func column[T any](tb testing.TB, f *data.Frame, name string) []T {
	tb.Helper()
	for k, n := range f.Names {
		if n == name {
			return f.Cols[k].([]T)
		}
	}
	tb.Fatalf("no column %q", name)
	return nil
}

// TestMarketsWithoutEquilibrium: with σ_price = 0.6 one agent of market 29
// (seed 1) draws a price coefficient of +0.14, and that market has no
// Bertrand–Nash equilibrium. Without retries the market is left out of
// every table and named with its reason; the other 29 markets are written.
// With retries it is replaced by market 29 of the seed-2 data set, and the
// other markets are unchanged. truth.json records both.
func TestMarketsWithoutEquilibrium(t *testing.T) {
	spec, err := demand.ParseSpec(filepath.Join(t.TempDir(), "in.toml"), []byte(mcSpec))
	if err != nil {
		t.Fatal(err)
	}
	tr := mcTruth(30, 8, 100)
	tr.Sigma["price"] = 0.6
	syn, err := Synthesize(spec, tr, 1, nil)
	if err != nil {
		t.Fatal(err)
	}
	if syn.Markets != 29 || len(syn.Dropped) != 1 || syn.Dropped[0].Market != "29" ||
		!strings.Contains(syn.Dropped[0].Reason, "1 of 100 agents have a price coefficient ≥ 0") || len(syn.Redrawn) != 0 {
		t.Fatalf("markets %d, dropped %+v, redrawn %+v", syn.Markets, syn.Dropped, syn.Redrawn)
	}
	markets := column[string](t, syn.Products, "market")
	agentMarkets := column[string](t, syn.Agents, "market")
	if len(markets) != 29*8 || len(agentMarkets) != 29*100 || len(column[float64](t, syn.Truth, "mc")) != 29*8 {
		t.Fatalf("%d product rows, %d agent rows", len(markets), len(agentMarkets))
	}
	if slices.Contains(markets, "29") || slices.Contains(agentMarkets, "29") {
		t.Error("market 29 is in the tables")
	}
	retried, err := SynthesizeWith(spec, tr, 1, Options{Retries: 3})
	if err != nil {
		t.Fatal(err)
	}
	if retried.Markets != 30 || len(retried.Dropped) != 0 || !slices.Equal(retried.Redrawn, []Redraw{{Market: "29", Seed: 2}}) {
		t.Fatalf("with retries: markets %d, dropped %+v, redrawn %+v", retried.Markets, retried.Dropped, retried.Redrawn)
	}
	p1, p2 := column[float64](t, syn.Products, "price"), column[float64](t, retried.Products, "price")
	if !slices.Equal(p1[:28*8], p2[:28*8]) || !slices.Equal(p1[28*8:], p2[29*8:]) {
		t.Error("the redraw changed markets other than 29")
	}
	dir := t.TempDir()
	if err := syn.Write(dir, "csv", spec, tr, 1, nil); err != nil {
		t.Fatal(err)
	}
	raw, _ := os.ReadFile(filepath.Join(dir, "truth.json"))
	var rec struct {
		Written int `json:"markets_written"`
		Dropped []struct {
			Market string  `json:"market"`
			FOC    float64 `json:"foc_residual"`
			Reason string  `json:"reason"`
		} `json:"dropped_markets"`
	}
	if err := json.Unmarshal(raw, &rec); err != nil || rec.Written != 29 || len(rec.Dropped) != 1 || rec.Dropped[0].Market != "29" || !(rec.Dropped[0].FOC > 0) {
		t.Errorf("truth.json: %v %+v", err, rec)
	}
}
