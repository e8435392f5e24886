package merger

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"strings"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distmv"

	"rcdemand/contraction"
	"rcdemand/demand"
)

// Schema identifies the merger output format.
const Schema = "rcdemand.merger.v1"

// Caution accompanies every merger and screening output.
const Caution = "These are model-based estimates for economic analysis, not legal conclusions. " +
	"They depend on the demand model, the data and the assumptions made; the applicable merger guidelines, " +
	"the competent authority and qualified counsel decide."

// Scenario is a change of ownership and, optionally, of the merging parties'
// marginal costs.
type Scenario struct {
	Combine    []string // firms that merge
	Into       string   // the merged firm's name (default: Combine[0])
	CostChange float64  // proportional change of the merging parties' costs, e.g. −0.05
	Tolerance  float64  // on max|Δp|, default 1e-12
}

// ProductRow is one product's pre- and post-merger figures.
type ProductRow struct {
	Market            string  `json:"market"`
	Product           string  `json:"product"`
	FirmPre           string  `json:"firm_pre"`
	FirmPost          string  `json:"firm_post"`
	Merging           bool    `json:"merging"`
	PricePre          float64 `json:"price_pre"`
	PricePost         float64 `json:"price_post"`
	PriceChangePct    float64 `json:"price_change_pct"`
	SharePre          float64 `json:"share_pre"`
	SharePost         float64 `json:"share_post"`
	Cost              float64 `json:"cost"`
	CostPost          float64 `json:"cost_post"`
	MarginPre         float64 `json:"margin_pre"`
	MarginPost        float64 `json:"margin_post"`
	LernerPre         float64 `json:"lerner_pre"`
	LernerPost        float64 `json:"lerner_post"`
	ProfitPre         float64 `json:"profit_pre"`
	ProfitPost        float64 `json:"profit_post"`
	CompensatingCost  float64 `json:"compensating_cost_change"`
	CompensatingShare float64 `json:"compensating_cost_change_pct"`
}

// MarketRow is one market's effects.
type MarketRow struct {
	Market        string  `json:"market"`
	HHIPre        float64 `json:"hhi_pre"`
	HHIPost       float64 `json:"hhi_post"`
	DeltaHHI      float64 `json:"delta_hhi"` // hhi_post − hhi_pre, hhi_post at post-merger equilibrium shares
	HHIPostFixed  float64 `json:"hhi_post_at_pre_shares"`
	DeltaHHIFixed float64 `json:"delta_hhi_at_pre_shares"` // the Guidelines' ΔHHI: pre-merger shares combined
	MergedShare   float64 `json:"merged_share_pct"`
	Presumption   bool    `json:"guidelines_presumption"`
	CSPre         float64 `json:"cs_pre"`
	CSPost        float64 `json:"cs_post"`
	CSChange      float64 `json:"cs_change"`
	PSChange      float64 `json:"ps_change"`
	Iterations    int     `json:"equilibrium_iterations"`
	Method        string  `json:"equilibrium_method"`
	Converged     bool    `json:"converged"`
	FOCPre        float64 `json:"foc_residual_pre"`
	FOCPost       float64 `json:"foc_residual_post"`
}

// Summary aggregates over markets; price changes are weighted by
// pre-merger shares.
type Summary struct {
	PriceChangePctMerging float64 `json:"price_change_pct_merging"`
	PriceChangePctRivals  float64 `json:"price_change_pct_rivals"`
	PriceChangePctAll     float64 `json:"price_change_pct_all"`
	PriceChangeMerging    float64 `json:"price_change_merging"`
	PriceChangeAll        float64 `json:"price_change_all"`
	MeanHHIPre            float64 `json:"mean_hhi_pre"`
	MeanHHIPost           float64 `json:"mean_hhi_post"`
	MeanDeltaHHI          float64 `json:"mean_delta_hhi"`
	CSChangeTotal         float64 `json:"cs_change_sum_over_markets"`
	PSChangeTotal         float64 `json:"ps_change_sum_over_markets"`
	MarketsPresumed       int     `json:"markets_with_guidelines_presumption"`
	Unconverged           int     `json:"markets_not_converged"`
}

// Result is the merger output, written as rcdemand.merger.v1.
type Result struct {
	Schema      string       `json:"schema"`
	ResultsFile string       `json:"results_file"`
	Combine     []string     `json:"combine"`
	Into        string       `json:"into"`
	CostChange  float64      `json:"cost_change"`
	Caution     string       `json:"caution"`
	Warnings    []string     `json:"warnings,omitempty"`
	Products    []ProductRow `json:"products"`
	Markets     []MarketRow  `json:"markets"`
	Summary     Summary      `json:"summary"`
	Draws       *Draws       `json:"draws,omitempty"`
}

// Owners maps firm names to indices (in order of first appearance) before
// and after the scenario, and marks the merging parties' products.
func Owners(firms []string, sc Scenario) (pre, post []int, merging []bool, names []string, err error) {
	idx := map[string]int{}
	for _, f := range firms {
		if _, ok := idx[f]; !ok {
			idx[f] = len(names)
			names = append(names, f)
		}
	}
	if len(sc.Combine) < 2 {
		return nil, nil, nil, nil, fmt.Errorf("--combine needs at least two firms, got %d", len(sc.Combine))
	}
	into := sc.Into
	if into == "" {
		into = sc.Combine[0]
	}
	set := map[string]bool{}
	for _, c := range sc.Combine {
		if _, ok := idx[c]; !ok {
			return nil, nil, nil, nil, fmt.Errorf("firm %q is not in the firm column (firms are: %s)", c, strings.Join(firstN(names, 12), ", "))
		}
		set[c] = true
	}
	if !set[into] {
		return nil, nil, nil, nil, fmt.Errorf("--into %q is not one of the merging firms", into)
	}
	pre = make([]int, len(firms))
	post = make([]int, len(firms))
	merging = make([]bool, len(firms))
	for i, f := range firms {
		pre[i] = idx[f]
		post[i] = idx[f]
		if set[f] {
			post[i] = idx[into]
			merging[i] = true
		}
	}
	return pre, post, merging, names, nil
}

func firstN(xs []string, n int) []string {
	if len(xs) > n {
		return append(xs[:n:n], "…")
	}
	return xs
}

// localOwners renumbers owners of a market to 0..F−1.
func localOwners(o []int) []int {
	m := map[int]int{}
	out := make([]int, len(o))
	for j, v := range o {
		k, ok := m[v]
		if !ok {
			k = len(m)
			m[v] = k
		}
		out[j] = k
	}
	return out
}

// marketOutcome is what one market's simulation yields.
type marketOutcome struct {
	rows []ProductRow
	mkt  MarketRow
	err  error
	warn []string
}

// Simulate runs the scenario on every market of a fitted model.
func Simulate(f *demand.Fitted, sc Scenario) (*Result, error) {
	prod := f.Model.Products
	if prod.Firm == nil {
		return nil, fmt.Errorf("%s: the products table has no firm column %q: ownership is needed for the supply side", prod.File, prod.Cols.Firm)
	}
	pre, post, merging, names, err := Owners(prod.Firm, sc)
	if err != nil {
		return nil, fmt.Errorf("%s: column %q: %v", prod.File, prod.Cols.Firm, err)
	}
	if sc.Tolerance == 0 {
		sc.Tolerance = 1e-12
	}
	if sc.Into == "" {
		sc.Into = sc.Combine[0]
	}
	T := len(prod.Markets)
	out := make([]marketOutcome, T)
	contraction.ForEach(T, func(_, t int) {
		out[t] = simulateMarket(f, t, pre, post, merging, names, sc)
	})
	res := &Result{Schema: Schema, Combine: sc.Combine, Into: sc.Into, CostChange: sc.CostChange, Caution: Caution}
	for t := range out {
		if out[t].err != nil {
			return nil, fmt.Errorf("market %q: %v", prod.Markets[t].ID, out[t].err)
		}
		res.Products = append(res.Products, out[t].rows...)
		res.Markets = append(res.Markets, out[t].mkt)
		res.Warnings = append(res.Warnings, out[t].warn...)
	}
	res.Summary = summarize(res)
	if res.Summary.Unconverged > 0 {
		res.Warnings = append(res.Warnings, fmt.Sprintf("the post-merger equilibrium did not converge in %d markets (see markets[].converged)", res.Summary.Unconverged))
	}
	return res, nil
}

func simulateMarket(f *demand.Fitted, t int, pre, post []int, merging []bool, names []string, sc Scenario) marketOutcome {
	prod := f.Model.Products
	span := prod.Markets[t]
	J := span.Len()
	mk := NewMarket(f, t)
	oPre := localOwners(pre[span.Start:span.End])
	oPost := localOwners(post[span.Start:span.End])
	p0 := mk.Price0
	s0 := mk.Shares()
	var o marketOutcome
	eta, err := mk.Markups(oPre)
	if err != nil {
		o.err = err
		return o
	}
	c := make([]float64, J)
	for j := range c {
		c[j] = p0[j] - eta[j]
		if c[j] < 0 {
			o.warn = append(o.warn, fmt.Sprintf("market %q, product %q: implied marginal cost %.4g is negative", span.ID, prod.Product[span.Start+j], c[j]))
		}
	}
	focPre := mk.FOCResidual(p0, c, oPre)
	csPre := mk.ConsumerSurplus()
	// Compensating cost changes at observed prices under the new ownership.
	etaStar, err := mk.Markups(oPost)
	if err != nil {
		o.err = err
		return o
	}
	c1 := make([]float64, J)
	for j := range c1 {
		c1[j] = c[j]
		if merging[span.Start+j] {
			c1[j] = c[j] * (1 + sc.CostChange)
		}
	}
	sol := mk.Solve(c1, oPost, p0, sc.Tolerance)
	csPost := mk.ConsumerSurplus()
	psPre, psPost := 0.0, 0.0
	mergedPre, totalPre := 0.0, 0.0
	for j := 0; j < J; j++ {
		n := span.Start + j
		r := ProductRow{
			Market: span.ID, Product: prod.Product[n], FirmPre: names[pre[n]], FirmPost: names[post[n]], Merging: merging[n],
			PricePre: p0[j], PricePost: sol.Price[j], SharePre: s0[j], SharePost: sol.Shares[j],
			Cost: c[j], CostPost: c1[j],
			MarginPre: p0[j] - c[j], MarginPost: sol.Price[j] - c1[j],
		}
		r.PriceChangePct = 100 * (r.PricePost/r.PricePre - 1)
		r.LernerPre = r.MarginPre / r.PricePre
		r.LernerPost = r.MarginPost / r.PricePost
		r.ProfitPre = r.MarginPre * r.SharePre
		r.ProfitPost = r.MarginPost * r.SharePost
		if merging[n] {
			r.CompensatingCost = (p0[j] - etaStar[j]) - c[j]
			r.CompensatingShare = 100 * r.CompensatingCost / c[j]
			mergedPre += s0[j]
		}
		totalPre += s0[j]
		psPre += r.ProfitPre
		psPost += r.ProfitPost
		o.rows = append(o.rows, r)
	}
	hPre, hPost, hFixed := HHI(s0, oPre), HHI(sol.Shares, oPost), HHI(s0, oPost)
	o.mkt = MarketRow{Market: span.ID, HHIPre: hPre, HHIPost: hPost, DeltaHHI: hPost - hPre,
		HHIPostFixed: hFixed, DeltaHHIFixed: hFixed - hPre,
		MergedShare: 100 * mergedPre / totalPre,
		CSPre:       csPre, CSPost: csPost, CSChange: csPost - csPre, PSChange: psPost - psPre,
		Iterations: sol.Iterations, Method: sol.Method, Converged: sol.Converged, FOCPre: focPre, FOCPost: sol.Residual}
	o.mkt.Presumption = Presumed(hFixed, hFixed-hPre, o.mkt.MergedShare)
	return o
}

// Presumed applies the structural presumptions of the 2023 US Merger
// Guidelines: post-merger HHI above 1,800 with ΔHHI above 100, or a merged
// share above 30% with ΔHHI above 100.
func Presumed(hhiPost, deltaHHI, mergedSharePct float64) bool {
	return deltaHHI > 100 && (hhiPost > 1800 || mergedSharePct > 30)
}

func summarize(r *Result) Summary {
	var s Summary
	var wM, wR, wA float64
	for _, p := range r.Products {
		d := p.PricePost - p.PricePre
		s.PriceChangePctAll += p.SharePre * p.PriceChangePct
		s.PriceChangeAll += p.SharePre * d
		wA += p.SharePre
		if p.Merging {
			s.PriceChangePctMerging += p.SharePre * p.PriceChangePct
			s.PriceChangeMerging += p.SharePre * d
			wM += p.SharePre
		} else {
			s.PriceChangePctRivals += p.SharePre * p.PriceChangePct
			wR += p.SharePre
		}
	}
	div := func(a, b float64) float64 {
		if b == 0 {
			return 0
		}
		return a / b
	}
	s.PriceChangePctAll = div(s.PriceChangePctAll, wA)
	s.PriceChangeAll = div(s.PriceChangeAll, wA)
	s.PriceChangePctMerging = div(s.PriceChangePctMerging, wM)
	s.PriceChangeMerging = div(s.PriceChangeMerging, wM)
	s.PriceChangePctRivals = div(s.PriceChangePctRivals, wR)
	for _, m := range r.Markets {
		s.MeanHHIPre += m.HHIPre / float64(len(r.Markets))
		s.MeanHHIPost += m.HHIPost / float64(len(r.Markets))
		s.MeanDeltaHHI += m.DeltaHHI / float64(len(r.Markets))
		s.CSChangeTotal += m.CSChange
		s.PSChangeTotal += m.PSChange
		if m.Presumption {
			s.MarketsPresumed++
		}
		if !m.Converged {
			s.Unconverged++
		}
	}
	return s
}

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

// Draws carries the parameter-uncertainty intervals.
type Draws struct {
	Requested int    `json:"requested"`
	Used      int    `json:"used"`
	Seed      uint64 `json:"seed"`
	Failed    int    `json:"failed"`
	// Why draws failed: an agent's price coefficient ≥ 0, the share
	// inversion or markup equations failed, or an equilibrium did not converge.
	FailedAlpha       int                 `json:"failed_nonnegative_alpha"`
	FailedInversion   int                 `json:"failed_inversion"`
	FailedEquilibrium int                 `json:"failed_equilibrium"`
	Note              string              `json:"note,omitempty"`
	Products          []ProductDraws      `json:"products"`
	Markets           []MarketDraws       `json:"markets"`
	Summary           map[string]Interval `json:"summary"`
}

// ErrStopped is returned when a run of draws is interrupted.
var ErrStopped = errors.New("interrupted")

// SimulateDraws repeats the scenario for k parameter draws from N(θ̂, V̂)
// (names and order of the results covariance: β then θ2). progress, when not
// nil, is called after each draw; closing stop ends the run with ErrStopped.
func SimulateDraws(m *demand.Model, mean []float64, cov [][]float64, sc Scenario, k int, seed uint64,
	progress func(done int), stop <-chan struct{}) (*Draws, error) {
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
	K := len(m.X1Names)
	d := &Draws{Requested: k, Seed: seed}
	var priceCh [][]float64 // per draw, per product row
	var mergCh, csCh [][]float64
	var sums []Summary
	for r := 0; r < k; r++ {
		if stop != nil {
			select {
			case <-stop:
				return nil, ErrStopped
			default:
			}
		}
		x := norm.Rand(nil)
		beta := x[:K]
		theta := append([]float64(nil), x[K:]...)
		for i, p := range m.Params {
			if p.Kind == "sigma" {
				theta[i] = math.Abs(theta[i])
			}
		}
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
		if progress != nil {
			progress(r + 1)
		}
		if err != nil || res == nil || res.Summary.Unconverged > 0 {
			d.Failed++
			continue
		}
		pc := make([]float64, len(res.Products))
		for i, p := range res.Products {
			pc[i] = p.PriceChangePct
		}
		mc := make([]float64, len(res.Markets))
		cc := make([]float64, len(res.Markets))
		for t, mrow := range res.Markets {
			cc[t] = mrow.CSChange
			num, den := 0.0, 0.0
			for _, p := range res.Products {
				if p.Market == mrow.Market && p.Merging {
					num += p.SharePre * p.PriceChangePct
					den += p.SharePre
				}
			}
			if den > 0 {
				mc[t] = num / den
			}
		}
		priceCh = append(priceCh, pc)
		mergCh = append(mergCh, mc)
		csCh = append(csCh, cc)
		sums = append(sums, res.Summary)
	}
	d.Used = len(priceCh)
	if d.Failed > 0 {
		d.Note = fmt.Sprintf("%d of %d draws were set aside (see failed_*); the intervals are conditional on the draws kept", d.Failed, k)
	}
	if d.Used == 0 {
		return d, fmt.Errorf("none of the %d parameter draws gave a usable equilibrium", k)
	}
	prod := m.Products
	for i := 0; i < prod.Len(); i++ {
		d.Products = append(d.Products, ProductDraws{Market: prod.Market[i], Product: prod.Product[i], PriceChangePct: percentiles(column(priceCh, i))})
	}
	for t, mk := range prod.Markets {
		d.Markets = append(d.Markets, MarketDraws{Market: mk.ID, PriceChangePctMerging: percentiles(column(mergCh, t)), CSChange: percentiles(column(csCh, t))})
	}
	pick := func(get func(Summary) float64) Interval {
		v := make([]float64, len(sums))
		for i, s := range sums {
			v[i] = get(s)
		}
		return percentiles(v)
	}
	d.Summary = map[string]Interval{
		"price_change_pct_merging":   pick(func(s Summary) float64 { return s.PriceChangePctMerging }),
		"price_change_pct_rivals":    pick(func(s Summary) float64 { return s.PriceChangePctRivals }),
		"price_change_pct_all":       pick(func(s Summary) float64 { return s.PriceChangePctAll }),
		"cs_change_sum_over_markets": pick(func(s Summary) float64 { return s.CSChangeTotal }),
		"ps_change_sum_over_markets": pick(func(s Summary) float64 { return s.PSChangeTotal }),
	}
	return d, nil
}

func column(rows [][]float64, j int) []float64 {
	out := make([]float64, len(rows))
	for r, row := range rows {
		out[r] = row[j]
	}
	return out
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
