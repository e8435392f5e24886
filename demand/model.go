package demand

import (
	"errors"
	"fmt"
	"maps"
	"math"
	"slices"
	"strings"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
	"rcdemand/data"
	"rcdemand/instruments"
)

// Model is a spec bound to its data: the matrices of the estimator.
type Model struct {
	Spec     *Spec
	Products *data.Products
	Agents   *data.Agents // nil when the agents come from a generated rule

	X1      *mat.Dense // N×K1 linear characteristics (fixed effects removed)
	X1Names []string
	Z       *mat.Dense // N×M instruments (fixed effects removed)
	ZNames  []string
	X2Names []string // columns with random coefficients or interactions
	Params  []Param  // θ2, in the order of the share model's parameters
	Problem *contraction.Problem

	PriceX1    int       // column of price in X1, −1 when absent (or log-normal)
	PriceParam int       // index in Params of a nonlinear price coefficient (supply side), −1 when none
	Supply     *costSide // the cost equation, nil without [supply]
	Clusters   []int
	Nests      []string // nest names in order of first appearance (nested logit)
	NestOf     []int    // nest of each row (nested logit)
	Notes      []string // what the assembly chose or dropped, for the user

	MarketSize []float64 // consumers per market ([columns] market_size), nil when not given

	absorb      *demeaner
	agentsTable func() (*data.Table, error) // the agents table the spec names, when it has one
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
	path, err := spec.DataPath("products", spec.Data.Products)
	if err != nil {
		return nil, err
	}
	var agents func() (*data.Table, error)
	if spec.Data.Agents != "" {
		agents = readAgents(spec)
	}
	prod, err := data.LoadProducts(path, spec.productColumns(), spec.numericColumns())
	if err != nil {
		return nil, spec.roleHint(err)
	}
	return assemble(spec, prod, agents)
}

// agentColumns lists the numeric columns of the agents table the spec uses
// besides the weight: the taste draws of the random coefficients, then the
// demographics.
func (s *Spec) agentColumns() []string {
	var cols []string
	for _, c := range s.Demand.Random {
		cols = append(cols, s.Agents.Tastes[c])
	}
	return append(cols, s.Demand.Demographics...)
}

// tasteNotes notes what a spec allows but its writer may not mean: random
// coefficients drawn from one taste column of the agents table (their
// tastes are then perfectly correlated) and a demographic that no
// interaction uses (it then has no effect).
func (s *Spec) tasteNotes() []string {
	var notes []string
	if s.Data.Agents != "" {
		by := map[string][]string{}
		for _, c := range s.Demand.Random {
			by[s.Agents.Tastes[c]] = append(by[s.Agents.Tastes[c]], c)
		}
		for _, col := range sortedKeys(by) {
			if cs := by[col]; len(cs) > 1 {
				notes = append(notes, fmt.Sprintf("[agents] tastes: the random coefficients of %s all take the draws of %q, so they are perfectly correlated", strings.Join(cs, ", "), col))
			}
		}
	}
	for _, dm := range s.Demand.Demographics {
		used := false
		for _, dems := range s.Demand.Interactions {
			used = used || slices.Contains(dems, dm)
		}
		if !used {
			notes = append(notes, fmt.Sprintf("[demand] demographics: %q enters no interaction, so it has no effect", dm))
		}
	}
	return notes
}

// readAgents starts reading the agents table the spec names and returns a
// function that waits for it. The agents file is usually the largest input
// and needs nothing from the products until its markets are matched, so it
// is read, and its numbers parsed, while the products are checked and the
// instruments built. Errors are reported when the table is needed, in the
// order they always were.
func readAgents(spec *Spec) func() (*data.Table, error) {
	done := make(chan struct{})
	var t *data.Table
	var err error
	var panicked any // raised again where the table is awaited, on that goroutine
	go func() {
		defer close(done)
		defer func() { panicked = recover() }()
		var path string
		if path, err = spec.DataPath("agents", spec.Data.Agents); err == nil {
			t, err = data.ReadTable(path)
		}
		if err == nil {
			t.ParseNumbers(append(spec.agentColumns(), spec.Agents.Weight))
		}
	}()
	return func() (*data.Table, error) {
		<-done
		if panicked != nil {
			panic(panicked)
		}
		return t, err
	}
}

// LoadTables is Load with the products and agents tables given (agents nil:
// read the one the spec names, if any), for data derived in memory.
func LoadTables(spec *Spec, products, agents *data.Table) (*Model, error) {
	prod, err := data.NewProducts(products, spec.productColumns(), spec.numericColumns())
	if err != nil {
		return nil, spec.roleHint(err)
	}
	return AssembleWith(spec, prod, agents)
}

// productColumns maps the spec's roles to the products table's columns.
func (s *Spec) productColumns() data.Columns {
	c := s.Columns
	return data.Columns{Market: c.Market, Product: c.Product, Firm: c.Firm, Share: c.Share, Price: c.Price}
}

// numericColumns lists the products table's columns that must hold numbers:
// the characteristics, instruments and cost columns the spec uses.
func (s *Spec) numericColumns() []string {
	d := &s.Demand
	var numeric []string
	add := func(c string) {
		if c != "1" && !slices.Contains(numeric, c) {
			numeric = append(numeric, c)
		}
	}
	for _, c := range d.Linear {
		add(c)
	}
	for _, c := range d.Random {
		add(c)
	}
	for _, c := range sortedKeys(d.Interactions) {
		add(c)
	}
	for _, c := range s.Instruments.Excluded {
		add(c)
	}
	for _, c := range append(slices.Clone(s.Supply.Cost), s.Supply.Excluded...) {
		add(c)
	}
	if s.Columns.MarketSize != "" {
		add(s.Columns.MarketSize)
	}
	return numeric
}

// AssembleWith binds a spec to a products table already loaded, with the
// agents table given (nil: read the one the spec names), also for designs
// derived in memory such as a trust study's resampled markets. The table is
// not changed.
func AssembleWith(spec *Spec, prod *data.Products, agents *data.Table) (*Model, error) {
	if spec.Data.Agents == "" {
		return assemble(spec, prod, nil)
	}
	if agents != nil {
		return assemble(spec, prod, func() (*data.Table, error) { return agents, nil })
	}
	return assemble(spec, prod, readAgents(spec))
}

// assemble is AssembleWith with the agents table to come from agents (nil
// when the spec names none).
func assemble(spec *Spec, prod *data.Products, agents func() (*data.Table, error)) (*Model, error) {
	if err := spec.checkPrice(); err != nil {
		return nil, err
	}
	m := &Model{Spec: spec, Products: prod, PriceX1: -1, PriceParam: -1, agentsTable: agents}
	if err := m.readMarketSize(); err != nil {
		return nil, err
	}
	if err := m.fixedEffects(); err != nil {
		return nil, err
	}
	if err := m.readNests(); err != nil {
		return nil, err
	}
	x1cols, zcols, err := m.linearPart()
	if err != nil {
		return nil, err
	}
	builtNames, built, err := m.buildInstruments(x1cols)
	if err != nil {
		return nil, err
	}
	if m.absorb != nil {
		if err := m.absorbLinear(x1cols, zcols); err != nil {
			return nil, err
		}
		// A built column that is constant within the absorbed groups is
		// left with rounding noise: call it zero relative to its size.
		for _, v := range built {
			scale := floats.Norm(v, math.Inf(1))
			m.absorb.apply(v)
			if floats.Norm(v, math.Inf(1)) <= 1e-12*scale {
				clear(v)
			}
		}
	}
	// Built columns that carry nothing beyond Z (constant or collinear
	// after the fixed effects are removed) are dropped with a note.
	names, cols, notes := instruments.Admit(builtNames, built, m.ZNames, zcols)
	m.Notes = append(m.Notes, notes...)
	m.ZNames = append(m.ZNames, names...)
	zcols = append(zcols, cols...)
	n := prod.Len()
	m.X1 = columnsToDense(x1cols, n)
	m.Z = columnsToDense(zcols, n)
	p, err := m.randomPart()
	if err != nil {
		return nil, err
	}
	if err := m.agents(p); err != nil {
		return nil, err
	}
	m.Notes = append(m.Notes, spec.tasteNotes()...)
	if err := m.nesting(p); err != nil {
		return nil, err
	}
	m.Problem = p
	if err := p.Validate(); err != nil {
		return nil, err
	}
	if spec.HasSupply() {
		if err := m.assembleSupply(); err != nil {
			return nil, err
		}
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

// column returns a column of the products table, or ones for "1".
func (m *Model) column(c string) ([]float64, error) {
	if c == "1" {
		v := make([]float64, m.N())
		for i := range v {
			v[i] = 1
		}
		return v, nil
	}
	return m.Products.Floats(c)
}

// fixedEffects reads the groups of [demand] absorb.
func (m *Model) fixedEffects() error {
	if len(m.Spec.Demand.Absorb) == 0 {
		return nil
	}
	var groups [][]int
	for _, c := range m.Spec.Demand.Absorb {
		ids, err := m.Products.Strings(c)
		if err != nil {
			return err
		}
		groups = append(groups, indexOf(ids))
	}
	m.absorb = newDemeaner(groups)
	return nil
}

// linearPart returns the columns of X1 and of Z = [exogenous X1 columns,
// excluded instruments], setting their names.
func (m *Model) linearPart() (x1cols, zcols [][]float64, err error) {
	spec := m.Spec
	for _, c := range spec.Demand.Linear {
		if c == "1" && m.absorb != nil {
			m.Notes = append(m.Notes, `the constant "1" is absorbed by the fixed effects and dropped from X1`)
			continue
		}
		if c == spec.Columns.Price && spec.LogNormalPrice() {
			continue // its β is the log-normal location, a nonlinear parameter
		}
		v, err := m.column(c)
		if err != nil {
			return nil, nil, err
		}
		if c == spec.Columns.Price {
			m.PriceX1 = len(m.X1Names)
		}
		m.X1Names = append(m.X1Names, c)
		x1cols = append(x1cols, v)
	}
	for k, c := range m.X1Names {
		if k != m.PriceX1 {
			m.ZNames = append(m.ZNames, c)
			zcols = append(zcols, slices.Clone(x1cols[k]))
		}
	}
	for _, c := range spec.Instruments.Excluded {
		if slices.Contains(m.ZNames, c) {
			return nil, nil, fmt.Errorf("%s: instrument %q is already an exogenous linear column", spec.File, c)
		}
		v, err := m.column(c)
		if err != nil {
			return nil, nil, err
		}
		m.ZNames = append(m.ZNames, c)
		zcols = append(zcols, v)
	}
	return x1cols, zcols, nil
}

// design describes the products table to the instrument builders.
func (m *Model) design() instruments.Design {
	p := m.Products
	d := instruments.Design{Product: p.Product, Market: p.Market, Price: p.Price, PriceName: p.Cols.Price}
	for _, mk := range p.Markets {
		d.Markets = append(d.Markets, contraction.Span{Start: mk.Start, End: mk.End})
	}
	if p.Firm != nil {
		d.Firm = indexOf(p.Firm)
	}
	d.Nest = m.NestOf
	return d
}

// buildInstruments builds the sets of [instruments] generate (but
// "optimal") from the raw exogenous characteristics of X1.
func (m *Model) buildInstruments(x1cols [][]float64) ([]string, [][]float64, error) {
	gen := withoutOptimal(m.Spec.Instruments.Generate)
	if len(gen) == 0 {
		return nil, nil, nil
	}
	var xNames []string
	var xs [][]float64
	for k, c := range m.X1Names {
		if k != m.PriceX1 && c != "1" {
			xNames = append(xNames, c)
			xs = append(xs, x1cols[k])
		}
	}
	prod := m.Products
	names, cols, notes, err := instruments.Build(gen, m.design(), xNames, xs)
	var single *instruments.SingleMarketError
	switch {
	case errors.As(err, &single):
		return nil, nil, prod.Errorf(single.Row, prod.Cols.Product, "%s", single.Error())
	case errors.Is(err, instruments.ErrNoFirm):
		return nil, nil, fmt.Errorf("%s: built instruments need the firm column %q", prod.File, prod.Cols.Firm)
	case err != nil:
		return nil, nil, fmt.Errorf("%s: %w", m.Spec.File, err)
	}
	m.Notes = append(m.Notes, notes...)
	return names, cols, nil
}

// randomPart lays out X2 (the random columns, then the columns that only
// interact with demographics, sorted, then price when its coefficient is
// log-normal and it is neither) and the taste parameters of θ2 (see
// tasteParams).
func (m *Model) randomPart() (*contraction.Problem, error) {
	d := &m.Spec.Demand
	m.X2Names = append(m.X2Names, d.Random...)
	var extra []string
	for _, c := range sortedKeys(d.Interactions) {
		if !slices.Contains(m.X2Names, c) {
			extra = append(extra, c)
		}
	}
	m.X2Names = append(m.X2Names, extra...)
	price := m.Spec.Columns.Price
	if m.Spec.LogNormalPrice() && !slices.Contains(m.X2Names, price) {
		m.X2Names = append(m.X2Names, price)
	}
	n := m.N()
	k2 := len(m.X2Names)
	p := &contraction.Problem{K2: k2, X2: make([]float64, n*k2), LogShare: make([]float64, n), PriceCol: -1}
	for k, c := range m.X2Names {
		v, err := m.column(c)
		if err != nil {
			return nil, err
		}
		for i := range v {
			p.X2[i*k2+k] = v[i]
		}
		if c == price {
			p.PriceCol = k
		}
	}
	if m.Spec.LogNormalPrice() {
		p.LogNormal = make([]bool, k2)
		p.LogNormal[p.PriceCol] = true
	}
	m.Params = m.tasteParams()
	for i, s := range m.Products.Share {
		p.LogShare[i] = math.Log(s)
	}
	for _, mk := range m.Products.Markets {
		p.Products = append(p.Products, contraction.Span{Start: mk.Start, End: mk.End})
	}
	return p, nil
}

// agents fills the agent spans, weights and variables of p: one variable per
// random column (its taste draw ν) followed by one per demographic, and
// places each taste parameter on its column and variable.
func (m *Model) agents(p *contraction.Problem) error {
	spec := m.Spec
	d := &spec.Demand
	varOf := map[string]int{} // "nu:col" or "dem:name" → variable index
	if spec.Data.Agents != "" {
		cols := spec.agentColumns()
		t, err := m.agentsTable()
		m.agentsTable = nil // the table in file order is not kept beyond this
		if err != nil {
			return err
		}
		ag, err := data.NewAgents(t, spec.Agents.Market, spec.Agents.Weight, cols, m.Products)
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
	} else if err := m.generatedAgents(p, varOf); err != nil {
		return err
	}
	return m.placeParams(p, varOf)
}

// generatedAgents draws the agents of every market from [integration].
func (m *Model) generatedAgents(p *contraction.Problem, varOf map[string]int) error {
	spec := m.Spec
	random := spec.Demand.Random
	k := len(random)
	for c := range random {
		varOf["nu:"+random[c]] = c
	}
	p.Vars = make([][]float64, k)
	for t := range m.Products.Markets {
		rule := Rule{Nodes: [][]float64{{}}, Weights: []float64{1}}
		if k > 0 {
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
	return nil
}

// Start returns the starting θ2 of the spec: σ (or the diagonal of L) from
// [estimation] start, Π from start_interactions, ρ from start_rho, the
// other entries of L from start_cholesky, the log-normal location from
// start_price_location, each parameter's default where the spec is silent.
// The nonlinear price coefficient of a supply side is left at 0: a joint
// estimation starts it at the estimate of demand alone (demandStart).
func (m *Model) Start() []float64 {
	e := m.Spec.Estimation
	x := make([]float64, len(m.Params))
	for i, q := range m.Params {
		x[i] = q.DefaultStart()
		if i == m.PriceParam {
			continue
		}
		switch q.Kind {
		case Sigma:
			if v, ok := e.Start[q.Column]; ok {
				x[i] = v
			}
		case Pi:
			if v, ok := e.StartInteractions[q.Column][q.Demographic]; ok {
				x[i] = v
			}
		default:
			if v, ok := m.familyStart(q); ok {
				x[i] = v
			}
		}
	}
	return x
}

// ParamNames returns the labels of θ2.
func (m *Model) ParamNames() []string {
	out := make([]string, len(m.Params))
	for i, q := range m.Params {
		out[i] = q.Name()
	}
	return out
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

// indexOf numbers the distinct ids in order of first appearance.
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

func withoutOptimal(gen []string) []string {
	var out []string
	for _, g := range gen {
		if g != "optimal" {
			out = append(out, g)
		}
	}
	return out
}

// sortedKeys returns the keys of a map in order, so map iteration order never
// leaks into results.
func sortedKeys[V any](m map[string]V) []string { return slices.Sorted(maps.Keys(m)) }
