package demand

import (
	"fmt"

	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
	"rcdemand/instruments"
)

// WithOptimalInstruments returns a copy of the model whose instruments are
// the approximate optimal instruments of Chamberlain (1987) as used by
// Reynaert & Verboven (2014), built at the estimates (beta, theta) by
// instruments.Optimal: Z* = [exogenous X1 columns, p̂, E[∂ξ/∂θ2 | z]], with
// ∂ξ/∂θ2 = ∂δ/∂θ2 = −(∂s/∂δ)⁻¹∂s/∂θ2 evaluated by the share model at δ̂ =
// X1(p̂)β (ξ = 0), θ2 and prices p̂ (also in the tastes when price has a
// random coefficient). The moments are then exactly as many as the
// parameters.
func (m *Model) WithOptimalInstruments(beta, theta []float64) (*Model, error) {
	if m.absorb != nil {
		return nil, fmt.Errorf("not available together with absorbed fixed effects")
	}
	if m.PriceX1 < 0 {
		return nil, fmt.Errorf("price is not a linear column")
	}
	var exo [][]float64
	var exoNames []string
	for k, c := range m.X1Names {
		if k != m.PriceX1 {
			exoNames = append(exoNames, c)
			exo = append(exo, mat.Col(nil, k, m.X1))
		}
	}
	price := mat.Col(nil, m.PriceX1, m.X1)
	jacobian := func(phat []float64) ([]float64, error) { return m.deltaJacobianAt(beta, theta, phat) }
	names, cols, err := instruments.Optimal(m.Z, price, m.Spec.Columns.Price, exo, exoNames, m.ParamNames(), jacobian)
	if err != nil {
		return nil, err
	}
	m2 := *m
	m2.Z = columnsToDense(cols, m.N())
	m2.ZNames = names
	return &m2, nil
}

// deltaJacobianAt returns ∂δ/∂θ2 (N×P) at δ̂ = X1(p̂)β, θ2 = theta and
// prices p̂, markets in parallel.
func (m *Model) deltaJacobianAt(beta, theta, phat []float64) ([]float64, error) {
	n := m.N()
	x1 := mat.DenseCopyOf(m.X1)
	x1.SetCol(m.PriceX1, phat)
	var dh mat.VecDense
	dh.MulVec(x1, mat.NewVecDense(len(beta), beta))
	deltaHat := dh.RawVector().Data
	p := m.Problem
	P := p.NumParams()
	jac := make([]float64, n*P)
	failed := make([]bool, len(p.Products))
	pool := contraction.NewPool(p.NewWorker)
	pool.Run(len(p.Products), func(w *contraction.Worker, t int) {
		span := p.Products[t]
		w.Set(t, theta)
		w.Reprice(phat[span.Start:span.End])
		if P > 0 && !w.DeltaJacobian(deltaHat[span.Start:span.End], jac[span.Start*P:span.End*P], nil) {
			failed[t] = true
		}
	})
	for t, f := range failed {
		if f {
			return nil, fmt.Errorf("∂s/∂δ is singular in market %q at the predicted prices", m.Products.Markets[t].ID)
		}
	}
	return jac, nil
}
