package merger

import "math"

// ProductEffect summarises one product's effects over the markets where it
// is sold: pre-merger-share-weighted means and the range over markets.
type ProductEffect struct {
	Product           string
	FirmPre, FirmPost string
	Merging           bool
	Markets           int
	PricePre          float64 // share-weighted mean
	PriceChangePct    float64 // share-weighted mean
	MinChangePct      float64
	MaxChangePct      float64
	LernerPre         float64 // share-weighted mean
	CompensatingShare float64 // share-weighted mean, parties' products only
}

// ProductEffects summarises the product rows of r by product (and owner
// before and after, in order of first appearance), weighting each market by
// the product's pre-merger share. Rows of markets without a post-merger
// equilibrium are left out (Markets counts the markets used).
func ProductEffects(r *Result) []ProductEffect {
	type key struct{ p, pre, post string }
	idx := map[key]int{}
	var out []ProductEffect
	weight := []float64{}
	for _, row := range r.Products {
		if !row.Converged {
			continue
		}
		k := key{row.Product, row.FirmPre, row.FirmPost}
		i, ok := idx[k]
		if !ok {
			i = len(out)
			idx[k] = i
			out = append(out, ProductEffect{Product: row.Product, FirmPre: row.FirmPre, FirmPost: row.FirmPost, Merging: row.Merging,
				MinChangePct: math.Inf(1), MaxChangePct: math.Inf(-1)})
			weight = append(weight, 0)
		}
		e := &out[i]
		w := row.SharePre
		e.Markets++
		weight[i] += w
		e.PricePre += w * row.PricePre
		e.PriceChangePct += w * row.PriceChangePct
		e.LernerPre += w * row.LernerPre
		e.CompensatingShare += w * row.CompensatingShare
		e.MinChangePct = math.Min(e.MinChangePct, row.PriceChangePct)
		e.MaxChangePct = math.Max(e.MaxChangePct, row.PriceChangePct)
	}
	for i := range out {
		w := weight[i]
		out[i].PricePre /= w
		out[i].PriceChangePct /= w
		out[i].LernerPre /= w
		out[i].CompensatingShare /= w
	}
	return out
}

// MarketPriceChanges returns, per market (in market order), the
// pre-merger-share-weighted mean price change of the parties' products; NaN
// for a market without a post-merger equilibrium.
func MarketPriceChanges(r *Result) []float64 {
	pos := map[string]int{}
	for t, m := range r.Markets {
		pos[m.Market] = t
	}
	num := make([]float64, len(r.Markets))
	den := make([]float64, len(r.Markets))
	for _, p := range r.Products {
		if p.Merging {
			t := pos[p.Market]
			num[t] += p.SharePre * p.PriceChangePct
			den[t] += p.SharePre
		}
	}
	for t := range num {
		if den[t] > 0 {
			num[t] /= den[t]
		}
		if !r.Markets[t].Converged {
			num[t] = math.NaN()
		}
	}
	return num
}

// EquilibriumMarkets returns the number of markets with a post-merger
// equilibrium: those the effects are averaged over.
func EquilibriumMarkets(r *Result) int {
	n := 0
	for _, m := range r.Markets {
		if m.Converged {
			n++
		}
	}
	return n
}
