package merger

import (
	"errors"
	"fmt"
	"slices"
	"strings"

	"rcdemand/data"
	"rcdemand/demand"
)

// Schema identifies the merger output format.
const Schema = "rcdemand.merger.v1"

// Caution accompanies every merger and screening output.
const Caution = "These are model-based estimates for economic analysis, not legal conclusions. " +
	"They depend on the demand model, the data and the assumptions made; the applicable merger guidelines, " +
	"the competent authority and qualified counsel decide."

// Scenario is a change of ownership and, optionally, of the merging parties'
// marginal costs. Combine merges whole firms; Ownership moves single
// products (applied after Combine, so it can also divest a merged firm's
// product); either or both may be given.
type Scenario struct {
	Combine    []string // firms that merge
	Into       string   // the merged firm's name (default: Combine[0])
	CostChange float64  // proportional change of the merging parties' costs, e.g. −0.05
	Tolerance  float64  // on max|Δp|, default 1e-12

	Ownership *Ownership // products that change owner, or nil
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
	// Converged is false in a market whose post-merger equilibrium was not
	// found: price_post and share_post are then the solver's closest
	// prices, not an equilibrium (see Result.FailedMarkets).
	Converged bool `json:"converged"`
}

// MarketRow is one market's effects. HHI has one meaning per name: hhi_pre
// at the pre-merger shares and owners; hhi_post and delta_hhi at the
// post-merger equilibrium shares and owners; hhi_post_at_pre_shares and
// delta_hhi_at_pre_shares combine the pre-merger shares under the new
// owners, as the Guidelines' structural presumption does (and it alone
// decides guidelines_presumption; merged_share_pct is the combined
// pre-merger share, in per cent of the inside goods, of the post-merger
// firm that gained products — of the largest such firm when the change
// makes several). Welfare is per consumer
// (cs_*, ps_*, in the price column's currency) and, when the products table
// has a market size column, in money for the whole market (*_money).
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

	// With [columns] market_size: consumers, and the welfare changes of the
	// whole market in money.
	MarketSize    float64  `json:"market_size,omitempty"`
	CSChangeMoney *float64 `json:"cs_change_money,omitempty"` // cs_change × market_size
	PSChangeMoney *float64 `json:"ps_change_money,omitempty"` // ps_change × market_size
}

// Summary aggregates over the markets whose post-merger equilibrium was
// found; price changes are weighted by pre-merger shares. Per-consumer
// welfare changes are averaged over markets, never summed; money totals
// need market sizes.
type Summary struct {
	PriceChangePctMerging float64 `json:"price_change_pct_merging"`
	PriceChangePctRivals  float64 `json:"price_change_pct_rivals"`
	PriceChangePctAll     float64 `json:"price_change_pct_all"`
	PriceChangeMerging    float64 `json:"price_change_merging"`
	PriceChangeAll        float64 `json:"price_change_all"`
	MeanHHIPre            float64 `json:"mean_hhi_pre"`
	MeanHHIPost           float64 `json:"mean_hhi_post"`  // equilibrium
	MeanDeltaHHI          float64 `json:"mean_delta_hhi"` // equilibrium
	MeanHHIPostFixed      float64 `json:"mean_hhi_post_at_pre_shares"`
	MeanDeltaHHIFixed     float64 `json:"mean_delta_hhi_at_pre_shares"`
	MarketsPresumed       int     `json:"markets_with_guidelines_presumption"`
	Unconverged           int     `json:"markets_not_converged"` // len(Result.FailedMarkets), left out of the figures above
	Welfare
}

// FailedMarket is a market without a post-merger equilibrium: no stage of
// the solver converged, the prices found fail the second-order conditions,
// or the pre-merger markups could not be recovered.
type FailedMarket struct {
	Market     string  `json:"market"`
	Residual   float64 `json:"foc_residual"` // largest first-order-condition residual at the closest prices found
	Method     string  `json:"equilibrium_method"`
	Iterations int     `json:"equilibrium_iterations"`
	Reason     string  `json:"reason"`
}

// Result is the merger output, written as rcdemand.merger.v1.
type Result struct {
	Schema      string       `json:"schema"`
	ResultsFile string       `json:"results_file"`
	Combine     []string     `json:"combine"`
	Into        string       `json:"into"`
	Ownership   string       `json:"ownership_file,omitempty"`
	Parties     []string     `json:"parties"` // firms that gain products
	Inputs      []data.Input `json:"inputs,omitempty"`
	CostChange  float64      `json:"cost_change"`
	Caution     string       `json:"caution"`
	Warnings    []string     `json:"warnings,omitempty"`
	Products    []ProductRow `json:"products"`
	Markets     []MarketRow  `json:"markets"`
	Summary     Summary      `json:"summary"`
	// FailedMarkets lists, in market order, the markets left out of the
	// summary; their rows stay in products and markets with converged false
	// (a market whose markups could not be recovered has no rows).
	FailedMarkets []FailedMarket `json:"failed_markets"`
	Draws         *Draws         `json:"draws,omitempty"`
}

// combineOwners applies --combine to firms (the firm of each row): the
// firm index of each row before and after (firms numbered in order of first
// appearance).
func combineOwners(firms []string, sc Scenario) (pre, post []int, num numbering, err error) {
	pre = num.all(firms)
	if len(sc.Combine) < 2 {
		return nil, nil, num, fmt.Errorf("--combine needs at least two firms, got %d", len(sc.Combine))
	}
	into := sc.Into
	if into == "" {
		into = sc.Combine[0]
	}
	set := map[int]bool{}
	for _, c := range sc.Combine {
		k, ok := num.index[c]
		if !ok {
			msg := fmt.Sprintf("firm %q is not in the firm column (firms are: %s)", c, strings.Join(firstN(num.names, 12), ", "))
			if i := slices.IndexFunc(num.names, func(n string) bool { return strings.Contains(n, ",") }); i >= 0 {
				msg += fmt.Sprintf("; --combine splits its list at commas, so a firm whose name has one, such as %q, is named in an --ownership file instead", num.names[i])
			}
			return nil, nil, num, errors.New(msg)
		}
		if set[k] {
			return nil, nil, num, fmt.Errorf("--combine names %q twice: name each merging firm once", c)
		}
		set[k] = true
	}
	target, ok := num.index[into]
	if !ok || !set[target] {
		return nil, nil, num, fmt.Errorf("--into %q is not one of the merging firms", into)
	}
	post = make([]int, len(firms))
	for i, k := range pre {
		post[i] = k
		if set[k] {
			post[i] = target
		}
	}
	return pre, post, num, nil
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
	rows   []ProductRow
	mkt    *MarketRow
	failed *FailedMarket
	warn   []string
}

// Simulate runs the scenario on every market of a fitted model.
func Simulate(f *demand.Fitted, sc Scenario) (*Result, error) {
	prod := f.Model.Products
	own, err := resolveOwners(prod, sc)
	if err != nil {
		return nil, err
	}
	pre, post, merging, names := own.pre, own.post, own.merging, own.names
	if sc.Tolerance == 0 {
		sc.Tolerance = 1e-12
	}
	if sc.Into == "" && len(sc.Combine) > 0 {
		sc.Into = sc.Combine[0]
	}
	T := len(prod.Markets)
	out := make([]marketOutcome, T)
	newWorkers(f.Pricing()).Run(T, func(w *worker, t int) {
		out[t] = simulateMarket(w, f, t, pre, post, merging, names, sc)
	})
	res := &Result{Schema: Schema, Combine: sc.Combine, Into: sc.Into, Parties: own.parties, CostChange: sc.CostChange, Caution: Caution,
		FailedMarkets: []FailedMarket{}}
	if sc.Ownership != nil {
		res.Ownership = sc.Ownership.File
	}
	for t := range out {
		res.Products = append(res.Products, out[t].rows...)
		if out[t].mkt != nil {
			res.Markets = append(res.Markets, *out[t].mkt)
		}
		if out[t].failed != nil {
			res.FailedMarkets = append(res.FailedMarkets, *out[t].failed)
		}
		res.Warnings = append(res.Warnings, out[t].warn...)
	}
	setMoney(res, f.Model.MarketSize)
	res.Summary = summarize(res)
	if n := len(res.FailedMarkets); n > 0 {
		res.Warnings = append(res.Warnings, FailureWarning(res.FailedMarkets, T, "post-merger equilibrium", "left out of the summary", "failed_markets"))
	}
	return res, nil
}

// FailureWarning describes failed markets in one sentence: that there is
// no equilibrium of the kind named ("post-merger equilibrium") in so many
// of total markets, what was done with them ("left out of the summary"),
// and the first three by name with their residuals and reasons; listed
// names where the others are ("failed_markets").
func FailureWarning(failed []FailedMarket, total int, kind, done, listed string) string {
	var b strings.Builder
	fmt.Fprintf(&b, "no %s in %d of %d markets, %s:", kind, len(failed), total, done)
	for i, f := range failed {
		if i == 3 {
			fmt.Fprintf(&b, "; and %d more (see %s)", len(failed)-3, listed)
			break
		}
		sep := " "
		if i > 0 {
			sep = "; "
		}
		fmt.Fprintf(&b, "%smarket %q (FOC residual %.3g after %d iterations: %s)", sep, f.Market, f.Residual, f.Iterations, f.Reason)
	}
	return b.String()
}

func simulateMarket(w *worker, f *demand.Fitted, t int, pre, post []int, merging []bool, names []string, sc Scenario) marketOutcome {
	mk := w.mk
	prod := f.Model.Products
	span := prod.Markets[t]
	J := span.Len()
	mk.Bind(t)
	oPre := localOwners(pre[span.Start:span.End])
	oPost := localOwners(post[span.Start:span.End])
	p0 := mk.Price0()
	s0 := slices.Clone(mk.Shares())
	var o marketOutcome
	eta, err := mk.Markups(oPre)
	if err != nil {
		o.failed = &FailedMarket{Market: span.ID, Reason: "pre-merger markups: " + err.Error()}
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
		o.failed = &FailedMarket{Market: span.ID, Reason: "compensating cost changes: " + err.Error()}
		return o
	}
	c1 := make([]float64, J)
	for j := range c1 {
		c1[j] = c[j]
		if merging[span.Start+j] {
			c1[j] = c[j] * (1 + sc.CostChange)
		}
	}
	sol := w.eq.equilibrium(mk, c1, oPost, p0, sc.Tolerance)
	if !sol.Converged {
		fm := sol.Failure(span.ID)
		o.failed = &fm
	}
	csPost := mk.ConsumerSurplus()
	psPre, psPost := 0.0, 0.0
	for j := 0; j < J; j++ {
		n := span.Start + j
		r := ProductRow{
			Market: span.ID, Product: prod.Product[n], FirmPre: names[pre[n]], FirmPost: names[post[n]], Merging: merging[n],
			PricePre: p0[j], PricePost: sol.Price[j], SharePre: s0[j], SharePost: sol.Shares[j],
			Cost: c[j], CostPost: c1[j],
			MarginPre: p0[j] - c[j], MarginPost: sol.Price[j] - c1[j], Converged: sol.Converged,
		}
		r.PriceChangePct = 100 * (r.PricePost/r.PricePre - 1)
		r.LernerPre = r.MarginPre / r.PricePre
		r.LernerPost = r.MarginPost / r.PricePost
		r.ProfitPre = r.MarginPre * r.SharePre
		r.ProfitPost = r.MarginPost * r.SharePost
		if merging[n] {
			r.CompensatingCost = (p0[j] - etaStar[j]) - c[j]
			r.CompensatingShare = 100 * r.CompensatingCost / c[j]
		}
		psPre += r.ProfitPre
		psPost += r.ProfitPost
		o.rows = append(o.rows, r)
	}
	hPre, hPost, hFixed := HHI(s0, oPre), HHI(sol.Shares, oPost), HHI(s0, oPost)
	o.mkt = &MarketRow{Market: span.ID, HHIPre: hPre, HHIPost: hPost, DeltaHHI: hPost - hPre,
		HHIPostFixed: hFixed, DeltaHHIFixed: hFixed - hPre,
		MergedShare: mergedShare(s0, oPost, merging[span.Start:span.End]),
		CSPre:       csPre, CSPost: csPost, CSChange: csPost - csPre, PSChange: psPost - psPre,
		Iterations: sol.Iterations, Method: sol.Method, Converged: sol.Converged, FOCPre: focPre, FOCPost: sol.Residual}
	o.mkt.Presumption = Presumed(hFixed, hFixed-hPre, o.mkt.MergedShare)
	return o
}

// mergedShare returns the combined share of the post-merger firm that gains
// products, in per cent of the inside goods (of the largest such firm when
// there are several): shares s of one market, oPost its local owners after
// the change, merging its parties' products.
func mergedShare(s []float64, oPost []int, merging []bool) float64 {
	inside := 0.0
	party := make([]float64, len(s)) // by local owner after the change
	for j, v := range s {
		inside += v
		if merging[j] {
			party[oPost[j]] += v
		}
	}
	return 100 * slices.Max(party) / inside
}

// Presumed applies the structural presumptions of the 2023 US Merger
// Guidelines: either PresumedByHHI or PresumedByShare.
func Presumed(hhiPost, deltaHHI, mergedSharePct float64) bool {
	return PresumedByHHI(hhiPost, deltaHHI) || PresumedByShare(deltaHHI, mergedSharePct)
}

// PresumedByHHI is the Guidelines' presumption on concentration:
// post-merger HHI above 1,800 with ΔHHI above 100.
func PresumedByHHI(hhiPost, deltaHHI float64) bool { return deltaHHI > 100 && hhiPost > 1800 }

// PresumedByShare is the Guidelines' presumption on the merged firm's
// share: above 30% with ΔHHI above 100.
func PresumedByShare(deltaHHI, mergedSharePct float64) bool {
	return deltaHHI > 100 && mergedSharePct > 30
}

// summarize aggregates the markets whose equilibrium was found.
func summarize(r *Result) Summary {
	s := Summary{Unconverged: len(r.FailedMarkets)}
	var wM, wR, wA float64
	for _, p := range r.Products {
		if !p.Converged {
			continue
		}
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
	n := float64(EquilibriumMarkets(r))
	var converged []MarketRow
	for _, m := range r.Markets {
		if m.Presumption { // from pre-merger shares: it needs no equilibrium
			s.MarketsPresumed++
		}
		if !m.Converged {
			continue
		}
		s.MeanHHIPre += m.HHIPre / n
		s.MeanHHIPost += m.HHIPost / n
		s.MeanDeltaHHI += m.DeltaHHI / n
		s.MeanHHIPostFixed += m.HHIPostFixed / n
		s.MeanDeltaHHIFixed += m.DeltaHHIFixed / n
		converged = append(converged, m)
	}
	s.Welfare = welfare(converged)
	return s
}
