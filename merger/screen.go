package merger

import (
	"errors"
	"fmt"
	"math"

	"rcdemand/contraction"
	"rcdemand/data"
	"rcdemand/demand"
)

// ErrMissingDiversion reports a diversion table without a ratio the screen
// needs.
var ErrMissingDiversion = errors.New("the diversion table has no ratio")

// ScreenOptions configure a screen without estimation.
type ScreenOptions struct {
	Scenario
	Margin     []float64             // (p − c)/p per row, or nil
	Diversion  map[[3]string]float64 // (market, from, to) → D, or nil for proportional to shares
	Efficiency float64               // efficiency credit E in UPP, as a share of marginal cost
}

// ScreenProduct is one merging product's pricing-pressure figures.
type ScreenProduct struct {
	Market              string  `json:"market"`
	Product             string  `json:"product"`
	Firm                string  `json:"firm"`
	Share               float64 `json:"share"`
	DiversionToPartner  float64 `json:"diversion_to_partner"`
	UPP                 float64 `json:"upp"`
	GUPPI               float64 `json:"guppi"`
	LogitPriceChangePct float64 `json:"logit_price_change_pct"`
}

// ScreenMarket is one market's concentration figures.
type ScreenMarket struct {
	Market      string  `json:"market"`
	HHIPre      float64 `json:"hhi_pre"`
	MergedShare float64 `json:"merged_share_pct"`
	FlagHHI     bool    `json:"flag_hhi_1800_delta_100"`
	FlagShare   bool    `json:"flag_share_30_delta_100"`
	LogitAlpha  float64 `json:"logit_alpha,omitempty"`

	// HHI after and ΔHHI on pre-merger shares, under the names the merger
	// output gives these figures (the merger's hhi_post and delta_hhi are at
	// the post-merger equilibrium, which a screen does not compute).
	HHIPostFixed  float64 `json:"hhi_post_at_pre_shares"`
	DeltaHHIFixed float64 `json:"delta_hhi_at_pre_shares"`
}

// Screen is the screening output.
type Screen struct {
	Schema   string          `json:"schema"`
	Combine  []string        `json:"combine"`
	Parties  []string        `json:"parties"` // firms that gain products
	Caution  string          `json:"caution"`
	Markets  []ScreenMarket  `json:"markets"`
	Products []ScreenProduct `json:"products"`
	Notes    []string        `json:"notes,omitempty"`

	Ownership string       `json:"ownership_file,omitempty"`
	Inputs    []data.Input `json:"inputs,omitempty"`
}

// ScreenSchema identifies the screening output.
const ScreenSchema = "rcdemand.screen.v1"

// RunScreen computes HHI, ΔHHI and the 2023 Guidelines flags per market (on
// observed inside shares), UPP and GUPPI for each merging product when margins
// are given (Farrell & Shapiro 2010), and a merger simulation with a logit
// calibrated to the observed margins (Werden & Froeb 1994).
func RunScreen(p *data.Products, opt ScreenOptions) (*Screen, error) {
	own, err := resolveOwners(p, opt.Scenario)
	if err != nil {
		return nil, err
	}
	pre, post, merging, names := own.pre, own.post, own.merging, own.names
	out := &Screen{Schema: ScreenSchema, Combine: opt.Combine, Parties: own.parties, Caution: Caution}
	if opt.Ownership != nil {
		out.Ownership = opt.Ownership.File
	}
	if opt.Margin == nil {
		out.Notes = append(out.Notes, "no margins given: UPP, GUPPI and the calibrated logit need --margin")
	}
	for _, m := range p.Markets {
		J := m.Len()
		s := p.Share[m.Start:m.End]
		oPre := localOwners(pre[m.Start:m.End])
		oPost := localOwners(post[m.Start:m.End])
		hPre, hPost := HHI(s, oPre), HHI(s, oPost)
		sm := ScreenMarket{Market: m.ID, HHIPre: hPre, HHIPostFixed: hPost, DeltaHHIFixed: hPost - hPre,
			MergedShare: mergedShare(s, oPost, merging[m.Start:m.End])}
		sm.FlagHHI = PresumedByHHI(sm.HHIPostFixed, sm.DeltaHHIFixed)
		sm.FlagShare = PresumedByShare(sm.DeltaHHIFixed, sm.MergedShare)
		var logitPct []float64
		if opt.Margin != nil {
			logitPct, sm.LogitAlpha = calibratedLogit(p, m, opt.Margin[m.Start:m.End], oPre, oPost)
		}
		for j := 0; j < J; j++ {
			n := m.Start + j
			if !merging[n] {
				continue
			}
			sp := ScreenProduct{Market: m.ID, Product: p.Product[n], Firm: names[pre[n]], Share: s[j]}
			for k := 0; k < J; k++ {
				kn := m.Start + k
				if k == j || post[kn] != post[n] || pre[kn] == pre[n] {
					continue
				}
				d := s[k] / (1 - s[j])
				if opt.Diversion != nil {
					v, ok := opt.Diversion[[3]string{m.ID, p.Product[n], p.Product[kn]}]
					if !ok {
						return nil, fmt.Errorf("%w from %q to %q in market %q", ErrMissingDiversion, p.Product[n], p.Product[kn], m.ID)
					}
					d = v
				}
				sp.DiversionToPartner += d
				if opt.Margin != nil {
					mk := opt.Margin[kn] * p.Price[kn]
					sp.UPP += d * mk
					sp.GUPPI += d * mk / p.Price[n]
				}
			}
			if opt.Margin != nil {
				c := p.Price[n] * (1 - opt.Margin[n])
				sp.UPP -= opt.Efficiency * c
				sp.LogitPriceChangePct = logitPct[j]
			}
			out.Products = append(out.Products, sp)
		}
		out.Markets = append(out.Markets, sm)
	}
	return out, nil
}

// calibratedLogit sets α from the logit markup condition of each product
// with an observed margin, m_j p_j = 1/(α(1 − S_f(j))), averaged with share
// weights, takes δ_j = ln s_j − ln s_0 and costs from the logit markups at
// α, and solves the post-merger logit equilibrium. It returns the percentage
// price changes and α.
func calibratedLogit(p *data.Products, m data.Market, margin []float64, oPre, oPost []int) ([]float64, float64) {
	J := m.Len()
	s := p.Share[m.Start:m.End]
	price := p.Price[m.Start:m.End]
	firmShare := map[int]float64{}
	for j := range s {
		firmShare[oPre[j]] += s[j]
	}
	num, den := 0.0, 0.0
	for j := range s {
		if margin[j] > 0 {
			num += s[j] / (margin[j] * price[j] * (1 - firmShare[oPre[j]]))
			den += s[j]
		}
	}
	alpha := num / den
	s0 := p.OutsideShare(m)
	delta := make([]float64, J)
	for j := range delta {
		delta[j] = math.Log(s[j]) - math.Log(s0)
	}
	mk := logitMarket(price, delta, -alpha)
	eta, err := mk.Markups(oPre)
	out := make([]float64, J)
	if err != nil {
		return out, alpha
	}
	c := make([]float64, J)
	for j := range c {
		c[j] = price[j] - eta[j]
	}
	sol := Equilibrium(mk, c, oPost, price, 1e-12)
	for j := range out {
		out[j] = 100 * (sol.Price[j]/price[j] - 1)
	}
	return out, alpha
}

// logitMarket returns the plain logit demand of one market with mean
// utilities delta at prices price and price coefficient beta: one
// representative consumer of weight 1 and no random coefficients.
func logitMarket(price, delta []float64, beta float64) *demand.Market {
	J := len(price)
	p := &contraction.Problem{LogShare: make([]float64, J), Products: []contraction.Span{{Start: 0, End: J}},
		Agents: []contraction.Span{{Start: 0, End: 1}}, Weight: []float64{1}, PriceCol: -1}
	pr := &demand.Pricing{Problem: p, BetaPrice: beta, Price0: price, Delta0: delta}
	mk := pr.NewMarket()
	mk.Bind(0)
	return mk
}
