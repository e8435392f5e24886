package merger

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sort"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distmv"

	"rcdemand/demand"
)

// Interval is a 2.5/50/97.5 percentile summary over draws.
type Interval struct {
	Lo     float64 `json:"p2_5"`
	Median float64 `json:"p50"`
	Hi     float64 `json:"p97_5"`
}

// ProductDraws is the distribution of one product's price change.
type ProductDraws struct {
	Market         string   `json:"market"`
	Product        string   `json:"product"`
	PriceChangePct Interval `json:"price_change_pct"`
}

// MarketDraws is the distribution of one market's effects.
type MarketDraws struct {
	Market                string   `json:"market"`
	PriceChangePctMerging Interval `json:"price_change_pct_merging"`
	CSChange              Interval `json:"cs_change"`
}

// MinDraws is the fewest draws SimulateDraws accepts and the fewest kept
// draws it builds intervals from: with fewer, the 2.5 and 97.5 percentiles
// rest on the two or three most extreme draws (common practice asks for
// several hundred; 100 is the floor here).
const MinDraws = 100

// Draws carries the parameter-uncertainty intervals.
type Draws struct {
	Requested int     `json:"requested"`
	Used      int     `json:"used"`
	UsedShare float64 `json:"used_share"` // Used / Requested
	Seed      uint64  `json:"seed"`
	Failed    int     `json:"failed"`
	// Why draws failed: an agent's price coefficient ≥ 0, the share
	// inversion failed, or some market had no post-merger equilibrium.
	FailedAlpha       int `json:"failed_nonnegative_alpha"`
	FailedInversion   int `json:"failed_inversion"`
	FailedEquilibrium int `json:"failed_equilibrium"`
	// Intervals is false when fewer than MinDraws draws were kept: Products,
	// Markets and Summary are then empty and Note says why.
	Intervals bool                `json:"intervals"`
	Note      string              `json:"note,omitempty"`
	Products  []ProductDraws      `json:"products"`
	Markets   []MarketDraws       `json:"markets"`
	Summary   map[string]Interval `json:"summary"`
}

// ErrStopped is returned when a run of draws is interrupted.
var ErrStopped = errors.New("interrupted")

// SimulateDraws repeats the scenario for k ≥ MinDraws parameter draws from
// N(θ̂, V̂) (mean and covariance in the order of the results covariance; see
// demand.Results.Estimates). Draws with an agent whose price coefficient is
// ≥ 0, a failed inversion or a market without an equilibrium are set aside
// and counted by reason; the intervals come from the draws kept, and only
// when at least MinDraws were kept (otherwise the counts are returned with
// a note and no intervals). progress, when not nil, is called after each
// draw; closing stop ends the run with ErrStopped. Draws are processed in
// order (each one's markets in parallel), so the intervals do not depend on
// the number of cores.
func SimulateDraws(m *demand.Model, mean []float64, cov [][]float64, sc Scenario, k int, seed uint64,
	progress func(done int), stop <-chan struct{}) (*Draws, error) {
	if k < MinDraws {
		return nil, fmt.Errorf("%d parameter draws are too few for 95%% intervals: ask for at least %d", k, MinDraws)
	}
	norm, err := parameterDistribution(mean, cov, seed)
	if err != nil {
		return nil, err
	}
	d := &Draws{Requested: k, Seed: seed}
	var kept []drawOutcome
	for r := 0; r < k; r++ {
		select {
		case <-stop:
			return nil, ErrStopped
		default:
		}
		beta, theta := m.FromEstimates(norm.Rand(nil))
		for i, p := range m.Params {
			if p.Kind == demand.Sigma {
				theta[i] = math.Abs(theta[i])
			}
			theta[i] = p.Project(theta[i])
		}
		out, ok := d.simulateDraw(m, beta, theta, sc)
		if progress != nil {
			progress(r + 1)
		}
		if ok {
			kept = append(kept, out)
		}
	}
	d.Used = len(kept)
	d.UsedShare = float64(d.Used) / float64(k)
	d.Products, d.Markets, d.Summary = []ProductDraws{}, []MarketDraws{}, map[string]Interval{}
	switch {
	case d.Used < MinDraws:
		need := "more draws"
		if d.Used > 0 {
			need = fmt.Sprintf("about %d draws would keep %d at this rate", int(math.Ceil(float64(MinDraws*k)/float64(d.Used))), MinDraws)
		}
		d.Note = fmt.Sprintf("only %d of %d draws were kept (%.0f%%; see failed_*), fewer than the %d needed for 2.5 and 97.5 percentiles: "+
			"no intervals are reported (%s)", d.Used, k, 100*d.UsedShare, MinDraws, need)
	default:
		if d.Failed > 0 {
			d.Note = fmt.Sprintf("%d of %d draws were kept (%.0f%%; see failed_*); the intervals are conditional on the draws kept", d.Used, k, 100*d.UsedShare)
		}
		d.Intervals = true
		d.summarize(m, kept)
	}
	return d, nil
}

// parameterDistribution returns N(mean, cov) with a seeded source.
func parameterDistribution(mean []float64, cov [][]float64, seed uint64) (*distmv.Normal, error) {
	n := len(mean)
	sym := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			sym.SetSym(i, j, (cov[i][j]+cov[j][i])/2)
		}
	}
	src := rand.New(rand.NewPCG(seed, 0xd4a55))
	norm, ok := distmv.NewNormal(mean, sym, src)
	if !ok {
		return nil, fmt.Errorf("the estimated covariance is not positive definite, so parameters cannot be drawn from it")
	}
	return norm, nil
}

// drawOutcome is what one usable draw contributes.
type drawOutcome struct {
	price   []float64 // per product row, % change
	merging []float64 // per market, share-weighted % change of the merging parties
	cs      []float64 // per market
	summary Summary
}

// simulateDraw runs the scenario at one parameter draw, counting the reason
// when the draw cannot be used.
func (d *Draws) simulateDraw(m *demand.Model, beta, theta []float64, sc Scenario) (drawOutcome, bool) {
	f, err := demand.NewFitted(m, beta, theta)
	var res *Result
	switch {
	case err != nil:
		d.FailedInversion++
	case f.PositiveAlpha() > 0:
		d.FailedAlpha++
	default:
		if res, err = Simulate(f, sc); err != nil {
			d.FailedInversion++
		} else if res.Summary.Unconverged > 0 {
			d.FailedEquilibrium++
		}
	}
	if err != nil || res == nil || res.Summary.Unconverged > 0 {
		d.Failed++
		return drawOutcome{}, false
	}
	out := drawOutcome{summary: res.Summary, price: make([]float64, len(res.Products)),
		merging: make([]float64, len(res.Markets)), cs: make([]float64, len(res.Markets))}
	for i, p := range res.Products {
		out.price[i] = p.PriceChangePct
	}
	for t, mrow := range res.Markets {
		out.cs[t] = mrow.CSChange
		num, den := 0.0, 0.0
		for _, p := range res.Products {
			if p.Market == mrow.Market && p.Merging {
				num += p.SharePre * p.PriceChangePct
				den += p.SharePre
			}
		}
		if den > 0 {
			out.merging[t] = num / den
		}
	}
	return out, true
}

// summarize sets the percentiles of the kept draws.
func (d *Draws) summarize(m *demand.Model, kept []drawOutcome) {
	pick := func(get func(drawOutcome) float64) Interval {
		v := make([]float64, len(kept))
		for i, o := range kept {
			v[i] = get(o)
		}
		return percentiles(v)
	}
	prod := m.Products
	for i := 0; i < prod.Len(); i++ {
		d.Products = append(d.Products, ProductDraws{Market: prod.Market[i], Product: prod.Product[i],
			PriceChangePct: pick(func(o drawOutcome) float64 { return o.price[i] })})
	}
	for t, mk := range prod.Markets {
		d.Markets = append(d.Markets, MarketDraws{Market: mk.ID,
			PriceChangePctMerging: pick(func(o drawOutcome) float64 { return o.merging[t] }),
			CSChange:              pick(func(o drawOutcome) float64 { return o.cs[t] })})
	}
	d.Summary = map[string]Interval{
		"price_change_pct_merging":   pick(func(o drawOutcome) float64 { return o.summary.PriceChangePctMerging }),
		"price_change_pct_rivals":    pick(func(o drawOutcome) float64 { return o.summary.PriceChangePctRivals }),
		"price_change_pct_all":       pick(func(o drawOutcome) float64 { return o.summary.PriceChangePctAll }),
		"cs_change_sum_over_markets": pick(func(o drawOutcome) float64 { return o.summary.CSChangeTotal }),
		"ps_change_sum_over_markets": pick(func(o drawOutcome) float64 { return o.summary.PSChangeTotal }),
	}
}

// percentiles returns the 2.5, 50 and 97.5 percentiles (linear interpolation
// between order statistics, common practice).
func percentiles(x []float64) Interval {
	s := append([]float64(nil), x...)
	sort.Float64s(s)
	q := func(p float64) float64 {
		if len(s) == 1 {
			return s[0]
		}
		h := p * float64(len(s)-1)
		lo := int(math.Floor(h))
		hi := min(lo+1, len(s)-1)
		return s[lo] + (h-float64(lo))*(s[hi]-s[lo])
	}
	return Interval{Lo: q(0.025), Median: q(0.5), Hi: q(0.975)}
}
