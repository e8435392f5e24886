package demand

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
	"rcdemand/data"
	"rcdemand/instruments"
)

// Param describes one element of θ2.
type Param struct {
	Kind        string // "sigma" or "pi"
	Column      string // the characteristic it multiplies
	Demographic string // for "pi"
}

// Name is the parameter's label, e.g. "sigma[price]" or "pi[price×income]".
func (p Param) Name() string {
	if p.Kind == "pi" {
		return "pi[" + p.Column + "×" + p.Demographic + "]"
	}
	return "sigma[" + p.Column + "]"
}

// Model is a spec bound to its data: the matrices of the estimator.
type Model struct {
	Spec     *Spec
	Products *data.Products
	Agents   *data.Agents // nil when the agents come from a generated rule

	X1      *mat.Dense // N×K1 linear characteristics
	X1Names []string
	Z       *mat.Dense // N×M instruments
	ZNames  []string
	X2Names []string // columns with random coefficients or interactions
	Params  []Param
	Problem *contraction.Problem

	PriceX1  int // column of price in X1, −1 when absent
	PriceX2  int // column of price in X2, −1 when price has no random part
	Clusters []int
	Notes    []string // what the assembly chose or dropped, for the user

	absorb *demeaner
}

// Inputs returns the data files the model reads.
func (m *Model) Inputs() []string {
	in := []string{m.Spec.File, m.Products.File}
	if m.Agents != nil {
		in = append(in, m.Agents.File)
	}
	return in
}

// N returns the number of product-market observations.
func (m *Model) N() int { return m.Products.Len() }

// Load reads the data of a spec and assembles the model.
func Load(spec *Spec) (*Model, error) {
	d := &spec.Demand
	numeric := []string{}
	add := func(c string) {
		if c != "1" && !contains(numeric, c) {
			numeric = append(numeric, c)
		}
	}
	for _, c := range d.Linear {
		add(c)
	}
	for _, c := range d.Random {
		add(c)
	}
	for c := range d.Interactions {
		add(c)
	}
	for _, c := range spec.Instruments.Excluded {
		add(c)
	}
	cols := data.Columns{Market: spec.Columns.Market, Product: spec.Columns.Product,
		Firm: spec.Columns.Firm, Share: spec.Columns.Share, Price: spec.Columns.Price}
	prod, err := data.LoadProducts(spec.Path(spec.Data.Products), cols, numeric)
	if err != nil {
		return nil, err
	}
	return Assemble(spec, prod)
}

// Assemble binds a spec to a products table already loaded (and reads the
// agents table the spec names).
func Assemble(spec *Spec, prod *data.Products) (*Model, error) {
	d := &spec.Demand
	m := &Model{Spec: spec, Products: prod, PriceX1: -1, PriceX2: -1}
	n := prod.Len()
	column := func(c string) ([]float64, error) {
		if c == "1" {
			v := make([]float64, n)
			for i := range v {
				v[i] = 1
			}
			return v, nil
		}
		return prod.Floats(c)
	}
	// Fixed effects.
	if len(d.Absorb) > 0 {
		var groups [][]int
		for _, c := range d.Absorb {
			ids, err := prod.Strings(c)
			if err != nil {
				return nil, err
			}
			groups = append(groups, indexOf(ids))
		}
		m.absorb = &demeaner{groups: groups}
	}
	// X1.
	var x1cols [][]float64
	for _, c := range d.Linear {
		if c == "1" && m.absorb != nil {
			m.Notes = append(m.Notes, `the constant "1" is absorbed by the fixed effects and dropped from X1`)
			continue
		}
		v, err := column(c)
		if err != nil {
			return nil, err
		}
		if c == spec.Columns.Price {
			m.PriceX1 = len(m.X1Names)
		}
		m.X1Names = append(m.X1Names, c)
		x1cols = append(x1cols, v)
	}
	// Z = exogenous X1 columns and excluded instruments.
	var zcols [][]float64
	for k, c := range m.X1Names {
		if k != m.PriceX1 {
			m.ZNames = append(m.ZNames, c)
			zcols = append(zcols, x1cols[k])
		}
	}
	for _, c := range spec.Instruments.Excluded {
		if contains(m.ZNames, c) {
			return nil, fmt.Errorf("%s: instrument %q is already an exogenous linear column", spec.File, c)
		}
		v, err := column(c)
		if err != nil {
			return nil, err
		}
		m.ZNames = append(m.ZNames, c)
		zcols = append(zcols, v)
	}
	if gen := withoutOptimal(spec.Instruments.Generate); len(gen) > 0 {
		var xNames []string
		var xs [][]float64
		for k, c := range m.X1Names {
			if k != m.PriceX1 && c != "1" {
				xNames = append(xNames, c)
				xs = append(xs, x1cols[k])
			}
		}
		names, cols, err := BuildInstruments(gen, prod, xNames, xs)
		if err != nil {
			return nil, err
		}
		names, cols, notes := instruments.Prune(names, cols, m.ZNames, zcols)
		m.Notes = append(m.Notes, notes...)
		// A built column that is an exact linear combination of the columns
		// already in Z (such as n_own + n_rival = J − 1 with the constant)
		// carries no information: drop it with a note too.
		for c, col := range cols {
			trial := columnsToDense(append(append([][]float64(nil), zcols...), col), n)
			if bad := collinear(trial, append(append([]string(nil), m.ZNames...), names[c])); bad != "" {
				m.Notes = append(m.Notes, fmt.Sprintf("built instrument %q is collinear with the instruments before it and was dropped", names[c]))
				continue
			}
			m.ZNames = append(m.ZNames, names[c])
			zcols = append(zcols, col)
		}
	}
	if m.absorb != nil {
		for _, v := range x1cols {
			m.absorb.apply(v)
		}
		for _, v := range zcols {
			m.absorb.apply(v)
		}
	}
	m.X1 = columnsToDense(x1cols, n)
	m.Z = columnsToDense(zcols, n)
	// X2 and θ2.
	m.X2Names = append(m.X2Names, d.Random...)
	for c := range d.Interactions {
		if !contains(m.X2Names, c) {
			m.X2Names = append(m.X2Names, c)
		}
	}
	sortTail(m.X2Names, len(d.Random))
	k2 := len(m.X2Names)
	x2 := make([]float64, n*k2)
	for k, c := range m.X2Names {
		v, err := column(c)
		if err != nil {
			return nil, err
		}
		for i := range v {
			x2[i*k2+k] = v[i]
		}
		if c == spec.Columns.Price {
			m.PriceX2 = k
		}
	}
	for _, c := range d.Random {
		m.Params = append(m.Params, Param{Kind: "sigma", Column: c})
	}
	for _, c := range m.X2Names {
		for _, dm := range d.Demographics {
			if contains(d.Interactions[c], dm) {
				m.Params = append(m.Params, Param{Kind: "pi", Column: c, Demographic: dm})
			}
		}
	}
	p := &contraction.Problem{K2: k2, X2: x2, LogShare: make([]float64, n)}
	for i, s := range prod.Share {
		p.LogShare[i] = math.Log(s)
	}
	for _, mk := range prod.Markets {
		p.Products = append(p.Products, contraction.Span{Start: mk.Start, End: mk.End})
	}
	if err := m.agents(p); err != nil {
		return nil, err
	}
	m.Problem = p
	if err := p.Validate(); err != nil {
		return nil, err
	}
	if c := spec.Cluster(); c != "" {
		ids, err := prod.Strings(c)
		if err != nil {
			return nil, err
		}
		m.Clusters = indexOf(ids)
	}
	return m, nil
}

// agents fills the agent spans, weights and variables of p: one variable per
// random column (its taste draw ν) followed by one per demographic.
func (m *Model) agents(p *contraction.Problem) error {
	spec := m.Spec
	d := &spec.Demand
	prod := m.Products
	varOf := map[string]int{} // "nu:col" or "dem:name" → variable index
	if spec.Data.Agents != "" {
		var cols []string
		for _, c := range d.Random {
			cols = append(cols, spec.Agents.Tastes[c])
		}
		cols = append(cols, d.Demographics...)
		ag, err := data.LoadAgents(spec.Path(spec.Data.Agents), spec.Agents.Market, spec.Agents.Weight, cols, prod)
		if err != nil {
			return err
		}
		m.Agents = ag
		for _, mk := range ag.Markets {
			p.Agents = append(p.Agents, contraction.Span{Start: mk.Start, End: mk.End})
		}
		p.Weight = ag.Weight
		for _, c := range d.Random {
			varOf["nu:"+c] = len(p.Vars)
			p.Vars = append(p.Vars, ag.Values[spec.Agents.Tastes[c]])
		}
		for _, dm := range d.Demographics {
			varOf["dem:"+dm] = len(p.Vars)
			p.Vars = append(p.Vars, ag.Values[dm])
		}
	} else {
		k := len(d.Random)
		for c := range d.Random {
			varOf["nu:"+d.Random[c]] = c
		}
		p.Vars = make([][]float64, k)
		for t := range prod.Markets {
			var rule Rule
			if k == 0 {
				rule = Rule{Nodes: [][]float64{{}}, Weights: []float64{1}}
			} else {
				var err error
				if rule, err = marketDraws(spec.Integration, k, t); err != nil {
					return fmt.Errorf("%s: [integration]: %v", spec.File, err)
				}
			}
			start := len(p.Weight)
			p.Weight = append(p.Weight, rule.Weights...)
			for _, node := range rule.Nodes {
				for c := range node {
					p.Vars[c] = append(p.Vars[c], node[c])
				}
			}
			p.Agents = append(p.Agents, contraction.Span{Start: start, End: len(p.Weight)})
		}
	}
	for _, q := range m.Params {
		col := indexIn(m.X2Names, q.Column)
		key := "nu:" + q.Column
		if q.Kind == "pi" {
			key = "dem:" + q.Demographic
		}
		p.Params = append(p.Params, contraction.Param{Col: col, Var: varOf[key]})
	}
	return nil
}

// Start returns the starting θ2 of the spec: σ from [estimation] start
// (default 1), Π from start_interactions (default 0).
func (m *Model) Start() []float64 {
	e := m.Spec.Estimation
	x := make([]float64, len(m.Params))
	for i, q := range m.Params {
		if q.Kind == "sigma" {
			x[i] = 1
			if v, ok := e.Start[q.Column]; ok {
				x[i] = v
			}
		} else if v, ok := e.StartInteractions[q.Column][q.Demographic]; ok {
			x[i] = v
		}
	}
	return x
}

func columnsToDense(cols [][]float64, n int) *mat.Dense {
	if len(cols) == 0 {
		return nil
	}
	m := mat.NewDense(n, len(cols), nil)
	for j, c := range cols {
		for i, v := range c {
			m.Set(i, j, v)
		}
	}
	return m
}

func indexOf(ids []string) []int {
	idx := map[string]int{}
	out := make([]int, len(ids))
	for i, id := range ids {
		k, ok := idx[id]
		if !ok {
			k = len(idx)
			idx[id] = k
		}
		out[i] = k
	}
	return out
}

func indexIn(xs []string, x string) int {
	for i, y := range xs {
		if y == x {
			return i
		}
	}
	return -1
}

// sortTail sorts xs[from:] so map iteration order never leaks into results.
func sortTail(xs []string, from int) {
	t := xs[from:]
	for i := 1; i < len(t); i++ {
		for j := i; j > 0 && t[j] < t[j-1]; j-- {
			t[j], t[j-1] = t[j-1], t[j]
		}
	}
}

// demeaner removes fixed effects by alternating projections (exact in one
// pass for a single set of effects).
type demeaner struct {
	groups [][]int
}

func (d *demeaner) apply(v []float64) {
	for iter := 0; iter < 10000; iter++ {
		change := 0.0
		for _, g := range d.groups {
			ng := 0
			for _, k := range g {
				ng = max(ng, k+1)
			}
			sum := make([]float64, ng)
			cnt := make([]float64, ng)
			for i, k := range g {
				sum[k] += v[i]
				cnt[k]++
			}
			for i, k := range g {
				mu := sum[k] / cnt[k]
				v[i] -= mu
				change = math.Max(change, math.Abs(mu))
			}
		}
		if len(d.groups) == 1 || change < 1e-13 {
			return
		}
	}
}

func withoutOptimal(gen []string) []string {
	var out []string
	for _, g := range gen {
		if g != "optimal" {
			out = append(out, g)
		}
	}
	return out
}
