package merger

import (
	"encoding/json"
	"fmt"
	"math"
	"os"
	"strconv"
	"strings"
	"testing"

	"rcdemand/data"
	"rcdemand/demand"
)

// truthFitted is the synthetic-small model at its true parameters, read
// from testdata/synthetic-small/truth.json (the reference program's names:
// "const" is rcdemand's "1").
func truthFitted(t *testing.T) *demand.Fitted {
	t.Helper()
	spec, err := demand.ReadSpec("../testdata/synthetic-small/spec.toml")
	if err != nil {
		t.Fatal(err)
	}
	m, err := demand.Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	raw, err := os.ReadFile("../testdata/synthetic-small/truth.json")
	if err != nil {
		t.Fatal(err)
	}
	var truth struct{ Beta, Sigma map[string]float64 }
	if err := json.Unmarshal(raw, &truth); err != nil {
		t.Fatal(err)
	}
	ref := func(c string) string {
		if c == "1" {
			return "const"
		}
		return c
	}
	var beta, theta []float64
	for _, c := range m.X1Names {
		beta = append(beta, truth.Beta[ref(c)])
	}
	for _, p := range m.Params {
		theta = append(theta, truth.Sigma[ref(p.Column)])
	}
	f, err := demand.NewFitted(m, beta, theta)
	if err != nil {
		t.Fatal(err)
	}
	return f
}

// mergerTol is the relative agreement held with the reference merger
// simulation (set at the measured agreement; see TestMergerReference).
const mergerTol = 1e-12 // measured: 8e-14 at most (cs_change, a difference), 1e-14 elsewhere

func rel(got, want float64) float64 {
	return math.Abs(got-want) / math.Max(math.Abs(want), 1e-300)
}

// TestMergerReference compares recovered costs, post-merger prices and
// shares, HHI and consumer-surplus changes with the merger simulation of an
// independent numpy/scipy program (testdata/synthetic-small/merger_reference.csv
// and .json; firms 1 and 2 merge, the merged firm keeps id 1).
func TestMergerReference(t *testing.T) {
	f := truthFitted(t)
	res, err := Simulate(f, Scenario{Combine: []string{"1", "2"}})
	if err != nil {
		t.Fatal(err)
	}
	tab, err := data.ReadTable("../testdata/synthetic-small/merger_reference.csv")
	if err != nil {
		t.Fatal(err)
	}
	cols := map[string][]float64{}
	for _, c := range []string{"price_pre", "price_post", "share_pre", "share_post", "mc"} {
		cols[c], _ = tab.Floats(c)
	}
	mkt, _ := tab.Strings("market")
	prod, _ := tab.Strings("product")
	worst := map[string]float64{}
	defer func() { t.Logf("largest relative differences: %v", worst) }()
	if len(res.Products) != tab.Len() {
		t.Fatalf("%d rows, reference %d", len(res.Products), tab.Len())
	}
	for i, r := range res.Products {
		if r.Market != mkt[i] || r.Product != prod[i] {
			t.Fatalf("row %d: %s/%s vs reference %s/%s", i, r.Market, r.Product, mkt[i], prod[i])
		}
		for _, c := range []struct {
			name      string
			got, want float64
		}{{"cost", r.Cost, cols["mc"][i]}, {"price_post", r.PricePost, cols["price_post"][i]},
			{"share_pre", r.SharePre, cols["share_pre"][i]}, {"share_post", r.SharePost, cols["share_post"][i]}} {
			worst[c.name] = math.Max(worst[c.name], rel(c.got, c.want))
			if rel(c.got, c.want) > mergerTol {
				t.Errorf("market %s product %s %s: %.12g, reference %.12g", r.Market, r.Product, c.name, c.got, c.want)
			}
		}
	}
	raw, err := os.ReadFile("../testdata/synthetic-small/merger_reference.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Markets []struct {
			Market   int     `json:"market"`
			HHIPre   float64 `json:"hhi_pre"`
			HHIPost  float64 `json:"hhi_post"`
			DeltaHHI float64 `json:"delta_hhi"`
			CSChange float64 `json:"cs_change"`
			CSPre    float64 `json:"cs_pre"`
		} `json:"markets"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	for i, rm := range ref.Markets {
		m := res.Markets[i]
		if m.Market != strconv.Itoa(rm.Market) {
			t.Fatalf("market order: %s vs %d", m.Market, rm.Market)
		}
		for _, c := range []struct {
			name      string
			got, want float64
		}{{"hhi_pre", m.HHIPre, rm.HHIPre}, {"hhi_post", m.HHIPost, rm.HHIPost}, {"delta_hhi", m.DeltaHHI, rm.DeltaHHI},
			{"cs_pre", m.CSPre, rm.CSPre}, {"cs_change", m.CSChange, rm.CSChange}} {
			worst[c.name] = math.Max(worst[c.name], rel(c.got, c.want))
			if rel(c.got, c.want) > mergerTol {
				t.Errorf("market %s %s: %.12g, reference %.12g", m.Market, c.name, c.got, c.want)
			}
		}
		if !m.Converged || m.FOCPost > 1e-10 {
			t.Errorf("market %s: converged %v, FOC residual %g", m.Market, m.Converged, m.FOCPost)
		}
	}
	if len(res.FailedMarkets) != 0 {
		t.Errorf("failed markets: %+v", res.FailedMarkets)
	}
}

// TestPreMergerOwnershipIsAnEquilibrium: with unchanged ownership the solver
// returns the observed prices, and compensating cost changes leave the
// pre-merger prices an equilibrium under the new ownership (common practice:
// both follow from the first-order conditions).
func TestPreMergerOwnershipIsAnEquilibrium(t *testing.T) {
	f := truthFitted(t)
	mk := f.Pricing().NewMarket()
	for _, tm := range []int{0, 7} {
		mk.Bind(tm)
		p0 := mk.Price0()
		J := mk.Len()
		owner := []int{0, 0, 1, 1, 2, 2, 3, 3}
		eta, err := mk.Markups(owner)
		if err != nil {
			t.Fatal(err)
		}
		c := make([]float64, J)
		for j := range c {
			c[j] = p0[j] - eta[j]
		}
		start := make([]float64, J)
		for j := range start {
			start[j] = p0[j] * 1.2
		}
		sol := Equilibrium(mk, c, owner, start, 1e-12)
		for j := range c {
			if math.Abs(sol.Price[j]-p0[j]) > 1e-9 {
				t.Errorf("market %d product %d: price %.12g, observed %.12g", tm, j, sol.Price[j], p0[j])
			}
		}
		post := []int{0, 0, 0, 0, 2, 2, 3, 3}
		mk.SetPrices(p0)
		etaStar, _ := mk.Markups(post)
		cStar := make([]float64, J)
		for j := range cStar {
			cStar[j] = p0[j] - etaStar[j]
		}
		sol = Equilibrium(mk, cStar, post, p0, 1e-12)
		for j := range c {
			if math.Abs(sol.Price[j]-p0[j]) > 1e-9 {
				t.Errorf("compensating costs, market %d product %d: price %.12g, observed %.12g", tm, j, sol.Price[j], p0[j])
			}
		}
	}
}

// TestHHIHandWorked: four firms of 30, 30, 20, 20 percent give HHI 2,600;
// merging the two 20s raises it by 2·20·20 = 800 (worked by hand), which the
// 2023 US Merger Guidelines presume anticompetitive (HHI 3,400 > 1,800 and
// ΔHHI 800 > 100).
func TestHHIHandWorked(t *testing.T) {
	s := []float64{0.15, 0.15, 0.10, 0.10} // inside shares sum to 0.5: HHI uses inside shares
	pre := HHI(s, []int{0, 1, 2, 3})
	post := HHI(s, []int{0, 1, 2, 2})
	if math.Abs(pre-2600) > 1e-9 || math.Abs(post-pre-800) > 1e-9 {
		t.Fatalf("HHI %v → %v", pre, post)
	}
	if !Presumed(post, post-pre, 40) || Presumed(1700, 90, 29) || !Presumed(1500, 150, 31) || Presumed(1900, 100, 50) {
		t.Fatal("Guidelines presumption thresholds")
	}
}

// TestSimulateContinuesPastAFailedMarket: in market "2" of the
// synthetic-small model ten of the 200 agents are given a price
// coefficient of +2 (ν_price = 10 with σ_price = 0.4 and β_price = −2), and
// that market has no post-merger equilibrium. The simulation still runs
// every market: market "2" is listed in failed_markets with its residual
// and reason, its rows stay in the output marked not converged, the
// summary leaves it out, and a warning names it.
func TestSimulateContinuesPastAFailedMarket(t *testing.T) {
	f := truthFitted(t)
	m := f.Model
	for _, q := range m.Problem.Params {
		if q.Col == m.Problem.PriceCol {
			a := m.Problem.Agents[2]
			for i := a.Start; i < a.Start+10; i++ {
				m.Problem.Vars[q.Var][i] = 10
			}
		}
	}
	f, err := demand.NewFitted(m, f.Beta, f.Theta)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Simulate(f, Scenario{Combine: []string{"1", "2"}})
	if err != nil {
		t.Fatal(err)
	}
	if len(res.FailedMarkets) != 1 || res.Summary.Unconverged != 1 {
		t.Fatalf("failed markets %+v, summary count %d", res.FailedMarkets, res.Summary.Unconverged)
	}
	fm := res.FailedMarkets[0]
	if fm.Market != "2" || !(fm.Residual > 1e-6) || !strings.Contains(fm.Reason, "10 of 200 agents have a price coefficient ≥ 0") {
		t.Errorf("failed market %+v", fm)
	}
	if len(res.Markets) != 40 || len(res.Products) != 320 {
		t.Fatalf("%d market rows and %d product rows, want 40 and 320", len(res.Markets), len(res.Products))
	}
	cs, n := 0.0, 0.0
	for _, mr := range res.Markets {
		if mr.Converged != (mr.Market != "2") {
			t.Errorf("market %s: converged %v", mr.Market, mr.Converged)
		}
		if mr.Converged {
			cs += mr.CSChange
			n++
		}
	}
	for _, p := range res.Products {
		if p.Converged != (p.Market != "2") {
			t.Errorf("market %s product %s: converged %v", p.Market, p.Product, p.Converged)
		}
	}
	if got := res.Summary.CSChangePerConsumerMean; math.Abs(got-cs/n) > 1e-15 {
		t.Errorf("summary CS change per consumer %v, mean over the converged markets %v", got, cs/n)
	}
	warned := false
	for _, w := range res.Warnings {
		warned = warned || strings.Contains(w, `market "2"`) && strings.Contains(w, "left out of the summary")
	}
	if !warned {
		t.Errorf("no warning names market 2: %q", res.Warnings)
	}
}

// TestFailedMarketsLeftOut: the summaries by product and by market leave
// out the rows of a market without a post-merger equilibrium, which used
// to leak into the product table's mean and range and the market table.
func TestFailedMarketsLeftOut(t *testing.T) {
	r := &Result{
		Products: []ProductRow{
			{Market: "1", Product: "a", Merging: true, SharePre: 0.2, PricePre: 1, PriceChangePct: 2, Converged: true},
			{Market: "2", Product: "a", Merging: true, SharePre: 0.2, PricePre: 1, PriceChangePct: 40, Converged: false},
		},
		Markets: []MarketRow{{Market: "1", Converged: true}, {Market: "2", Converged: false}},
	}
	e := ProductEffects(r)
	if len(e) != 1 || e[0].Markets != 1 || e[0].PriceChangePct != 2 || e[0].MaxChangePct != 2 {
		t.Errorf("product effects %+v", e)
	}
	ch := MarketPriceChanges(r)
	if ch[0] != 2 || !math.IsNaN(ch[1]) {
		t.Errorf("market price changes %v", ch)
	}
	if n := EquilibriumMarkets(r); n != 1 {
		t.Errorf("%d markets with an equilibrium", n)
	}
	if top := TopIndices(2, len(r.Markets), func(t int) float64 { return ch[t] }); top[0] != 0 {
		t.Errorf("top markets %v: the NaN market sorts first", top)
	}
}

// TestCheckShards: the shards of one run, each once, pass; a file that is
// no shard, another run's shard, an index out of range, a shard twice and
// a missing shard are named in the error.
func TestCheckShards(t *testing.T) {
	files := []string{"a.json", "b.json", "c.json"}
	sh := func(i, n int) *DrawShard { return &DrawShard{Index: i, Count: n} }
	for _, tc := range []struct {
		name  string
		parts []*DrawShard
		other int // index of the file of another run, or −1
		want  string
	}{
		{"complete", []*DrawShard{sh(2, 3), sh(0, 3), sh(1, 3)}, -1, ""},
		{"first no shard", []*DrawShard{nil, sh(0, 3), sh(1, 3)}, -1, "a.json: no shard here"},
		{"later no shard", []*DrawShard{sh(0, 3), nil, sh(1, 3)}, -1, "b.json: no shard here"},
		{"another run", []*DrawShard{sh(0, 3), sh(1, 3), sh(2, 3)}, 2, "c.json: another run"},
		{"index out of range", []*DrawShard{sh(0, 3), sh(3, 3), sh(1, 3)}, -1, "b.json: shard index 3 outside 0..2"},
		{"twice", []*DrawShard{sh(0, 3), sh(1, 3), sh(1, 3)}, -1, "shard 1/3 appears twice: b.json and c.json"},
		{"missing", []*DrawShard{sh(0, 3), sh(2, 3)}, -1, "shard 1/3 is missing"},
		{"none", nil, -1, "no shard files given"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			err := CheckShards(tc.parts, files, "no shard here", func(i int) error {
				if i == tc.other {
					return fmt.Errorf("%s: another run", files[i])
				}
				return nil
			})
			switch {
			case tc.want == "" && err != nil:
				t.Errorf("error %v", err)
			case tc.want != "" && (err == nil || err.Error() != tc.want):
				t.Errorf("error %v, want %q", err, tc.want)
			}
		})
	}
}
