package synth

import (
	"bytes"
	"fmt"
	"io"
	"maps"
	"math"
	"math/rand/v2"
	"path/filepath"
	"slices"

	"github.com/BurntSushi/toml"

	"rcdemand/contraction"
	"rcdemand/data"
	"rcdemand/demand"
	"rcdemand/merger"
)

// Synthetic is a generated data set.
type Synthetic struct {
	Products *data.Frame
	Agents   *data.Frame
	Truth    *data.Frame // per row: xi, omega, mc, markup, delta
	MaxFOC   float64
	MaxIter  int
	// Markets is the number of markets in the tables: the design's, less
	// Dropped, the markets without an equilibrium (in market order, with
	// the solver's residual and reason). Redrawn lists the markets whose
	// data come from the data set of another seed (Options.Retries).
	Markets int
	Dropped []merger.FailedMarket
	Redrawn []Redraw
	// Process is the truth the data were drawn with, defaults filled in:
	// under a full covariance every entry of L, and the taste standard
	// deviations √diag(LLᵀ) in Sigma. Write records it in truth.json.
	Process *Truth
}

// Options are the choices of SynthesizeWith.
type Options struct {
	// Retries is how many times a market without an equilibrium is
	// redrawn (with seed+1, seed+2, …) before it is dropped; 0 drops it.
	Retries int
	// Stop, when closed, ends the work early with merger.ErrStopped.
	Stop <-chan struct{}
}

// Synthesize is SynthesizeWith without retries: markets without an
// equilibrium are dropped.
func Synthesize(spec *demand.Spec, tr *Truth, seed uint64, stop <-chan struct{}) (*Synthetic, error) {
	return SynthesizeWith(spec, tr, seed, Options{Stop: stop})
}

// SynthesizeWith draws characteristics, cost shifters, demand and cost
// shocks and agents, and solves each market for Bertrand–Nash prices under
// the true model of spec and truth. Column names follow the spec. A market
// whose prices the solver cannot find (merger.Equilibrium: no stage
// converges, or the prices found are not a maximum of every firm's profit)
// is redrawn up to opt.Retries times and otherwise left out of the tables;
// it is an error only when no market is left.
func SynthesizeWith(spec *demand.Spec, tr *Truth, seed uint64, opt Options) (*Synthetic, error) {
	g, err := newGenerator(spec, tr)
	if err != nil {
		return nil, err
	}
	g.seed = seed
	if err := g.draw(source(seed), opt.Stop); err != nil {
		return nil, err
	}
	out := &Synthetic{Process: g.process()}
	if err := g.solve(out, seed, opt.Retries, opt.Stop); err != nil {
		return nil, err
	}
	g.frames(out)
	return out, nil
}

// generator holds a design while it is drawn and solved.
type generator struct {
	spec               *demand.Spec
	tr                 *Truth
	J, T, I, N         int
	chars, shifters    []string
	x2Names            []string
	priceX2            int
	mkt, prod, firm    []string
	owner              []int
	charVals, shiftVal map[string][]float64
	xi, omega, mc      []float64
	agMkt              []string
	agW                []float64
	agNu, agDem        map[string][]float64
	demShift           map[string][]float64 // per market, added to the demographics' mean
	size               []float64            // consumers per market, or nil
	seed               uint64
	prices, shares     []float64
	markup, delta      []float64
	keep               []bool                        // per market: in the tables (set by solve)
	chol               map[string]map[string]float64 // the true L under a full covariance
}

// newGenerator checks the truth against the spec and lays out the columns.
func newGenerator(spec *demand.Spec, tr *Truth) (*generator, error) {
	if err := tr.check(); err != nil {
		return nil, err
	}
	d := spec.Demand
	price := spec.Columns.Price
	g := &generator{spec: spec, tr: tr, J: tr.Products, T: tr.Markets, I: tr.Agents, N: tr.Markets * tr.Products}
	// Columns to draw: every characteristic of X1 or X2 but the constant and price.
	for _, c := range append(slices.Clone(d.Linear), d.Random...) {
		if c != "1" && c != price && !slices.Contains(g.chars, c) {
			g.chars = append(g.chars, c)
		}
	}
	if err := g.checkTables(); err != nil {
		return nil, err
	}
	for _, c := range g.chars {
		if _, ok := tr.Characteristics[c]; !ok {
			return nil, tr.errorf("[characteristics] has no distribution for %q", c)
		}
	}
	for _, c := range d.Linear {
		if _, ok := tr.Beta[c]; !ok {
			return nil, tr.errorf("[beta] has no value for linear column %q", c)
		}
	}
	for _, c := range d.Random {
		if _, ok := tr.Sigma[c]; !ok && !spec.FullCovariance() {
			return nil, tr.errorf("[sigma] has no value for random column %q", c)
		}
	}
	if err := g.checkFamily(); err != nil {
		return nil, err
	}
	for _, dm := range d.Demographics {
		if _, ok := tr.Demographics[dm]; !ok {
			return nil, tr.errorf("[demographics] has no distribution for %q", dm)
		}
	}
	g.shifters = sortedKeys(tr.Cost.Shifters)
	for _, z := range spec.Instruments.Excluded {
		if !slices.Contains(g.shifters, z) {
			return nil, fmt.Errorf("%s: [instruments] excluded %q is not a cost shifter of %s (synth writes %v; use [instruments] generate for built instruments)",
				spec.File, z, tr.name(), g.shifters)
		}
	}
	// X2 layout as the estimator builds it: random columns, then interaction-only columns.
	g.x2Names = slices.Clone(d.Random)
	for _, c := range sortedKeys(tr.Pi) {
		if !slices.Contains(g.x2Names, c) {
			g.x2Names = append(g.x2Names, c)
		}
	}
	if spec.LogNormalPrice() && !slices.Contains(g.x2Names, price) {
		g.x2Names = append(g.x2Names, price)
	}
	g.priceX2 = slices.Index(g.x2Names, price)
	if err := g.checkMarkets(); err != nil {
		return nil, err
	}
	return g, nil
}

// draw draws every random quantity in a fixed order: market by market, each
// product's characteristics, cost shifters and shocks, then each agent's
// tastes and demographics.
func (g *generator) draw(rng *rand.Rand, stop <-chan struct{}) error {
	tr, d := g.tr, g.spec.Demand
	g.alloc()
	rho := tr.Shocks.Correlation
	costChars := sortedKeys(tr.Cost.Characteristics)
	g.drawMarkets()
	for t := 0; t < g.T; t++ {
		select {
		case <-stop:
			return merger.ErrStopped
		default:
		}
		id := fmt.Sprint(t + 1)
		for j := 0; j < g.J; j++ {
			n := t*g.J + j
			g.mkt[n], g.prod[n] = id, g.productName(j)
			g.owner[n] = j % tr.Firms
			g.firm[n] = g.firmName(g.owner[n])
			for _, c := range g.chars {
				md := tr.Characteristics[c]
				g.charVals[c][n] = md[0] + md[1]*rng.NormFloat64()
			}
			for _, z := range g.shifters {
				g.shiftVal[z][n] = rng.NormFloat64()
			}
			e1, e2 := rng.NormFloat64(), rng.NormFloat64()
			g.xi[n] = tr.Shocks.XiSD * e1
			g.omega[n] = tr.Shocks.OmegaSD * (rho*e1 + math.Sqrt(1-rho*rho)*e2)
			lc := tr.Cost.Constant + g.omega[n]
			for _, z := range g.shifters {
				lc += tr.Cost.Shifters[z] * g.shiftVal[z][n]
			}
			for _, c := range costChars {
				lc += tr.Cost.Characteristics[c] * g.charVals[c][n]
			}
			g.mc[n] = math.Exp(lc)
		}
		for i := 0; i < g.I; i++ {
			a := t*g.I + i
			g.agMkt[a], g.agW[a] = id, 1/float64(g.I)
			for _, c := range d.Random {
				g.agNu[c][a] = rng.NormFloat64()
			}
			for _, dm := range d.Demographics {
				md := tr.Demographics[dm]
				g.agDem[dm][a] = md[0] + g.demShift[dm][t] + md[1]*rng.NormFloat64()
			}
		}
	}
	return nil
}

func (g *generator) alloc() {
	N, A := g.N, g.T*g.I
	g.mkt, g.prod, g.firm, g.owner = make([]string, N), make([]string, N), make([]string, N), make([]int, N)
	g.charVals, g.shiftVal = map[string][]float64{}, map[string][]float64{}
	for _, c := range g.chars {
		g.charVals[c] = make([]float64, N)
	}
	for _, z := range g.shifters {
		g.shiftVal[z] = make([]float64, N)
	}
	for _, b := range []*[]float64{&g.xi, &g.omega, &g.mc, &g.prices, &g.shares, &g.markup, &g.delta} {
		*b = make([]float64, N)
	}
	g.agMkt, g.agW = make([]string, A), make([]float64, A)
	g.agNu, g.agDem = map[string][]float64{}, map[string][]float64{}
	for _, c := range g.spec.Demand.Random {
		g.agNu[c] = make([]float64, A)
	}
	for _, dm := range g.spec.Demand.Demographics {
		g.agDem[dm] = make([]float64, A)
	}
}

func (g *generator) firmName(f int) string {
	if f < len(g.tr.FirmNames) {
		return g.tr.FirmNames[f]
	}
	return fmt.Sprintf("F%d", f+1)
}

func (g *generator) productName(j int) string {
	if j < len(g.tr.ProductNames) {
		return g.tr.ProductNames[j]
	}
	return fmt.Sprintf("P%02d", j+1)
}

// pricing builds the true model at the starting prices p⁰ = 1.5·c: the share
// model of all markets (tastes σν + ΠD on the X2 columns) and δ⁰.
func (g *generator) pricing() *demand.Pricing {
	tr, d := g.tr, g.spec.Demand
	price := g.spec.Columns.Price
	K2 := len(g.x2Names)
	p := &contraction.Problem{K2: K2, X2: make([]float64, g.N*K2), LogShare: make([]float64, g.N),
		Weight: g.agW, PriceCol: g.priceX2}
	theta := g.tasteParams(p)
	demVar := map[string]int{}
	for _, dm := range d.Demographics {
		demVar[dm] = len(p.Vars)
		p.Vars = append(p.Vars, g.agDem[dm])
	}
	for k, c := range g.x2Names {
		for _, dm := range sortedKeys(tr.Pi[c]) {
			p.Params = append(p.Params, contraction.Param{Col: k, Var: demVar[dm]})
			theta = append(theta, tr.Pi[c][dm])
		}
	}
	theta = append(theta, g.nesting(p)...)
	p0, delta0 := make([]float64, g.N), make([]float64, g.N)
	for t := 0; t < g.T; t++ {
		p.Products = append(p.Products, contraction.Span{Start: t * g.J, End: (t + 1) * g.J})
		p.Agents = append(p.Agents, contraction.Span{Start: t * g.I, End: (t + 1) * g.I})
	}
	value := func(c string, n int) float64 {
		switch c {
		case "1":
			return 1
		case price:
			return p0[n]
		}
		return g.charVals[c][n]
	}
	for n := range p0 {
		p0[n] = 1.5 * g.mc[n]
		delta0[n] = g.xi[n]
		for _, c := range d.Linear {
			if c != price || !g.spec.LogNormalPrice() {
				delta0[n] += tr.Beta[c] * value(c, n)
			}
		}
		for k, c := range g.x2Names {
			p.X2[n*K2+k] = value(c, n)
		}
	}
	bp := tr.Beta[price]
	if g.spec.LogNormalPrice() {
		bp = 0 // price is in the tastes only
	}
	return &demand.Pricing{Problem: p, Theta: theta, BetaPrice: bp, Price0: p0, Delta0: delta0}
}

// frames writes the drawn data into the output tables, and the taste
// columns into the spec so it can be written beside the data.
func (g *generator) frames(out *Synthetic) {
	spec, d := g.spec, g.spec.Demand
	tasteCols := map[string]string{}
	for _, c := range d.Random {
		name := spec.Agents.Tastes[c]
		if name == "" {
			name = "nu_" + safeName(c)
		}
		tasteCols[c] = name
	}
	rows := func(x []float64) []float64 { return kept(g, x, g.J) }
	ids := func(x []string) []string { return kept(g, x, g.J) }
	pf := &data.Frame{}
	pf.Add(spec.Columns.Market, ids(g.mkt))
	pf.Add(spec.Columns.Product, ids(g.prod))
	pf.Add(spec.Columns.Firm, ids(g.firm))
	pf.Add(spec.Columns.Share, rows(g.shares))
	pf.Add(spec.Columns.Price, rows(g.prices))
	if spec.Nested() {
		pf.Add(spec.Demand.Nests, ids(g.nestNames()))
	}
	for _, c := range g.chars {
		pf.Add(c, rows(g.charVals[c]))
	}
	for _, z := range g.shifters {
		pf.Add(z, rows(g.shiftVal[z]))
	}
	if g.size != nil {
		pf.Add(spec.Columns.MarketSize, rows(g.marketSizeColumn()))
	}
	out.Products = pf
	agents := func(x []float64) []float64 { return kept(g, x, g.I) }
	af := &data.Frame{}
	af.Add(spec.Agents.Market, kept(g, g.agMkt, g.I))
	af.Add(spec.Agents.Weight, agents(g.agW))
	for _, c := range d.Random {
		af.Add(tasteCols[c], agents(g.agNu[c]))
	}
	for _, dm := range d.Demographics {
		af.Add(dm, agents(g.agDem[dm]))
	}
	out.Agents = af
	tf := &data.Frame{}
	tf.Add("market", ids(g.mkt))
	tf.Add("product", ids(g.prod))
	for _, c := range []struct {
		name string
		x    []float64
	}{{"xi", g.xi}, {"omega", g.omega}, {"mc", g.mc}, {"markup", g.markup}, {"delta", g.delta}} {
		tf.Add(c.name, rows(c.x))
	}
	out.Truth = tf
	spec.Agents.Tastes = tasteCols
}

func safeName(c string) string {
	if c == "1" {
		return "const"
	}
	return c
}

// Write writes the synthetic tables (products, agents, truth_products, in
// format "csv" or "parquet"), a copy of spec pointing at them, and truth.json
// to dir (created if need be, by data.WriteAtomic). inputs are refused as
// output paths.
func (syn *Synthetic) Write(dir, format string, spec *demand.Spec, tr *Truth, seed uint64, inputs []string) error {
	ext := "." + format
	for name, f := range map[string]*data.Frame{"products": syn.Products, "agents": syn.Agents, "truth_products": syn.Truth} {
		if err := data.WriteFrame(filepath.Join(dir, name+ext), inputs, f); err != nil {
			return err
		}
	}
	out := *spec
	out.Data.Products = "products" + ext
	out.Data.Agents = "agents" + ext
	var buf bytes.Buffer
	buf.WriteString("# written by rcdemand synth: the spec of the model that generated products" + ext + "\n")
	if err := toml.NewEncoder(&buf).Encode(out); err != nil {
		return err
	}
	if err := data.WriteAtomic(filepath.Join(dir, "spec.toml"), inputs, func(w io.Writer) error { _, err := w.Write(buf.Bytes()); return err }); err != nil {
		return err
	}
	dropped, redrawn := syn.Dropped, syn.Redrawn
	if dropped == nil {
		dropped = []merger.FailedMarket{}
	}
	if redrawn == nil {
		redrawn = []Redraw{}
	}
	if syn.Process != nil {
		tr = syn.Process
	}
	record := map[string]any{"schema": "rcdemand.truth.v2", "seed": seed, "truth": tr,
		"equilibrium":     map[string]any{"max_foc_residual": syn.MaxFOC, "max_iterations": syn.MaxIter},
		"markets_written": syn.Markets, "dropped_markets": dropped, "redrawn_markets": redrawn}
	return data.WriteJSON(filepath.Join(dir, "truth.json"), inputs, record)
}

// sortedKeys returns the keys of a map in order, so map iteration order never
// leaks into results.
func sortedKeys[V any](m map[string]V) []string { return slices.Sorted(maps.Keys(m)) }
