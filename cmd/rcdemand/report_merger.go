package main

import (
	"fmt"
	"html/template"
	"math"
	"sort"

	"gonum.org/v1/gonum/stat"

	"rcdemand/demand"
	"rcdemand/merger"
)

// The report's margins and merger sections. Tables are bounded whatever the
// size of the data: one market's products (at most marginRows), one row
// per firm, and, above manyMarkets markets, the topRows markets with the
// largest effects and the quantiles across markets.

const (
	marginRows = 15
	topRows    = 10
)

type marginRow struct{ Product, Firm, Share, Price, Cost, Markup, Lerner string }

type firmMarginRow struct{ Firm, Rows, Lerner, Range, Markup string }

type marginsView struct {
	Market string
	Rows   []marginRow
	More   int
	Firms  []firmMarginRow
}

// marginsOf lays out the pre-merger margins of market t and, by firm, of
// all markets.
func marginsOf(fit *demand.Fitted, t int) (*marginsView, error) {
	mg, err := fit.Margins()
	if err != nil {
		return nil, err
	}
	p := fit.Model.Products
	mk := p.Markets[t]
	v := &marginsView{Market: mk.ID}
	dp := decimals(4, p.Price[mk.Start:mk.End]...)
	for i := mk.Start; i < mk.End; i++ {
		if len(v.Rows) == marginRows {
			v.More = mk.End - i
			break
		}
		v.Rows = append(v.Rows, marginRow{Product: p.Product[i], Firm: p.Firm[i], Share: fixed(100*p.Share[i], 2) + "%",
			Price: fixed(p.Price[i], dp), Cost: fixed(mg.Cost[i], dp), Markup: fixed(mg.Markup[i], dp), Lerner: fixed(mg.Lerner[i], 3)})
	}
	for _, f := range mg.ByFirm(p.Firm, p.Share) {
		v.Firms = append(v.Firms, firmMarginRow{Firm: f.Firm, Rows: fmt.Sprint(f.Rows), Lerner: fixed(f.Lerner, 3),
			Range: fixed(f.Min, 3) + " to " + fixed(f.Max, 3), Markup: fixed(f.MeanMarkup, dp)})
	}
	return v, nil
}

type marketView struct {
	Market, Pre, After, Delta, Eq, DeltaEq, Share, Price, CS, CSMoney string
	Presumed                                                          bool
}

type distView struct{ What, Min, Q1, Median, Q3, Max string }

type productView struct{ Product, FirmPre, FirmPost, Markets, Change, Range, Compensating string }

type mergerView struct {
	Title, CostChange                   string
	PriceMerging, PriceRivals, PriceAll string
	CS, PS, CSMoney, PSMoney, Draws     string
	Failed                              string
	MeanPre, MeanAfter, MeanDelta       string
	MeanEq, MeanDeltaEq                 string
	Presumed, Markets, EqMarkets        int
	Many, Money                         bool
	Figures                             []figureView
	Rows, TopPrice                      []marketView
	Dist                                []distView
	Products                            []productView
	MoreProducts                        int
}

func mergerReport(mr *merger.Result, market string) (*mergerView, error) {
	s := mr.Summary
	T := len(mr.Markets)
	eq := merger.EquilibriumMarkets(mr)
	mv := &mergerView{Title: scenarioTitle(mr), Markets: T, EqMarkets: eq, Presumed: s.MarketsPresumed, Many: T > manyMarkets,
		PriceMerging: pct(s.PriceChangePctMerging), PriceRivals: pct(s.PriceChangePctRivals), PriceAll: pct(s.PriceChangePctAll),
		CS: signed(s.CSChangePerConsumerMean, decimals(3, s.CSChangePerConsumerMean)), PS: signed(s.PSChangePerConsumerMean, decimals(3, s.PSChangePerConsumerMean)),
		MeanPre: thousands(s.MeanHHIPre), MeanAfter: thousands(s.MeanHHIPostFixed), MeanDelta: thousands(s.MeanDeltaHHIFixed),
		MeanEq: thousands(s.MeanHHIPost), MeanDeltaEq: thousands(s.MeanDeltaHHI)}
	if s.CSChangeMoneyTotal != nil {
		mv.Money = true
		mv.CSMoney = fmt.Sprintf("%s in total over %d markets (%s consumers)", signedThousands(*s.CSChangeMoneyTotal), eq, thousands(*s.Consumers))
		mv.PSMoney = fmt.Sprintf("%s in total over %d markets", signedThousands(*s.PSChangeMoneyTotal), eq)
	}
	if mr.CostChange != 0 {
		mv.CostChange = fmt.Sprintf("%+.1f%%", 100*mr.CostChange)
	}
	if d := mr.Draws; d != nil {
		mv.Draws = fmt.Sprintf("%d of %d draws from the estimated asymptotic distribution kept (%.0f%%, seed %d)", d.Used, d.Requested, 100*d.UsedShare, d.Seed)
		if !d.Intervals {
			mv.Draws += "; " + d.Note
		}
	}
	if n := len(mr.FailedMarkets); n > 0 {
		mv.Failed = merger.FailureWarning(mr.FailedMarkets, len(mr.Markets), "post-merger equilibrium", "left out of the figures above", "failed_markets")
	}
	change := merger.MarketPriceChanges(mr)
	if err := mergerFigures(mv, mr, market, change); err != nil {
		return nil, err
	}
	mergerTables(mv, mr, change)
	return mv, nil
}

// mergerFigures draws the price changes of the shown market and the
// concentration: per market when there are few, distributions when many.
func mergerFigures(mv *mergerView, mr *merger.Result, market string, change []float64) error {
	if pc, err := marketPriceChanges(mr, market); err != nil {
		return err
	} else if pc != "" {
		mv.Figures = append(mv.Figures, figureView{pc, "Post-merger Bertrand–Nash price changes with marginal costs recovered from the pre-merger first-order conditions."})
	}
	var ids []string
	var pre, after, delta, eq []float64
	var presumed []bool
	for _, r := range mr.Markets {
		e := r.HHIPost
		if !r.Converged {
			e = math.NaN() // no post-merger equilibrium: no dot
		}
		ids, pre, after, delta, eq = append(ids, r.Market), append(pre, r.HHIPre), append(after, r.HHIPostFixed), append(delta, r.DeltaHHIFixed), append(eq, e)
		presumed = append(presumed, r.Presumption)
	}
	if !mv.Many {
		hb, err := hhiBars(ids, pre, after, eq)
		if err != nil {
			return err
		}
		mv.Figures = append(mv.Figures, figureView{hb, fmt.Sprintf("%s combines the parties' pre-merger shares, as the 2023 US Merger Guidelines' structural presumption does; the dots are the %s. The dashed line marks 1,800.", labelHHIAfter, labelHHIEq)})
		return nil
	}
	h, err := priceHistogram(change)
	if err != nil {
		return err
	}
	sc, err := hhiScatter(after, delta, presumed)
	if err != nil {
		return err
	}
	mv.Figures = append(mv.Figures,
		figureView{h, "The share-weighted price change of the parties' products in each market, across all markets."},
		figureView{sc, fmt.Sprintf("Each dot is a market. Shaded: HHI after above 1,800 with ΔHHI above 100, where the 2023 US Merger Guidelines presume a merger to lessen competition; a party's share above 30%% with ΔHHI above 100 also meets the presumption. Presumption met in %d of %d markets.", mv.Presumed, mv.Markets)})
	return nil
}

// marketPriceChanges draws the price change of each product of one market,
// with intervals from the draws when there are any.
func marketPriceChanges(mr *merger.Result, market string) (template.HTML, error) {
	var names []string
	var change, lo, hi []float64
	var merging []bool
	intervals := map[string]merger.Interval{}
	if mr.Draws != nil {
		for _, pd := range mr.Draws.Products {
			if pd.Market == market {
				intervals[pd.Product] = pd.PriceChangePct
			}
		}
	}
	for _, pr := range mr.Products {
		if pr.Market != market {
			continue
		}
		names = append(names, pr.Product)
		change = append(change, pr.PriceChangePct)
		merging = append(merging, pr.Merging)
		if iv, ok := intervals[pr.Product]; ok {
			lo, hi = append(lo, iv.Lo), append(hi, iv.Hi)
		}
	}
	if len(names) == 0 {
		return "", nil
	}
	if len(lo) != len(change) {
		lo, hi = nil, nil
	}
	return priceChanges(names, change, lo, hi, merging, market)
}

// mergerTables lays out the markets (all, or the largest effects and the
// quantiles across markets) and the parties' products.
func mergerTables(mv *mergerView, mr *merger.Result, change []float64) {
	row := func(t int) marketView {
		r := mr.Markets[t]
		v := marketView{Market: r.Market, Pre: thousands(r.HHIPre), After: thousands(r.HHIPostFixed), Delta: thousands(r.DeltaHHIFixed),
			Eq: thousands(r.HHIPost), DeltaEq: thousands(r.DeltaHHI), Share: fixed(r.MergedShare, 1) + "%", Presumed: r.Presumption,
			Price: pct(change[t]), CS: signed(r.CSChange, 4)}
		if r.CSChangeMoney != nil {
			v.CSMoney = signedThousands(*r.CSChangeMoney)
		}
		if !r.Converged {
			v.Eq, v.DeltaEq, v.Price, v.CS, v.CSMoney = "—", "—", "no equilibrium", "—", "—"
		}
		return v
	}
	if !mv.Many {
		for t := range mr.Markets {
			mv.Rows = append(mv.Rows, row(t))
		}
	} else {
		for _, t := range merger.TopIndices(topRows, len(mr.Markets), func(t int) float64 { return mr.Markets[t].DeltaHHIFixed }) {
			mv.Rows = append(mv.Rows, row(t))
		}
		for _, t := range merger.TopIndices(topRows, len(mr.Markets), func(t int) float64 { return change[t] }) {
			mv.TopPrice = append(mv.TopPrice, row(t))
		}
		mv.Dist = distributions(mr, change)
	}
	n := 0
	for _, e := range merger.ProductEffects(mr) {
		if !e.Merging {
			continue
		}
		if n++; n > shownRows {
			mv.MoreProducts++
			continue
		}
		mv.Products = append(mv.Products, productView{Product: e.Product, FirmPre: e.FirmPre, FirmPost: e.FirmPost, Markets: fmt.Sprint(e.Markets),
			Change: pct(e.PriceChangePct), Range: pct(e.MinChangePct) + " to " + pct(e.MaxChangePct), Compensating: pct(e.CompensatingShare)})
	}
}

// distributions returns the quantiles across markets of the effects.
func distributions(mr *merger.Result, change []float64) []distView {
	get := func(f func(merger.MarketRow) float64) []float64 {
		out := make([]float64, len(mr.Markets))
		for t, m := range mr.Markets {
			out[t] = f(m)
		}
		return out
	}
	eqOnly := func(x []float64) []float64 { // markets with a post-merger equilibrium
		var out []float64
		for t, v := range x {
			if mr.Markets[t].Converged && !math.IsNaN(v) {
				out = append(out, v)
			}
		}
		return out
	}
	rows := []struct {
		what string
		x    []float64
		fmt  func(float64) string
	}{
		{labelHHIPre, get(func(m merger.MarketRow) float64 { return m.HHIPre }), thousands},
		{labelHHIAfter, get(func(m merger.MarketRow) float64 { return m.HHIPostFixed }), thousands},
		{labelDeltaHHI, get(func(m merger.MarketRow) float64 { return m.DeltaHHIFixed }), thousands},
		{labelHHIEq, eqOnly(get(func(m merger.MarketRow) float64 { return m.HHIPost })), thousands},
		{"parties' price change", eqOnly(change), pct},
		{"consumer surplus change per consumer", eqOnly(get(func(m merger.MarketRow) float64 { return m.CSChange })), func(x float64) string { return signed(x, 4) }},
	}
	var out []distView
	for _, r := range rows {
		if len(r.x) == 0 { // no market with a post-merger equilibrium
			out = append(out, distView{What: r.what, Min: "—", Q1: "—", Median: "—", Q3: "—", Max: "—"})
			continue
		}
		x := append([]float64(nil), r.x...)
		sort.Float64s(x)
		q := func(p float64) string { return r.fmt(stat.Quantile(p, stat.LinInterp, x, nil)) }
		out = append(out, distView{What: r.what, Min: r.fmt(x[0]), Q1: q(0.25), Median: q(0.5), Q3: q(0.75), Max: r.fmt(x[len(x)-1])})
	}
	return out
}
