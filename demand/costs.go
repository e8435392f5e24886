package demand

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
	"rcdemand/instruments"
)

// costSide is the marginal-cost equation of a model estimated jointly with
// demand: c = p − η(θ) with η the Bertrand–Nash markups under the firm
// column's ownership, and c = wγ + ω ("linear") or ln c = wγ + ω ("log").
type costSide struct {
	form    string
	W       *mat.Dense // N×L cost columns
	WNames  []string
	Zs      *mat.Dense // N×Ms supply instruments: cost columns, excluded, built
	ZsNames []string
	owner   []int     // firm index of each row
	share   []float64 // observed shares
}

// assembleSupply reads [supply]: the cost columns, the supply instruments
// (with the spec's built sets applied to the exogenous cost columns) and the
// owners; and makes the price coefficient a nonlinear parameter, placed
// first in θ (it is not a parameter of the share model).
func (m *Model) assembleSupply() error {
	spec := m.Spec
	sp := spec.Supply
	owner, err := m.Firms()
	if err != nil {
		return err
	}
	if err := m.PriceLevels(); err != nil {
		return err
	}
	cs := &costSide{form: sp.Form, owner: owner, share: m.Products.Share}
	var wcols, zcols [][]float64
	for _, c := range sp.Cost {
		v, err := m.column(c)
		if err != nil {
			return err
		}
		cs.WNames = append(cs.WNames, c)
		wcols = append(wcols, v)
		cs.ZsNames = append(cs.ZsNames, c)
		zcols = append(zcols, slices.Clone(v))
	}
	for _, c := range sp.Excluded {
		v, err := m.column(c)
		if err != nil {
			return err
		}
		cs.ZsNames = append(cs.ZsNames, c)
		zcols = append(zcols, v)
	}
	if gen := withoutOptimal(spec.Instruments.Generate); len(gen) > 0 {
		var names []string
		var xs [][]float64
		for k, c := range cs.WNames {
			if c != "1" {
				names, xs = append(names, c), append(xs, wcols[k])
			}
		}
		built, cols, notes, err := instruments.Build(gen, m.design(), names, xs)
		if err != nil {
			return fmt.Errorf("%s: [supply]: %w", spec.File, err)
		}
		for i := range built {
			built[i] = "supply_" + built[i]
		}
		m.Notes = append(m.Notes, notes...)
		built, cols, notes = instruments.Admit(built, cols, cs.ZsNames, zcols)
		m.Notes = append(m.Notes, notes...)
		cs.ZsNames, zcols = append(cs.ZsNames, built...), append(zcols, cols...)
	}
	n := m.N()
	cs.W, cs.Zs = columnsToDense(wcols, n), columnsToDense(zcols, n)
	m.Supply = cs
	m.PriceParam = 0
	m.Params = append([]Param{{Kind: Beta, Column: spec.Columns.Price}}, m.Params...)
	return nil
}

// NewIV returns the linear IV engine of the model: X1 on Z, or with a supply
// side the stacked engine of demand (X1 without price, whose coefficient is
// then nonlinear, on Z) and the cost equation (the cost columns on the
// supply instruments, their names prefixed "supply:").
func (m *Model) NewIV() (*IV, error) {
	if m.Supply == nil {
		return NewIV(m.X1, m.Z, m.X1Names, m.ZNames)
	}
	n := m.N()
	var xd [][]float64
	var names []string
	for k, c := range m.X1Names {
		if k != m.PriceX1 {
			xd, names = append(xd, mat.Col(nil, k, m.X1)), append(names, c)
		}
	}
	for _, c := range m.Supply.WNames {
		names = append(names, "gamma["+c+"]")
	}
	znames := slices.Clone(m.ZNames)
	for _, c := range m.Supply.ZsNames {
		znames = append(znames, "supply:"+c)
	}
	return NewStackedIV(columnsToDense(xd, n), m.Z, m.Supply.W, m.Supply.Zs, names, znames)
}

// demandOnly returns the model without its supply side: β_price linear
// again, θ the share model's parameters.
func (m *Model) demandOnly() *Model {
	d := *m
	d.Supply, d.PriceParam = nil, -1
	d.Params = m.Params[1:]
	return &d
}

// ShareTheta returns the share model's θ2 from the model's θ: all but the
// nonlinear price coefficient of a supply side.
func (m *Model) ShareTheta(theta []float64) []float64 {
	if m.PriceParam < 0 {
		return theta
	}
	return slices.Delete(slices.Clone(theta), m.PriceParam, m.PriceParam+1)
}

// shareIndex returns, for each entry of θ, its index in the share model's θ2
// (−1 for the nonlinear price coefficient).
func (m *Model) shareIndex() []int {
	idx := make([]int, len(m.Params))
	k := 0
	for i := range idx {
		if i == m.PriceParam {
			idx[i] = -1
			continue
		}
		idx[i] = k
		k++
	}
	return idx
}

// CostError is an implied marginal cost that the cost equation cannot take:
// not positive under form = "log".
type CostError struct {
	Market, Product string
	Price, Markup   float64
}

func (e *CostError) Error() string {
	return fmt.Sprintf("market %q, product %q: the implied marginal cost p − η = %.4g − %.4g = %.4g is not positive, so ln c is not defined ([supply] form = \"log\")",
		e.Market, e.Product, e.Price, e.Markup, e.Price-e.Markup)
}

// costWorker holds one goroutine's buffers of the cost side, grown to the
// largest market it has evaluated; the matrix and vectors are views of them.
type costWorker struct {
	w                 *contraction.Worker
	alpha, ones       []float64
	D, lam, dD, dDall []float64
	eta, v, deta      []float64
	delta             []float64 // J×J, Δ, then its LU factors
	work              []float64 // 4J
	swaps, iwork      []int     // J
	ok                bool      // Δ is not singular
	cond              float64   // Δ's condition number
}

// costEval evaluates the cost side of the stacked moments.
type costEval struct {
	m    *Model
	pool *contraction.Pool[*costWorker]
	errs []error
	idx  []int // Model.shareIndex
}

func newCostEval(m *Model) *costEval {
	p := m.Problem
	return &costEval{m: m, errs: make([]error, len(p.Products)), idx: m.shareIndex(),
		pool: contraction.NewPool(func() *costWorker { return &costWorker{w: p.NewWorker()} })}
}

// evaluate writes the cost equation's left-hand side y_s (c or ln c, c = p −
// η) at θ into ys and, when ddelta (∂δ/∂θ2, N×P2) is not nil, ∂y_s/∂θ
// (N×P) into dys, with η = Δ⁻¹s at the observed shares and
// ∂η/∂θ_k = −Δ⁻¹(∂Δ/∂θ_k)η (the shares stay at their observed values as θ
// moves, so ∂s/∂θ = 0). It returns a *CostError for the first market (in
// order) with a cost that the form cannot take.
func (ce *costEval) evaluate(theta, delta, ddelta, ys, dys []float64) error {
	m := ce.m
	p := m.Problem
	betaP := theta[m.PriceParam]
	theta2 := m.ShareTheta(theta)
	ce.pool.Run(len(p.Products), func(cw *costWorker, t int) {
		ce.errs[t] = ce.market(cw, t, betaP, theta2, delta, ddelta, ys, dys)
	})
	for _, err := range ce.errs {
		if err != nil {
			return err
		}
	}
	return nil
}

// market is evaluate for market t.
func (ce *costEval) market(cw *costWorker, t int, betaP float64, theta2, delta, ddelta, ys, dys []float64) error {
	m := ce.m
	cs := m.Supply
	span := m.Problem.Products[t]
	w := cw.w
	w.Set(t, theta2)
	J, I := w.Size()
	cw.size(J, I, len(theta2))
	d := delta[span.Start:span.End]
	w.Alpha(betaP, cw.alpha)
	w.PriceJacobian(d, cw.alpha, cw.D, cw.lam)
	owner := cs.owner[span.Start:span.End]
	share := cs.share[span.Start:span.End]
	price := m.Products.Price[span.Start:span.End]
	FillSupplyMatrix(cw.delta, cw.D, owner)
	cw.factorize()
	if err := cw.solve(cw.eta, share); err != nil {
		return fmt.Errorf("market %q: the markup equations are singular: %v", m.Products.Markets[t].ID, err)
	}
	for j := 0; j < J; j++ {
		c := price[j] - cw.eta[j]
		if cs.form == "log" {
			if !(c > 0) {
				return &CostError{Market: m.Products.Markets[t].ID, Product: m.Products.Product[span.Start+j], Price: price[j], Markup: cw.eta[j]}
			}
			ys[span.Start+j] = math.Log(c)
		} else {
			ys[span.Start+j] = c
		}
	}
	if dys == nil {
		return nil
	}
	ce.derivatives(cw, t, betaP, d, ddelta, owner, price, dys)
	return nil
}

// derivatives writes ∂y_s/∂θ of market t: ∂η/∂θ_k = −Δ⁻¹(∂Δ/∂θ_k)η with
// (∂Δ/∂θ_k η)_j = −Σ_l Ω_jl ∂(∂s_l/∂p_j)/∂θ_k η_l; ∂c = −∂η, ∂ln c = −∂η/c.
func (ce *costEval) derivatives(cw *costWorker, t int, betaP float64, d, ddelta []float64, owner []int, price []float64, dys []float64) {
	m := ce.m
	span := m.Problem.Products[t]
	J := span.Len()
	P := len(m.Params)
	P2 := m.Problem.NumParams()
	if P2 > 0 {
		cw.w.PriceJacobianTheta(d, betaP, ddelta[span.Start*P2:span.End*P2], cw.dDall)
	}
	idx := ce.idx
	for k := 0; k < P; k++ {
		dD := cw.dD
		if idx[k] < 0 {
			// ∂(∂s/∂p)/∂β_price is ∂s/∂p with every α_i = 1.
			cw.w.PriceJacobian(d, cw.ones, dD, cw.lam)
		} else {
			dD = cw.dDall[idx[k]*J*J : (idx[k]+1)*J*J]
		}
		for j := 0; j < J; j++ {
			acc := 0.0
			for l := 0; l < J; l++ {
				if owner[j] == owner[l] {
					acc -= dD[l*J+j] * cw.eta[l]
				}
			}
			cw.v[j] = acc
		}
		// dη = −Δ⁻¹(dΔ η)
		if err := cw.solve(cw.deta, cw.v); err != nil {
			continue
		}
		for j := 0; j < J; j++ {
			de := -cw.deta[j]
			n := span.Start + j
			if m.Supply.form == "log" {
				dys[n*P+k] = -de / (price[j] - cw.eta[j])
			} else {
				dys[n*P+k] = -de
			}
		}
	}
}

func (cw *costWorker) size(J, I, P2 int) {
	cw.alpha = growFloats(cw.alpha, I)
	if len(cw.ones) != I {
		cw.ones = make([]float64, I)
		for i := range cw.ones {
			cw.ones[i] = 1
		}
	}
	cw.D, cw.dD = growFloats(cw.D, J*J), growFloats(cw.dD, J*J)
	cw.dDall = growFloats(cw.dDall, max(P2, 1)*J*J)
	cw.lam, cw.eta, cw.v = growFloats(cw.lam, J), growFloats(cw.eta, J), growFloats(cw.v, J)
	cw.deta, cw.delta = growFloats(cw.deta, J), growFloats(cw.delta, J*J)
	cw.work = growFloats(cw.work, 4*J)
	cw.swaps, cw.iwork = growInts(cw.swaps, J), growInts(cw.iwork, J)
}

func growInts(b []int, n int) []int {
	if cap(b) < n {
		return make([]int, n)
	}
	return b[:n]
}

// factorize overwrites Δ (cw.delta) with its LU factors and estimates its
// condition number, as mat.LU.Factorize does (partial pivoting, the
// condition in mat.CondNorm), but in the worker's buffers: mat.LU returns
// its workspaces to a pool, which allocates on every call.
func (cw *costWorker) factorize() {
	J := len(cw.eta)
	a := blas64.General{Rows: J, Cols: J, Stride: J, Data: cw.delta}
	anorm := lapack64.Lange(mat.CondNorm, a, cw.work)
	cw.ok = lapack64.Getrf(a, cw.swaps)
	cw.cond = math.Inf(1)
	if cw.ok {
		cw.cond = 1 / lapack64.Gecon(mat.CondNorm, a, anorm, cw.work, cw.iwork)
	}
}

// solve writes Δ⁻¹b into dst from the factors of factorize; like
// mat.LU.SolveVecTo it returns a mat.Condition error when Δ is singular or
// its condition number exceeds mat.ConditionTolerance.
func (cw *costWorker) solve(dst, b []float64) error {
	if !cw.ok {
		return mat.Condition(math.Inf(1))
	}
	J := len(dst)
	copy(dst, b)
	a := blas64.General{Rows: J, Cols: J, Stride: J, Data: cw.delta}
	lapack64.Getrs(blas.NoTrans, a, blas64.General{Rows: J, Cols: 1, Stride: 1, Data: dst}, cw.swaps)
	if cw.cond > mat.ConditionTolerance {
		return mat.Condition(cw.cond)
	}
	return nil
}

// supplyMatrix returns Δ with Δ_jl = −Ω_jl ∂s_l/∂p_j.
func supplyMatrix(dsdp []float64, owner []int) *mat.Dense {
	J := len(owner)
	delta := make([]float64, J*J)
	FillSupplyMatrix(delta, dsdp, owner)
	return mat.NewDense(J, J, delta)
}

// FillSupplyMatrix writes Δ (J×J, row-major), Δ_jl = −Ω_jl ∂s_l/∂p_j, into
// dst, for ∂s/∂p row-major (row j column l = ∂s_j/∂p_l) and the owners (a
// firm index per product): the matrix of the first-order conditions
// s − Δ(p − c) = 0, whose solution Δ⁻¹s is the markups.
func FillSupplyMatrix(dst, dsdp []float64, owner []int) {
	J := len(owner)
	for j := 0; j < J; j++ {
		for l := 0; l < J; l++ {
			v := 0.0
			if owner[j] == owner[l] {
				v = -dsdp[l*J+j]
			}
			dst[j*J+l] = v
		}
	}
}

// CostEquation returns, at the estimates, the fitted part of the cost
// equation wγ̂ and its residual ω̂ (in levels under "linear", in logs under
// "log"), with the form; ok is false without a supply side. gamma is γ̂ in
// the order of the cost columns.
func (f *Fitted) CostEquation(gamma []float64) (fitted, omega []float64, form string, ok bool, err error) {
	m := f.Model
	if m.Supply == nil {
		return nil, nil, "", false, nil
	}
	cost, _, err := f.Costs()
	if err != nil {
		return nil, nil, "", true, err
	}
	n := m.N()
	var wg mat.VecDense
	wg.MulVec(m.Supply.W, mat.NewVecDense(len(gamma), gamma))
	fitted, omega = make([]float64, n), make([]float64, n)
	for i := range omega {
		y := cost[i]
		if m.Supply.form == "log" {
			if !(y > 0) {
				return nil, nil, "", true, fmt.Errorf("row %d: the implied marginal cost %.4g is not positive", i+1, y)
			}
			y = math.Log(y)
		}
		fitted[i] = wg.AtVec(i)
		omega[i] = y - fitted[i]
	}
	return fitted, omega, m.Supply.form, true, nil
}
