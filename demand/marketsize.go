package demand

import "math"

// readMarketSize sets MarketSize from the column [columns] market_size: a
// positive number of consumers per market, the same on every row of the
// market. Shares are quantities over market size, so a welfare change per
// consumer times the market size is the market's change in money.
func (m *Model) readMarketSize() error {
	c := m.Spec.Columns.MarketSize
	if c == "" {
		return nil
	}
	p := m.Products
	v, err := p.Floats(c)
	if err != nil {
		return err
	}
	m.MarketSize = make([]float64, len(p.Markets))
	for t, mk := range p.Markets {
		size := v[mk.Start]
		for i := mk.Start; i < mk.End; i++ {
			switch {
			case !(v[i] > 0) || math.IsInf(v[i], 0):
				return p.Errorf(i, c, "market size %v is not a positive number of consumers", v[i])
			case v[i] != size:
				return p.Errorf(i, c, "market size %v differs from %v on the first row of market %q: it must be the same on every row of a market", v[i], size, mk.ID)
			}
		}
		m.MarketSize[t] = size
	}
	return nil
}
