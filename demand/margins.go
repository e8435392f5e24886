package demand

// Margins are the pre-merger price-cost margins at the estimates under the
// firm column's ownership, per row: markup η = p − c from the Bertrand–Nash
// conditions, marginal cost c and Lerner index η/p.
type Margins struct {
	Markup, Cost, Lerner []float64
}

// Margins returns the margins of every row (see Costs).
func (f *Fitted) Margins() (*Margins, error) {
	cost, markup, err := f.Costs()
	if err != nil {
		return nil, err
	}
	price := f.Model.Products.Price
	lerner := make([]float64, len(markup))
	for i := range markup {
		lerner[i] = markup[i] / price[i]
	}
	return &Margins{Markup: markup, Cost: cost, Lerner: lerner}, nil
}

// FirmMargin summarises one firm's Lerner indices over its rows (products
// in markets): the mean weighted by shares, and the range.
type FirmMargin struct {
	Firm       string
	Rows       int
	Lerner     float64 // share-weighted mean
	Min, Max   float64
	MeanMarkup float64 // share-weighted mean of p − c
}

// ByFirm summarises the margins by firm (firm and share per row), firms in
// order of first appearance.
func (mg *Margins) ByFirm(firm []string, share []float64) []FirmMargin {
	idx := map[string]int{}
	var out []FirmMargin
	var w []float64
	for i, f := range firm {
		k, ok := idx[f]
		if !ok {
			k = len(out)
			idx[f] = k
			out = append(out, FirmMargin{Firm: f, Min: mg.Lerner[i], Max: mg.Lerner[i]})
			w = append(w, 0)
		}
		e := &out[k]
		e.Rows++
		w[k] += share[i]
		e.Lerner += share[i] * mg.Lerner[i]
		e.MeanMarkup += share[i] * mg.Markup[i]
		e.Min, e.Max = min(e.Min, mg.Lerner[i]), max(e.Max, mg.Lerner[i])
	}
	for k := range out {
		out[k].Lerner /= w[k]
		out[k].MeanMarkup /= w[k]
	}
	return out
}
