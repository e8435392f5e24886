package demand

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
)

// readNests reads the nest of every row from the column of [demand] nests
// (nests numbered in order of first appearance).
func (m *Model) readNests() error {
	col := m.Spec.Demand.Nests
	if col == "" {
		return nil
	}
	ids, err := m.Products.Strings(col)
	if err != nil {
		return err
	}
	m.NestOf = indexOf(ids)
	m.Nests = make([]string, 0)
	for n, g := range m.NestOf {
		if g == len(m.Nests) {
			m.Nests = append(m.Nests, ids[n])
		}
	}
	return nil
}

// nesting makes p a nested logit when the spec has nests: the family, and
// the nesting parameters after the taste parameters in θ2 (one "all", or
// one per nest in order of first appearance).
func (m *Model) nesting(p *contraction.Problem) error {
	if m.NestOf == nil {
		return nil
	}
	byNest := m.Spec.ByNest()
	p.Family = &contraction.Nested{Nest: m.NestOf, Nests: len(m.Nests), ByNest: byNest}
	if !byNest {
		m.Params = append(m.Params, Param{Kind: Rho, Nest: NestingAll})
	} else {
		for _, g := range m.Nests {
			m.Params = append(m.Params, Param{Kind: Rho, Nest: g})
		}
	}
	if t := m.Spec.Estimation.StartRho.table(); t != nil {
		for _, g := range sortedKeys(t) {
			if !slices.Contains(m.Nests, g) {
				return fmt.Errorf("%s: [estimation] start_rho names nest %q, which is not in column %q (nests: %s)",
					m.Spec.File, g, m.Spec.Demand.Nests, quoteList(m.Nests, 12))
			}
		}
	}
	return nil
}

// tasteParams lists the taste parameters of θ2 in their order: the
// log-normal price location (a β), then σ for each random column (or the
// lower triangle of L, row by row, under a full covariance), then Π for
// each interaction, by X2 column and demographic.
func (m *Model) tasteParams() []Param {
	d := &m.Spec.Demand
	var out []Param
	if m.Spec.LogNormalPrice() {
		out = append(out, Param{Kind: Beta, Column: m.Spec.Columns.Price})
	}
	for r, c := range d.Random {
		if !m.Spec.FullCovariance() {
			out = append(out, Param{Kind: Sigma, Column: c})
			continue
		}
		for _, o := range d.Random[:r+1] {
			out = append(out, Param{Kind: Cholesky, Column: c, Other: o})
		}
	}
	for _, c := range m.X2Names {
		for _, dm := range d.Demographics {
			if slices.Contains(d.Interactions[c], dm) {
				out = append(out, Param{Kind: Pi, Column: c, Demographic: dm})
			}
		}
	}
	return out
}

// placeParams places each taste parameter of the model on its X2 column and
// agent variable (varOf: "nu:<random column>" and "dem:<demographic>"):
// σ_k on ν_k, L_kl on ν_l, Π_kd on D_d, the log-normal location on an agent
// variable of ones (added here).
func (m *Model) placeParams(p *contraction.Problem, varOf map[string]int) error {
	ones := -1
	for _, q := range m.Params {
		var key string
		switch q.Kind {
		case Sigma:
			key = "nu:" + q.Column
		case Cholesky:
			key = "nu:" + q.Other
		case Pi:
			key = "dem:" + q.Demographic
		case Beta:
			if ones < 0 {
				ones = len(p.Vars)
				v := make([]float64, len(p.Weight))
				for i := range v {
					v[i] = 1
				}
				p.Vars = append(p.Vars, v)
			}
		default:
			continue // family parameters (ρ) are not tastes
		}
		v, ok := varOf[key]
		if q.Kind == Beta {
			v, ok = ones, true
		}
		if !ok {
			return fmt.Errorf("%s: no agent variable for %s", m.Spec.File, q.Name())
		}
		p.Params = append(p.Params, contraction.Param{Col: slices.Index(m.X2Names, q.Column), Var: v})
	}
	return nil
}

// familyStart returns the spec's starting value of a parameter of the
// families' kinds (ρ, L, the log-normal location), if it gives one.
func (m *Model) familyStart(q Param) (float64, bool) {
	e := m.Spec.Estimation
	switch q.Kind {
	case Rho:
		return e.StartRho.Of(q.Nest)
	case Cholesky:
		if v, ok := e.StartCholesky[q.Column][q.Other]; ok {
			return v, true
		}
		if v, ok := e.Start[q.Column]; ok && q.Column == q.Other {
			return v, true
		}
	case Beta:
		if e.StartPriceLocation != nil {
			return *e.StartPriceLocation, true
		}
		if m.Spec.LogNormalPrice() {
			return m.logitLocation(), true
		}
	}
	return 0, false
}

// logitLocation returns ln(−α̂), α̂ the price coefficient of the plain logit
// by 2SLS (δ = ln s_j − ln s_0 on X1 and price with Z, Berry 1994): the
// start of a log-normal price location; 0 when α̂ is not negative.
func (m *Model) logitLocation() float64 {
	n := m.N()
	cols := [][]float64{m.endogenousPrice()}
	names := []string{m.Spec.Columns.Price}
	for k, c := range m.X1Names {
		cols, names = append(cols, mat.Col(nil, k, m.X1)), append(names, c)
	}
	iv, err := NewIV(columnsToDense(cols, n), m.Z, names, m.ZNames)
	if err != nil {
		return 0
	}
	W, err := iv.InitialWeight()
	if err != nil || iv.SetWeight(W) != nil {
		return 0
	}
	delta := m.Problem.LogitStart()
	if m.absorb != nil {
		m.absorb.apply(delta)
	}
	if a := iv.Solve(delta).Beta[0]; a < 0 {
		return math.Log(-a)
	}
	return 0
}

// quoteList quotes up to n names, then "…".
func quoteList(xs []string, n int) string {
	out := ""
	for i, x := range xs {
		if i == n {
			return out + ", …"
		}
		if i > 0 {
			out += ", "
		}
		out += fmt.Sprintf("%q", x)
	}
	return out
}
