package merger

// Welfare summarises the welfare effects over markets. Consumer surplus
// and profit changes are per consumer in each market (in the currency of
// the price column), so they are averaged over markets, never summed; with
// market sizes (the number of consumers of each market, [columns]
// market_size) they become money per market and in total.
type Welfare struct {
	CSChangePerConsumerMean float64  `json:"cs_change_per_consumer_market_mean"` // unweighted mean over markets
	PSChangePerConsumerMean float64  `json:"ps_change_per_consumer_market_mean"`
	Consumers               *float64 `json:"consumers_total,omitempty"` // Σ market sizes
	CSChangeMoneyTotal      *float64 `json:"cs_change_money_total,omitempty"`
	PSChangeMoneyTotal      *float64 `json:"ps_change_money_total,omitempty"`
}

// setMoney sets each market's size and money changes from size (one per
// market, in market order), when there are sizes.
func setMoney(res *Result, size []float64) {
	if size == nil {
		return
	}
	for t := range res.Markets {
		m := &res.Markets[t]
		cs, ps := m.CSChange*size[t], m.PSChange*size[t]
		m.MarketSize, m.CSChangeMoney, m.PSChangeMoney = size[t], &cs, &ps
	}
}

// welfare summarises the markets' welfare changes.
func welfare(rows []MarketRow) Welfare {
	var w Welfare
	if len(rows) == 0 {
		return w
	}
	n := float64(len(rows))
	money := true
	var consumers, cs, ps float64
	for _, m := range rows {
		w.CSChangePerConsumerMean += m.CSChange / n
		w.PSChangePerConsumerMean += m.PSChange / n
		if m.CSChangeMoney == nil || m.PSChangeMoney == nil {
			money = false
			continue
		}
		consumers += m.MarketSize
		cs += *m.CSChangeMoney
		ps += *m.PSChangeMoney
	}
	if money {
		w.Consumers, w.CSChangeMoneyTotal, w.PSChangeMoneyTotal = &consumers, &cs, &ps
	}
	return w
}

// welfareDraws returns the welfare figures of a draw's summary by the name
// of their interval in Draws.Summary (the money totals only when every
// kept draw has them).
func welfareDraws(kept []DrawRecord) map[string]func(DrawRecord) float64 {
	out := map[string]func(DrawRecord) float64{
		"cs_change_per_consumer_market_mean": func(o DrawRecord) float64 { return o.Summary.CSChangePerConsumerMean },
		"ps_change_per_consumer_market_mean": func(o DrawRecord) float64 { return o.Summary.PSChangePerConsumerMean },
	}
	for _, o := range kept {
		if o.Summary.CSChangeMoneyTotal == nil {
			return out
		}
	}
	out["cs_change_money_total"] = func(o DrawRecord) float64 { return *o.Summary.CSChangeMoneyTotal }
	out["ps_change_money_total"] = func(o DrawRecord) float64 { return *o.Summary.PSChangeMoneyTotal }
	return out
}
