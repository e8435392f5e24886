package demand

import (
	"fmt"

	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
)

// WithOptimalInstruments returns a copy of the model whose instruments are
// the approximate optimal instruments of Chamberlain (1987) as used by
// Reynaert & Verboven (2014), built at the estimates (beta, theta):
//
//	Z* = [exogenous X1 columns, p̂, E[∂ξ/∂θ2 | z]],
//
// with p̂ the fitted values of a regression of price on the current
// instruments Z (all exogenous variables), δ̂ = X1(p̂)β with ξ = 0, and
// ∂ξ/∂θ2 = ∂δ/∂θ2 = −(∂s/∂δ)⁻¹∂s/∂θ2 evaluated at δ̂, θ2 and prices p̂ (also in
// X2 when price has a random coefficient). The moments are then exactly as
// many as the parameters.
func (m *Model) WithOptimalInstruments(beta, theta []float64) (*Model, error) {
	if m.absorb != nil {
		return nil, fmt.Errorf("not available together with absorbed fixed effects")
	}
	if m.PriceX1 < 0 {
		return nil, fmt.Errorf("price is not a linear column")
	}
	n := m.N()
	price := mat.Col(nil, m.PriceX1, m.X1)
	_, b, err := ols(m.Z, mat.NewVecDense(n, price))
	if err != nil {
		return nil, fmt.Errorf("first-stage regression of price: %v", err)
	}
	var ph mat.VecDense
	ph.MulVec(m.Z, b)
	phat := ph.RawVector().Data
	x1 := mat.DenseCopyOf(m.X1)
	x1.SetCol(m.PriceX1, phat)
	var dh mat.VecDense
	dh.MulVec(x1, mat.NewVecDense(len(beta), beta))
	deltaHat := dh.RawVector().Data
	p := m.Problem
	P := len(m.Params)
	x2 := append([]float64(nil), p.X2...)
	if m.PriceX2 >= 0 {
		for i := 0; i < n; i++ {
			x2[i*p.K2+m.PriceX2] = phat[i]
		}
	}
	jac := make([]float64, n*P)
	cols := make([]int, P)
	for q, par := range p.Params {
		cols[q] = par.Col
	}
	work := make([]*contraction.Workspace, contraction.Workers())
	for w := range work {
		work[w] = p.NewWorkspace()
	}
	failed := make([]bool, len(p.Products))
	contraction.ForEach(len(p.Products), func(wk, t int) {
		w := work[wk]
		pm, am := p.Products[t], p.Agents[t]
		p.FillTastes(w.Tastes(am.End-am.Start), t, theta)
		w.SetTastes(x2[pm.Start*p.K2:pm.End*p.K2], pm.End-pm.Start, p.Weight[am.Start:am.End])
		vars := make([][]float64, P)
		for q, par := range p.Params {
			vars[q] = p.Vars[par.Var][am.Start:am.End]
		}
		if P > 0 && !w.Jacobians(deltaHat[pm.Start:pm.End], cols, vars, jac[pm.Start*P:pm.End*P]) {
			failed[t] = true
		}
	})
	for t, f := range failed {
		if f {
			return nil, fmt.Errorf("∂s/∂δ is singular in market %q at the predicted prices", m.Products.Markets[t].ID)
		}
	}
	var names []string
	var zc [][]float64
	for k, c := range m.X1Names {
		if k != m.PriceX1 {
			names = append(names, c)
			zc = append(zc, mat.Col(nil, k, m.X1))
		}
	}
	names = append(names, "opt_"+m.Spec.Columns.Price)
	zc = append(zc, phat)
	for q, par := range m.Params {
		col := make([]float64, n)
		for i := range col {
			col[i] = jac[i*P+q]
		}
		names = append(names, "opt_"+par.Name())
		zc = append(zc, col)
	}
	m2 := *m
	m2.Z = columnsToDense(zc, n)
	m2.ZNames = names
	return &m2, nil
}
