package study

import (
	"fmt"
	"math"
	"math/rand/v2"

	"rcdemand/contraction"
	"rcdemand/data"
	"rcdemand/demand"
	"rcdemand/merger"
)

// design is the estimated model and the user's data a study draws from.
type design struct {
	fit   *demand.Fitted
	names []string
	truth []float64
	kinds []paramKind
	start []float64 // θ̂ in the model's order: the start of each re-estimation

	products, agents *data.Table // the user's tables (agents nil when generated)
	owner            []int
	cost             []float64 // recovered costs ĉ
	costFit, omega   []float64 // wγ̂ and ω̂ with a cost equation
	logCost          bool
	set              demand.Settings
}

func newDesign(res *demand.Results, fit *demand.Fitted) (*design, error) {
	m := fit.Model
	d := &design{fit: fit, truth: res.Estimates(), start: fit.Theta, products: m.Products.Table}
	if m.Agents != nil {
		d.agents = m.Agents.Table
	}
	d.kinds, d.names = parameters(res)
	var err error
	if d.owner, err = m.Firms(); err != nil {
		return nil, err
	}
	if d.cost, _, err = fit.Costs(); err != nil {
		return nil, err
	}
	gamma := make([]float64, len(res.Gamma))
	for i, c := range res.Gamma {
		gamma[i] = c.Value
	}
	fitted, omega, form, ok, err := fit.CostEquation(gamma)
	if err != nil {
		return nil, err
	}
	if ok {
		d.costFit, d.omega, d.logCost = fitted, omega, form == "log"
	}
	d.set = demand.SettingsOf(m.Spec)
	return d, nil
}

// draw is one replication's simulated design before estimation.
type draw struct {
	rows     []int    // products rows of the original table, market by market
	agents   []int    // agent rows of the original table
	markets  []string // the new market ids, one per selected market
	rowIDs   []string // the new market id of each products row
	agentIDs []string // the new market id of each agent row
	sel      []int    // the original market of each new market
	sign     []float64
}

// newDraw selects the markets (all of them, or K·T drawn with replacement)
// and the signs v_t from the replication's own stream.
func (d *design) newDraw(rng *rand.Rand, scale int) *draw {
	mk := d.fit.Model.Products.Markets
	T := len(mk)
	dr := &draw{}
	for k := 0; k < scale*T; k++ {
		t := k
		if scale > 1 {
			t = rng.IntN(T)
		}
		dr.sel = append(dr.sel, t)
		id := mk[t].ID
		if scale > 1 {
			id = fmt.Sprintf("%s#%d", id, k+1)
		}
		dr.markets = append(dr.markets, id)
		for r := mk[t].Start; r < mk[t].End; r++ {
			dr.rows, dr.rowIDs = append(dr.rows, r), append(dr.rowIDs, id)
		}
		if d.agents != nil {
			am := d.fit.Model.Agents.Markets[t]
			for r := am.Start; r < am.End; r++ {
				dr.agents, dr.agentIDs = append(dr.agents, r), append(dr.agentIDs, id)
			}
		}
	}
	for range dr.sel {
		dr.sign = append(dr.sign, float64(2*rng.IntN(2)-1))
	}
	return dr
}

// pricing returns the true model on the drawn design: the estimated tastes
// and agents of the selected markets, δ⁰ = δ̂ + (v − 1)ξ̂ at the observed
// prices, and the costs c*.
func (d *design) pricing(dr *draw) (*demand.Pricing, []float64) {
	m := d.fit.Model
	p0 := m.Problem
	pr := &contraction.Problem{K2: p0.K2, Params: p0.Params, PriceCol: p0.PriceCol, Family: p0.Family,
		LogNormal: p0.LogNormal, Vars: make([][]float64, len(p0.Vars))}
	if rf, ok := p0.Family.(contraction.RowFamily); ok {
		pr.Family = rf.Rows(dr.rows)
	}
	price, delta, cost := make([]float64, 0, len(dr.rows)), make([]float64, 0, len(dr.rows)), make([]float64, 0, len(dr.rows))
	for k, t := range dr.sel {
		span, ag := p0.Products[t], p0.Agents[t]
		start := len(price)
		for r := span.Start; r < span.End; r++ {
			v := dr.sign[k]
			price = append(price, m.Products.Price[r])
			delta = append(delta, d.fit.Delta[r]+(v-1)*d.fit.Xi[r])
			pr.X2 = append(pr.X2, p0.X2[r*p0.K2:(r+1)*p0.K2]...)
			pr.LogShare = append(pr.LogShare, p0.LogShare[r])
			c := d.cost[r]
			if d.omega != nil {
				c = d.costFit[r] + v*d.omega[r]
				if d.logCost {
					c = math.Exp(c)
				}
			}
			cost = append(cost, c)
		}
		pr.Products = append(pr.Products, contraction.Span{Start: start, End: len(price)})
		a0 := len(pr.Weight)
		pr.Weight = append(pr.Weight, p0.Weight[ag.Start:ag.End]...)
		for q := range p0.Vars {
			pr.Vars[q] = append(pr.Vars[q], p0.Vars[q][ag.Start:ag.End]...)
		}
		pr.Agents = append(pr.Agents, contraction.Span{Start: a0, End: len(pr.Weight)})
	}
	return &demand.Pricing{Problem: pr, Theta: m.ShareTheta(d.fit.Theta), BetaPrice: d.fit.Pricing().BetaPrice,
		Price0: price, Delta0: delta}, cost
}

// replicate simulates one data set and estimates it, filling rep.
func (d *design) replicate(rep *Replication, seed uint64, stop <-chan struct{}) {
	rng := rand.New(rand.NewPCG(seed, uint64(rep.Index)<<16|uint64(rep.Scale)))
	dr := d.newDraw(rng, rep.Scale)
	pr, cost := d.pricing(dr)
	price, share, dropped := d.equilibrium(pr, dr, cost)
	if len(dropped) == len(dr.sel) {
		rep.Failure = fmt.Sprintf("equilibrium: no market has one (market %q: %s)", dropped[0].Market, dropped[0].Reason)
		return
	}
	for _, f := range dropped {
		rep.WithoutEquilibrium = append(rep.WithoutEquilibrium, f.Market)
	}
	m := d.fit.Model
	cols := m.Spec.Columns
	prod := d.products.Select(dr.rows).WithFloats(map[string][]float64{cols.Share: share, cols.Price: price})
	var agents *data.Table
	if d.agents != nil {
		agents = d.agents.Select(dr.agents)
	}
	if rep.Scale > 1 {
		prod, agents = relabel(prod, agents, dr, cols.Market, m.Spec.Agents.Market)
	}
	sim, err := demand.LoadTables(m.Spec, prod, agents)
	if err != nil {
		rep.Failure = "estimation: " + err.Error()
		return
	}
	res, err := demand.EstimateFrom(sim, d.start, d.set, demand.Monitor{Stop: stop})
	if err != nil {
		rep.Failure = "estimation: " + err.Error()
		return
	}
	rep.Converged = res.Convergence.Converged
	rep.Estimates = res.Estimates()
	for _, e := range res.List() {
		rep.SE = append(rep.SE, e.SE)
	}
	rep.J, rep.JPValue = res.GMM.J, res.GMM.JPValue
	if !rep.Converged {
		rep.Failure = "not converged: " + res.Convergence.Message
	}
}

// equilibrium solves every drawn market's Bertrand–Nash prices, markets in
// parallel, and returns prices and shares row by row. A market without an
// equilibrium (see merger.Equilibrium) is left out of the draw — its rows
// and agents removed from dr — and returned in dropped, in market order.
func (d *design) equilibrium(pr *demand.Pricing, dr *draw, cost []float64) (price, share []float64, dropped []merger.FailedMarket) {
	T := len(dr.sel)
	sols := make([]merger.Solution, T)
	spans := pr.Problem.Products
	merger.SolveMarkets(pr, nil, 1e-12, func(t int) ([]float64, []int) {
		sp := spans[t]
		owner := make([]int, sp.Len())
		for j := range owner {
			owner[j] = d.owner[dr.rows[sp.Start+j]]
		}
		return cost[sp.Start:sp.End], owner
	}, sols)
	keep := make([]bool, T)
	for t, sol := range sols {
		if !sol.Converged {
			dropped = append(dropped, sol.Failure(dr.markets[t]))
			continue
		}
		keep[t] = true
		price = append(price, sol.Price...)
		share = append(share, sol.Shares...)
	}
	if len(dropped) > 0 {
		dr.keepOnly(keep, spans, pr.Problem.Agents, d.agents != nil)
	}
	return price, share, dropped
}

// keepOnly removes the markets t with !keep[t] from the draw: products rows
// by the spans of the drawn design, agent rows by agentSpans when the
// user's agents are drawn.
func (dr *draw) keepOnly(keep []bool, spans, agentSpans []contraction.Span, agents bool) {
	var out draw
	for t, ok := range keep {
		if !ok {
			continue
		}
		out.sel, out.sign, out.markets = append(out.sel, dr.sel[t]), append(out.sign, dr.sign[t]), append(out.markets, dr.markets[t])
		sp := spans[t]
		out.rows, out.rowIDs = append(out.rows, dr.rows[sp.Start:sp.End]...), append(out.rowIDs, dr.rowIDs[sp.Start:sp.End]...)
		if agents {
			ag := agentSpans[t]
			out.agents, out.agentIDs = append(out.agents, dr.agents[ag.Start:ag.End]...), append(out.agentIDs, dr.agentIDs[ag.Start:ag.End]...)
		}
	}
	*dr = out
}

// relabel gives resampled markets their new ids in both tables.
func relabel(prod, agents *data.Table, dr *draw, marketCol, agentMarketCol string) (*data.Table, *data.Table) {
	prod = prod.WithStrings(map[string][]string{marketCol: dr.rowIDs})
	if agents != nil {
		agents = agents.WithStrings(map[string][]string{agentMarketCol: dr.agentIDs})
	}
	return prod, agents
}
