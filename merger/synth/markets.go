package synth

import (
	"math"
	"math/rand/v2"
)

// Markets that differ. By default every market draws its agents from the
// same distribution, so market means of a demographic differ by sampling
// noise only, and an interaction Π with it is barely identified from
// market-level data. Two truth-file entries make markets differ:
//
//	demographic_market_sd = { income = 0.6 }  # market t's mean of income is
//	                                          # mean + N(0, 0.6²); agents then
//	                                          # draw around it with sd
//	[market_size]                             # consumers per market, log-normal:
//	median = 250000                           # written to the products table in
//	log_sd = 0.5                              # the spec's [columns] market_size
//
// These are drawn first, market by market, from a source of their own
// (seeded by the same seed), so a truth file without them gives the same
// data as before.
type MarketSize struct {
	Median float64 `toml:"median" json:"median"`
	LogSD  float64 `toml:"log_sd" json:"log_sd"`
}

// checkMarkets checks the market-level entries against the spec.
func (g *generator) checkMarkets() error {
	tr, spec := g.tr, g.spec
	for _, dm := range sortedKeys(tr.DemographicMarketSD) {
		if sd := tr.DemographicMarketSD[dm]; !(sd >= 0) || math.IsInf(sd, 0) {
			return tr.errorf("demographic_market_sd for %q is %v: it must be 0 or more", dm, sd)
		}
	}
	switch ms := tr.MarketSize; {
	case spec.Columns.MarketSize != "" && ms == nil:
		return tr.errorf("the spec sets [columns] market_size = %q: give [market_size] median and log_sd", spec.Columns.MarketSize)
	case ms != nil && !(ms.Median > 0 && ms.LogSD >= 0):
		return tr.errorf("[market_size] median must be positive and log_sd 0 or more")
	}
	return nil
}

// drawMarkets draws each market's demographic shifts and size.
func (g *generator) drawMarkets() {
	rng := rand.New(rand.NewPCG(g.seed, 0x6d61726b)) // "mark"
	g.demShift = map[string][]float64{}
	for _, dm := range g.spec.Demand.Demographics {
		g.demShift[dm] = make([]float64, g.T)
	}
	sized := g.tr.MarketSize != nil && g.spec.Columns.MarketSize != ""
	if sized {
		g.size = make([]float64, g.T)
	}
	shifted := sortedKeys(g.tr.DemographicMarketSD)
	for t := 0; t < g.T; t++ {
		for _, dm := range shifted {
			g.demShift[dm][t] = g.tr.DemographicMarketSD[dm] * rng.NormFloat64()
		}
		if sized {
			ms := g.tr.MarketSize
			g.size[t] = math.Round(ms.Median * math.Exp(ms.LogSD*rng.NormFloat64()))
		}
	}
}

// marketSizeColumn repeats each market's size on its rows.
func (g *generator) marketSizeColumn() []float64 {
	out := make([]float64, g.N)
	for n := range out {
		out[n] = g.size[n/g.J]
	}
	return out
}
