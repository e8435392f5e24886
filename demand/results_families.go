package demand

import (
	"fmt"
	"math"
	"slices"
	"sort"

	"gonum.org/v1/gonum/mat"
)

// Entry is one entry of a matrix of estimates: the Cholesky factor L of the
// taste covariance (row ≥ column in the order of [demand] random) or an
// implied correlation.
type Entry struct {
	Row    string   `json:"row"`
	Column string   `json:"column"`
	Value  float64  `json:"value"`
	SE     *float64 `json:"se"`
}

// PriceAlpha describes the agents' price coefficients under a log-normal
// price sensitivity, α_i = −exp(β + σν_i + Σ_d Π_d D_id), at the estimates.
type PriceAlpha struct {
	Distribution string `json:"distribution"`
	// AtLocation is −exp(β), the α of an agent with ν = 0 and D = 0 (the
	// median α without demographics), with its delta-method standard error.
	AtLocation   float64  `json:"alpha_at_location"`
	AtLocationSE *float64 `json:"alpha_at_location_se"`
	// Mean and Median are over the sample's agents (weights w_i, markets
	// weighted equally); Median is omitted when some weight is negative.
	Mean   float64  `json:"alpha_mean"`
	Median *float64 `json:"alpha_median,omitempty"`
	Note   string   `json:"note"`
}

// locationNote says what price's β is under a log-normal price sensitivity.
const locationNote = "location of ln(−α_i): α_i = −exp(β + σ ν_i + Σ_d Π_d D_id), a nonlinear parameter; price is not in mean utility"

// Labelled is one estimated parameter with its kind ("beta", "gamma",
// "sigma", "pi", "rho", "cholesky"), name (the column; the nest for ρ;
// "row,column" for an entry of L) and demographic (Π).
type Labelled struct {
	Kind, Name, Demographic string
	Value                   float64
	SE                      *float64
}

// List returns every estimate in the order of the covariance matrix: β of
// X1, γ, then θ in the model's order — a nonlinear β, σ (or the entries of
// L, of which σ is then a function), Π, ρ.
func (r *Results) List() []Labelled {
	var out []Labelled
	add := func(kind string, cs []Coef) {
		for _, c := range cs {
			out = append(out, Labelled{Kind: kind, Name: c.Name, Demographic: c.Demographic, Value: c.Value, SE: c.SE})
		}
	}
	linear, nonlinear := r.splitBeta()
	add("beta", linear)
	add("gamma", r.Gamma)
	add("beta", nonlinear)
	if len(r.Cholesky) > 0 {
		for _, e := range r.Cholesky {
			out = append(out, Labelled{Kind: "cholesky", Name: e.Row + "," + e.Column, Value: e.Value, SE: e.SE})
		}
	} else {
		add("sigma", r.Sigma)
	}
	add("pi", r.Pi)
	add("rho", r.Rho)
	return out
}

// keyed is one parameter of a results file with its value.
type keyed struct {
	Param
	value float64
}

// params returns the results' parameters of θ2 other than β by kind, in
// their order: σ (unless the results hold a Cholesky factor, of which σ is
// a function), Π, ρ and the entries of L. (ThetaOf finds a β of θ in
// Results.Beta by its column.)
func (r *Results) params() map[Kind][]keyed {
	out := map[Kind][]keyed{}
	add := func(p Param, v float64) { out[p.Kind] = append(out[p.Kind], keyed{p, v}) }
	if len(r.Cholesky) == 0 {
		for _, c := range r.Sigma {
			add(Param{Kind: Sigma, Column: c.Name}, c.Value)
		}
	}
	for _, c := range r.Pi {
		add(Param{Kind: Pi, Column: c.Name, Demographic: c.Demographic}, c.Value)
	}
	for _, c := range r.Rho {
		add(Param{Kind: Rho, Nest: c.Name}, c.Value)
	}
	for _, e := range r.Cholesky {
		add(Param{Kind: Cholesky, Column: e.Row, Other: e.Column}, e.Value)
	}
	return out
}

// numParams returns the number of estimated parameters (the size of the
// covariance): all β and γ, σ unless implied by L, Π, ρ and L.
func (r *Results) numParams() int {
	n := len(r.Beta) + len(r.Gamma) + len(r.Pi) + len(r.Rho) + len(r.Cholesky)
	if len(r.Cholesky) == 0 {
		n += len(r.Sigma)
	}
	return n
}

// splitBeta returns the β of the linear columns, in the order of X1, and
// the nonlinear β (the log-normal location, a parameter of θ).
func (r *Results) splitBeta() (linear, nonlinear []Coef) {
	for _, c := range r.Beta {
		if c.Nonlinear {
			nonlinear = append(nonlinear, c)
		} else {
			linear = append(linear, c)
		}
	}
	return linear, nonlinear
}

// setImplied fills what the families' parameters imply, with delta-method
// standard errors from V (the covariance of (β, θ2); θ2 starts at row K):
// under a full covariance, σ_k = √(LLᵀ)_kk and the correlations
// (LLᵀ)_kl/(σ_k σ_l); under a log-normal price sensitivity, the summary of
// the agents' α_i.
func (r *Results) setImplied(m *Model, theta []float64, V *mat.SymDense, K int) {
	r.Correlation, r.PriceAlpha = nil, nil
	se := func(grad map[int]float64) *float64 {
		if V == nil {
			return nil
		}
		v := 0.0
		for a, ga := range grad {
			for b, gb := range grad {
				v += ga * V.At(K+a, K+b) * gb
			}
		}
		if !(v >= 0) {
			return nil
		}
		s := math.Sqrt(v)
		return &s
	}
	if m.Spec.FullCovariance() {
		r.impliedCovariance(m, theta, se)
	}
	if m.Spec.LogNormalPrice() {
		r.impliedAlpha(m, theta, se)
	}
}

// impliedCovariance sets σ and the correlations implied by L. With Σ = LLᵀ,
// ∂Σ_kl/∂L_am = 1[a=k] L_lm + 1[a=l] L_km, ∂σ_k/∂L_km = L_km/σ_k.
func (r *Results) impliedCovariance(m *Model, theta []float64, se func(map[int]float64) *float64) {
	random := m.Spec.Demand.Random
	R := len(random)
	idx := make([][]int, R) // θ2 index of L_kl, −1 above the diagonal
	for k := range idx {
		idx[k] = make([]int, R)
		for l := range idx[k] {
			idx[k][l] = -1
		}
	}
	for i, p := range m.Params {
		if p.Kind == Cholesky {
			idx[slices.Index(random, p.Column)][slices.Index(random, p.Other)] = i
		}
	}
	L := func(k, l int) float64 {
		if idx[k][l] < 0 {
			return 0
		}
		return theta[idx[k][l]]
	}
	// cov returns Σ_kl and its gradient in θ2.
	cov := func(k, l int) (float64, map[int]float64) {
		v, g := 0.0, map[int]float64{}
		for q := 0; q <= min(k, l); q++ {
			v += L(k, q) * L(l, q)
			g[idx[k][q]] += L(l, q)
			g[idx[l][q]] += L(k, q)
		}
		return v, g
	}
	sd := make([]float64, R)
	sdGrad := make([]map[int]float64, R)
	r.Sigma = []Coef{}
	for k, c := range random {
		v, g := cov(k, k)
		sd[k] = math.Sqrt(v)
		sdGrad[k] = map[int]float64{}
		for a, x := range g {
			sdGrad[k][a] = x / (2 * sd[k])
		}
		e := se(sdGrad[k])
		if sd[k] == 0 {
			e = nil // √ is not differentiable at 0
		}
		r.Sigma = append(r.Sigma, Coef{Name: c, Value: sd[k], SE: e})
	}
	for k := 1; k < R; k++ {
		for l := 0; l < k; l++ {
			v, g := cov(k, l)
			entry := Entry{Row: random[k], Column: random[l], Value: math.NaN()}
			if sd[k] > 0 && sd[l] > 0 {
				c := v / (sd[k] * sd[l])
				grad := map[int]float64{}
				for a, x := range g {
					grad[a] += x / (sd[k] * sd[l])
				}
				for a, x := range sdGrad[k] {
					grad[a] -= c * x / sd[k]
				}
				for a, x := range sdGrad[l] {
					grad[a] -= c * x / sd[l]
				}
				entry.Value, entry.SE = c, se(grad)
			}
			if math.IsNaN(entry.Value) {
				entry.Value = 0 // a taste with no variance is uncorrelated
			}
			r.Correlation = append(r.Correlation, entry)
		}
	}
	r.Notes = append(r.Notes, "random_covariance = \"full\": cholesky holds L (taste covariance LLᵀ); sigma holds √diag(LLᵀ) and correlations the implied correlations, with delta-method standard errors")
}

// impliedAlpha summarises α_i = −exp(Σ_p θ_p v_ip) over the price
// parameters for the sample's agents.
func (r *Results) impliedAlpha(m *Model, theta []float64, se func(map[int]float64) *float64) {
	p := m.Problem
	loc := slices.IndexFunc(m.Params, func(q Param) bool { return q.Kind == Beta })
	pa := &PriceAlpha{Distribution: PriceLogNormal, AtLocation: -math.Exp(theta[loc]),
		Note: "α_i = −exp(β + σ ν_i + Σ_d Π_d D_id) < 0 for every consumer; β (beta \"" + m.Spec.Columns.Price + "\") is the location of ln(−α_i) and σ its scale"}
	pa.AtLocationSE = se(map[int]float64{loc: pa.AtLocation})
	type agent struct{ a, w float64 }
	var agents []agent
	T := float64(len(p.Agents))
	negative := false
	for _, span := range p.Agents {
		for i := span.Start; i < span.End; i++ {
			x := 0.0
			for q, par := range p.Params {
				if par.Col == p.PriceCol {
					x += theta[q] * p.Vars[par.Var][i]
				}
			}
			a := agent{-math.Exp(x), p.Weight[i] / T}
			pa.Mean += a.a * a.w
			negative = negative || a.w < 0
			agents = append(agents, a)
		}
	}
	if !negative {
		sort.Slice(agents, func(i, j int) bool { return agents[i].a < agents[j].a })
		cum, total := 0.0, 0.0
		for _, a := range agents {
			total += a.w
		}
		for _, a := range agents {
			cum += a.w
			if cum >= total/2 {
				med := a.a
				pa.Median = &med
				break
			}
		}
	}
	r.PriceAlpha = pa
	r.Notes = append(r.Notes, fmt.Sprintf("price_distribution = \"lognormal\": beta %q is the location of ln(−α_i), not a coefficient in mean utility; α at the location %.4g, mean α over the sample's agents %.4g",
		m.Spec.Columns.Price, pa.AtLocation, pa.Mean))
}
