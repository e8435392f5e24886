package merger

import (
	"encoding/json"
	"math"
	"os"
	"strconv"
	"testing"

	"gonum.org/v1/gonum/mat"

	"rcdemand/data"
	"rcdemand/demand"
)

// truthFitted is the synthetic-small model at its true parameters
// (testdata/synthetic-small/truth.json).
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
	f, err := demand.NewFitted(m, []float64{0, -2, 1.5, 1}, []float64{1, 0.4, 2})
	if err != nil {
		t.Fatal(err)
	}
	return f
}

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
			if rel(c.got, c.want) > 1e-6 {
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
			if rel(c.got, c.want) > 1e-6 {
				t.Errorf("market %s %s: %.12g, reference %.12g", m.Market, c.name, c.got, c.want)
			}
		}
		if !m.Converged || m.FOCPost > 1e-10 {
			t.Errorf("market %s: converged %v, FOC residual %g", m.Market, m.Converged, m.FOCPost)
		}
	}
}

// TestPreMergerOwnershipIsAnEquilibrium: with unchanged ownership the solver
// returns the observed prices, and compensating cost changes leave the
// pre-merger prices an equilibrium under the new ownership (common practice:
// both follow from the first-order conditions).
func TestPreMergerOwnershipIsAnEquilibrium(t *testing.T) {
	f := truthFitted(t)
	for _, tm := range []int{0, 7} {
		mk := NewMarket(f, tm)
		owner := []int{0, 0, 1, 1, 2, 2, 3, 3}
		eta, err := mk.Markups(owner)
		if err != nil {
			t.Fatal(err)
		}
		c := make([]float64, mk.J)
		for j := range c {
			c[j] = mk.Price0[j] - eta[j]
		}
		start := make([]float64, mk.J)
		for j := range start {
			start[j] = mk.Price0[j] * 1.2
		}
		sol := mk.Solve(c, owner, start, 1e-12)
		for j := range c {
			if math.Abs(sol.Price[j]-mk.Price0[j]) > 1e-9 {
				t.Errorf("market %d product %d: price %.12g, observed %.12g", tm, j, sol.Price[j], mk.Price0[j])
			}
		}
		post := []int{0, 0, 0, 0, 2, 2, 3, 3}
		mk.SetPrices(mk.Price0)
		etaStar, _ := mk.Markups(post)
		cStar := make([]float64, mk.J)
		for j := range cStar {
			cStar[j] = mk.Price0[j] - etaStar[j]
		}
		sol = mk.Solve(cStar, post, mk.Price0, 1e-12)
		for j := range c {
			if math.Abs(sol.Price[j]-mk.Price0[j]) > 1e-9 {
				t.Errorf("compensating costs, market %d product %d: price %.12g, observed %.12g", tm, j, sol.Price[j], mk.Price0[j])
			}
		}
	}
}

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
	spec, err := demand.ReadSpec(dir + "/m.toml")
	if err != nil {
		t.Fatal(err)
	}
	m, err := demand.Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	alpha := 2.5
	f, err := demand.NewFitted(m, []float64{1, -alpha, 0.5}, nil)
	if err != nil {
		t.Fatal(err)
	}
	for tm, mkt := range m.Products.Markets {
		mk := NewMarket(f, tm)
		for _, single := range []bool{true, false} {
			owner := make([]int, mk.J)
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
				if rel(eta[j], want) > 1e-12 {
					t.Errorf("market %s product %d single=%v: markup %.15g, closed form %.15g", mkt.ID, j, single, eta[j], want)
				}
			}
		}
		// Logit elasticities: own −α p_j (1 − s_j), cross α p_k s_k (Berry 1994).
		E := f.Elasticities(tm)
		for j := 0; j < mk.J; j++ {
			for k := 0; k < mk.J; k++ {
				pk, sk := mk.Price0[k], m.Products.Share[mkt.Start+k]
				want := alpha * pk * sk
				if j == k {
					want = -alpha * pk * (1 - sk)
				}
				if rel(E.At(j, k), want) > 1e-12 {
					t.Errorf("market %s elasticity (%d,%d): %.15g, closed form %.15g", mkt.ID, j, k, E.At(j, k), want)
				}
			}
		}
	}
	_ = mat.Dense{}
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
