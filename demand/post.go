package demand

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
)

// Fitted is an estimated model ready for post-estimation: δ at θ̂2, ξ, and
// per-agent price coefficients α_i = β_price + Σ_{p on price} θ_p v_ip.
type Fitted struct {
	Model *Model
	Beta  []float64
	Theta []float64
	Delta []float64 // N, the inversion at Theta
	Xi    []float64 // N, δ − X1β (net of absorbed effects)
	Alpha []float64 // one per agent

	workers []*contraction.Workspace
}

// NewFitted inverts the shares at theta and prepares post-estimation.
func NewFitted(m *Model, beta, theta []float64) (*Fitted, error) {
	if len(beta) != len(m.X1Names) || len(theta) != len(m.Params) {
		return nil, fmt.Errorf("%d linear and %d nonlinear parameters given, the model has %d and %d",
			len(beta), len(theta), len(m.X1Names), len(m.Params))
	}
	if m.PriceX1 < 0 {
		return nil, fmt.Errorf("%s: price %q is not a linear column, so price effects are not defined", m.Spec.File, m.Spec.Columns.Price)
	}
	s, err := contraction.NewSolver(m.Problem)
	if err != nil {
		return nil, err
	}
	s.Tolerance = m.Spec.Estimation.InnerTolerance
	s.MaxIterations = m.Spec.Estimation.InnerMaxIter
	sum := s.Solve(theta, nil)
	if sum.Failures > 0 {
		return nil, fmt.Errorf("the share inversion failed at these parameters in %s", m.failedMarkets(s.Failed))
	}
	f := &Fitted{Model: m, Beta: beta, Theta: theta, Delta: s.Delta}
	n := m.N()
	xi := append([]float64(nil), s.Delta...)
	if m.absorb != nil {
		m.absorb.apply(xi)
	}
	xb := mat.NewVecDense(n, nil)
	xb.MulVec(m.X1, mat.NewVecDense(len(beta), beta))
	for i := range xi {
		xi[i] -= xb.AtVec(i)
	}
	f.Xi = xi
	p := m.Problem
	f.Alpha = make([]float64, len(p.Weight))
	for i := range f.Alpha {
		f.Alpha[i] = beta[m.PriceX1]
	}
	for q, par := range p.Params {
		if par.Col == m.PriceX2 {
			for i, v := range p.Vars[par.Var] {
				f.Alpha[i] += theta[q] * v
			}
		}
	}
	f.workers = make([]*contraction.Workspace, contraction.Workers())
	for w := range f.workers {
		f.workers[w] = f.NewWorkspace()
	}
	return f, nil
}

// NewWorkspace returns a workspace sized for every market of the model.
func (f *Fitted) NewWorkspace() *contraction.Workspace { return f.Model.Problem.NewWorkspace() }

// Prepare points w at market t at the estimated θ2 and computes the agent
// shares at the estimated δ.
func (f *Fitted) Prepare(w *contraction.Workspace, t int) {
	m := f.Model.Problem.Products[t]
	f.Model.Problem.Prepare(w, t, f.Theta)
	w.AgentShares(f.Delta[m.Start:m.End])
}

// PriceDerivatives writes ∂s_j/∂p_l = Σ_i w_i α_i s_ij (1[j=l] − s_il) for the
// market w was last evaluated at (by AgentShares) into dst (J×J), with alpha
// the market's agent price coefficients and weight their weights.
func PriceDerivatives(w *contraction.Workspace, J int, alpha, weight []float64, dst *mat.Dense) {
	for j := 0; j < J; j++ {
		sj := w.AgentShareRow(j)
		for l := 0; l < J; l++ {
			sl := w.AgentShareRow(l)
			acc := 0.0
			for i, a := range alpha {
				ind := 0.0
				if j == l {
					ind = 1
				}
				acc += weight[i] * a * sj[i] * (ind - sl[i])
			}
			dst.Set(j, l, acc)
		}
	}
}

// MarketDerivatives returns the shares and ∂s/∂p of market t at the estimate.
func (f *Fitted) MarketDerivatives(t int) (shares []float64, D *mat.Dense) {
	w := f.NewWorkspace()
	f.Prepare(w, t)
	p := f.Model.Problem
	m, a := p.Products[t], p.Agents[t]
	J := m.End - m.Start
	D = mat.NewDense(J, J, nil)
	PriceDerivatives(w, J, f.Alpha[a.Start:a.End], p.Weight[a.Start:a.End], D)
	shares = make([]float64, J)
	for j := range shares {
		shares[j] = w.Share(j)
	}
	return shares, D
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

// Diversion returns the J×(J+1) matrix D_jl = −(∂s_l/∂p_j)/(∂s_j/∂p_j), with
// the diagonal −1 and the last column the diversion to the outside good
// 1 − Σ_{l≠j} D_jl.
func (f *Fitted) Diversion(t int) *mat.Dense {
	_, D := f.MarketDerivatives(t)
	J, _ := D.Dims()
	out := mat.NewDense(J, J+1, nil)
	for j := 0; j < J; j++ {
		sum := 0.0
		for l := 0; l < J; l++ {
			v := -D.At(j, l) / D.At(j, j)
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
	contraction.ForEach(len(p.Products), func(wk, t int) {
		w := f.workers[wk]
		f.Prepare(w, t)
		m, a := p.Products[t], p.Agents[t]
		alpha := f.Alpha[a.Start:a.End]
		weight := p.Weight[a.Start:a.End]
		for j := 0; j < m.End-m.Start; j++ {
			row := w.AgentShareRow(j)
			acc := 0.0
			for i, s := range row {
				acc += weight[i] * alpha[i] * s * (1 - s)
			}
			n := m.Start + j
			out[n] = acc * f.Model.Products.Price[n] / w.Share(j)
		}
	})
	return out
}

// ConsumerSurplus returns the per-capita consumer surplus of market t at mean
// utilities delta with workspace w already prepared at the market's
// characteristics: Σ_i w_i ln(1 + Σ_j exp(δ_j + μ_ij)) / (−α_i) (Small & Rosen
// 1981, agent by agent).
func ConsumerSurplus(w *contraction.Workspace, delta, alpha, weight []float64) float64 {
	w.AgentShares(delta)
	cs := 0.0
	for i, a := range alpha {
		cs += weight[i] * w.LogInclusive(i, delta) / -a
	}
	return cs
}

// PositiveAlpha counts agents whose price coefficient is not negative.
func (f *Fitted) PositiveAlpha() int {
	n := 0
	for _, a := range f.Alpha {
		if !(a < 0) || math.IsNaN(a) {
			n++
		}
	}
	return n
}
