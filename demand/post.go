package demand

import (
	"fmt"
	"slices"

	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
)

// Fitted is an estimated model ready for post-estimation: δ at θ̂2, ξ, and
// each agent's price coefficient α_i. Theta is the model's θ (with a supply
// side it begins with the price coefficient, which is also in Beta).
type Fitted struct {
	Model *Model
	Beta  []float64
	Theta []float64
	Delta []float64 // N, the inversion at Theta
	Xi    []float64 // N, δ − X1β (net of absorbed effects)
	Alpha []float64 // one per agent

	pool *contraction.Pool[*Market]
}

// NewFitted inverts the shares at theta and prepares post-estimation.
func NewFitted(m *Model, beta, theta []float64) (*Fitted, error) {
	if len(beta) != len(m.X1Names) || len(theta) != len(m.Params) {
		return nil, fmt.Errorf("%d linear and %d nonlinear parameters given, the model has %d and %d",
			len(beta), len(theta), len(m.X1Names), len(m.Params))
	}
	if m.PriceX1 < 0 && !m.Spec.LogNormalPrice() {
		return nil, fmt.Errorf("%s: price %q is not a linear column, so price effects are not defined", m.Spec.File, m.Spec.Columns.Price)
	}
	s, err := contraction.NewSolver(m.Problem)
	if err != nil {
		return nil, err
	}
	s.Tolerance = m.Spec.Estimation.InnerTolerance
	s.MaxIterations = m.Spec.Estimation.InnerMaxIter
	if sum := s.Solve(m.ShareTheta(theta), nil); sum.Failures > 0 {
		return nil, fmt.Errorf("the share inversion failed at these parameters in %s", m.failedMarkets(s.Failed))
	}
	f := &Fitted{Model: m, Beta: beta, Theta: theta, Delta: s.Delta}
	xi := slices.Clone(s.Delta)
	if m.absorb != nil {
		m.absorb.apply(xi)
	}
	var xb mat.VecDense
	xb.MulVec(m.X1, mat.NewVecDense(len(beta), beta))
	for i := range xi {
		xi[i] -= xb.AtVec(i)
	}
	f.Xi = xi
	pr := f.Pricing()
	f.pool = contraction.NewPool(pr.NewMarket)
	p := m.Problem
	f.Alpha = make([]float64, len(p.Weight))
	f.pool.Run(len(p.Products), func(mk *Market, t int) {
		mk.Bind(t)
		copy(f.Alpha[p.Agents[t].Start:], mk.Alpha())
	})
	return f, nil
}

// Pricing returns the model's demand as a function of prices at the
// estimates, from the observed prices and the estimated δ. Under a
// log-normal price sensitivity price is not in δ (BetaPrice = 0): it enters
// through the tastes alone.
func (f *Fitted) Pricing() *Pricing {
	b := 0.0
	if k := f.Model.PriceX1; k >= 0 {
		b = f.Beta[k]
	}
	return &Pricing{Problem: f.Model.Problem, Theta: f.Model.ShareTheta(f.Theta), BetaPrice: b,
		Price0: f.Model.Products.Price, Delta0: f.Delta}
}

// MarketDerivatives returns the shares and ∂s/∂p (J×J, row j column l =
// ∂s_j/∂p_l) of market t at the estimates.
func (f *Fitted) MarketDerivatives(t int) (shares []float64, D *mat.Dense) {
	mk := f.Pricing().NewMarket()
	mk.Bind(t)
	J := mk.Len()
	return slices.Clone(mk.Shares()), mat.NewDense(J, J, slices.Clone(mk.PriceJacobian()))
}

// Elasticities returns the J×J matrix e_jl = (∂s_j/∂p_l) p_l / s_j of market t.
func (f *Fitted) Elasticities(t int) *mat.Dense {
	s, D := f.MarketDerivatives(t)
	m := f.Model.Problem.Products[t]
	price := f.Model.Products.Price[m.Start:m.End]
	J := len(s)
	E := mat.NewDense(J, J, nil)
	for j := 0; j < J; j++ {
		for l := 0; l < J; l++ {
			E.Set(j, l, D.At(j, l)*price[l]/s[j])
		}
	}
	return E
}

// Diversion returns the J×(J+1) matrix of diversion ratios of market t,
// D_jl = −(∂s_l/∂p_j)/(∂s_j/∂p_j) for l ≠ j, with the last column the
// diversion to the outside good 1 − Σ_{l≠j} D_jl. The diagonal is the
// formula's −1; outputs leave it empty.
func (f *Fitted) Diversion(t int) *mat.Dense {
	_, D := f.MarketDerivatives(t)
	return DiversionRatios(D)
}

// DiversionRatios returns the diversion matrix (see Fitted.Diversion) of a
// market with ∂s/∂p = D (row j column l = ∂s_j/∂p_l).
func DiversionRatios(D *mat.Dense) *mat.Dense {
	J, _ := D.Dims()
	out := mat.NewDense(J, J+1, nil)
	for j := 0; j < J; j++ {
		sum := 0.0
		for l := 0; l < J; l++ {
			v := -D.At(l, j) / D.At(j, j)
			out.Set(j, l, v)
			if l != j {
				sum += v
			}
		}
		out.Set(j, J, 1-sum)
	}
	return out
}

// AggregateElasticity returns the elasticity of the total inside share of
// market t with respect to a uniform proportional rise of all inside prices:
// Σ_j Σ_l (∂s_j/∂p_l) p_l / Σ_j s_j.
func (f *Fitted) AggregateElasticity(t int) float64 {
	s, D := f.MarketDerivatives(t)
	m := f.Model.Problem.Products[t]
	price := f.Model.Products.Price[m.Start:m.End]
	num, den := 0.0, 0.0
	for j := range s {
		den += s[j]
		for l := range s {
			num += D.At(j, l) * price[l]
		}
	}
	return num / den
}

// OwnElasticities returns e_jj for every row, markets in parallel.
func (f *Fitted) OwnElasticities() []float64 {
	p := f.Model.Problem
	out := make([]float64, f.Model.N())
	f.pool.Run(len(p.Products), func(mk *Market, t int) {
		mk.Bind(t)
		span := p.Products[t]
		J := mk.Len()
		D, s := mk.PriceJacobian(), mk.Shares()
		for j := 0; j < J; j++ {
			n := span.Start + j
			out[n] = D[j*J+j] * f.Model.Products.Price[n] / s[j]
		}
	})
	return out
}

// PositiveAlpha counts agents whose price coefficient is not negative.
func (f *Fitted) PositiveAlpha() int {
	n := 0
	for _, a := range f.Alpha {
		if !(a < 0) {
			n++
		}
	}
	return n
}
