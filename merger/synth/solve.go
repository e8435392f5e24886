package synth

import (
	"math"
	"math/rand/v2"
	"strconv"

	"rcdemand/demand"
	"rcdemand/merger"
)

// Redraw records a market whose data come from the data set of another
// seed, because the market drawn with the run's seed has no equilibrium.
type Redraw struct {
	Market string `json:"market"`
	Seed   uint64 `json:"seed"`
}

// source returns the random source of a run with seed.
func source(seed uint64) *rand.Rand { return rand.New(rand.NewPCG(seed, 0x5717)) }

// solve finds every market's Bertrand–Nash prices, markets in parallel. A
// market without an equilibrium is redrawn — replaced by the same market of
// the data set drawn with seed+1, then seed+2, … — up to retries times;
// what still has none is dropped (g.keep) and listed in out.Dropped.
func (g *generator) solve(out *Synthetic, seed uint64, retries int, stop <-chan struct{}) error {
	sols := make([]merger.Solution, g.T)
	pr := g.pricing()
	failed := g.solveMarkets(pr, nil, sols)
	redrawn := map[int]uint64{}
	for r := 1; r <= retries && len(failed) > 0; r++ {
		other := *g
		if err := other.draw(source(seed+uint64(r)), stop); err != nil {
			return err
		}
		for _, t := range failed {
			g.copyMarket(&other, t)
			redrawn[t] = seed + uint64(r)
		}
		pr = g.pricing()
		failed = g.solveMarkets(pr, failed, sols)
	}
	g.keep = make([]bool, g.T)
	for t, sol := range sols {
		if !sol.Converged {
			out.Dropped = append(out.Dropped, sol.Failure(strconv.Itoa(t+1)))
			continue
		}
		g.keep[t] = true
		if s, ok := redrawn[t]; ok {
			out.Redrawn = append(out.Redrawn, Redraw{Market: strconv.Itoa(t + 1), Seed: s})
		}
		out.MaxFOC = math.Max(out.MaxFOC, sol.Residual)
		out.MaxIter = max(out.MaxIter, sol.Iterations)
		for j := 0; j < g.J; j++ {
			n := t*g.J + j
			g.prices[n] = sol.Price[j]
			g.shares[n] = sol.Shares[j]
			g.markup[n] = sol.Price[j] - g.mc[n]
			g.delta[n] = pr.Delta0[n] + pr.BetaPrice*(sol.Price[j]-pr.Price0[n])
		}
	}
	out.Markets = g.T - len(out.Dropped)
	if out.Markets == 0 {
		return g.tr.errorf("no market of this design has a Bertrand–Nash equilibrium (market 1: %s)", out.Dropped[0].Reason)
	}
	return nil
}

// solveMarkets solves markets ts (indices; nil for all) into sols and
// returns those without an equilibrium.
func (g *generator) solveMarkets(pr *demand.Pricing, ts []int, sols []merger.Solution) []int {
	return merger.SolveMarkets(pr, ts, 1e-13, func(t int) ([]float64, []int) {
		lo, hi := t*g.J, (t+1)*g.J
		return g.mc[lo:hi], g.owner[lo:hi]
	}, sols)
}

// copyMarket replaces market t's drawn values (characteristics, cost
// shifters, shocks, costs, agents' tastes and demographics) by those of
// other, a generator of the same design drawn with another seed.
func (g *generator) copyMarket(other *generator, t int) {
	lo, hi := t*g.J, (t+1)*g.J
	for _, c := range g.chars {
		copy(g.charVals[c][lo:hi], other.charVals[c][lo:hi])
	}
	for _, z := range g.shifters {
		copy(g.shiftVal[z][lo:hi], other.shiftVal[z][lo:hi])
	}
	for _, b := range [][2][]float64{{g.xi, other.xi}, {g.omega, other.omega}, {g.mc, other.mc}} {
		copy(b[0][lo:hi], b[1][lo:hi])
	}
	alo, ahi := t*g.I, (t+1)*g.I
	for c, v := range g.agNu {
		copy(v[alo:ahi], other.agNu[c][alo:ahi])
	}
	for d, v := range g.agDem {
		copy(v[alo:ahi], other.agDem[d][alo:ahi])
	}
}

// kept returns the rows of x (per rows per market) of the markets kept.
func kept[T any](g *generator, x []T, per int) []T {
	if len(g.keep) == 0 {
		return x
	}
	out := make([]T, 0, len(x))
	for t, ok := range g.keep {
		if ok {
			out = append(out, x[t*per:(t+1)*per]...)
		}
	}
	return out
}
