package contraction

import "fmt"

// Market is the share model of a demand family in one market at a time: the
// seam through which estimation, post-estimation, markups and counterfactual
// equilibria reach market shares. A new family is a new implementation of
// Market (and a Family that makes it); its callers do not change.
//
// An implementation is used by one goroutine. It keeps its own buffers,
// grown to the largest market it has been set to, so that evaluations
// allocate nothing.
type Market interface {
	// Set points the evaluator at market t of its problem at θ2 = theta:
	// the agents' tastes and everything that depends only on them.
	Set(t int, theta []float64)
	// Size returns the products J and agents I of the current market.
	Size() (J, I int)
	// Shares writes the market shares at mean utilities delta into dst and
	// reports whether every share is positive and finite.
	Shares(delta, dst []float64) bool
	// Damping writes the step factor of the inversion map for each product:
	// δ ← δ + damping∘(ln s_obs − ln s(δ)). It is 1 for the logit and 1 − ρ
	// for a nested logit.
	Damping(dst []float64)
	// Jacobians writes ∂s/∂δ (J×J, row-major, symmetric) into dsdd and, when
	// dsdt is not nil, ∂s/∂θ2 (J×P, P = Problem.NumParams()) into dsdt, at
	// delta. It reports whether the shares there are positive and finite.
	Jacobians(delta, dsdd, dsdt []float64) bool
	// Reprice sets the prices of the current market's products where they
	// enter the tastes (the price column of X2); it is a no-op when price
	// has no random coefficient.
	Reprice(price []float64)
	// Alpha writes each agent's price coefficient α_i, given the mean price
	// coefficient betaPrice, into dst (length I).
	Alpha(betaPrice float64, dst []float64)
	// PriceJacobian writes ∂s/∂p (J×J, row j column l = ∂s_j/∂p_l) at delta
	// for agents' price coefficients alpha into dsdp and the diagonal
	// Λ_j = ∂s_j/∂p_j + Γ_jj of its split ∂s/∂p = diag(Λ) − Γ into lambda (the
	// split the ζ fixed point of Morrow & Skerlos 2011 uses).
	PriceJacobian(delta, alpha, dsdp, lambda []float64)
	// LogInclusive writes each agent's expected maximum utility net of
	// Euler's constant, ln(1 + Σ exp(·)) in the logit, at delta into dst.
	LogInclusive(delta, dst []float64)
}

// Starter is implemented by a Market whose inversion has a better starting
// point than the logit inversion ln s_j − ln s_0, such as the exact inversion
// of the nested logit at σ = 0. Start writes that point for the current
// market, from its observed log shares, into delta.
type Starter interface {
	Start(logShare, delta []float64)
}

// Family is a demand family: it checks its data against a problem and makes
// the Market evaluators of the problem's markets.
type Family interface {
	// NewMarket returns an evaluator for the markets of p, for one goroutine.
	NewMarket(p *Problem) Market
	// Params returns the number of the family's own parameters (such as
	// nesting parameters), which follow the taste parameters in θ2.
	Params() int
	// Check reports whether the family's data fit p.
	Check(p *Problem) error
	// String names the family.
	String() string
}

// RowFamily is implemented by a family that holds data per row of its
// problem (the nested logit's nests). Rows returns the family of a problem
// made of the given rows of the original, in that order, for callers that
// build such a problem (resampled markets).
type RowFamily interface {
	Family
	Rows(rows []int) Family
}

// RCLogit is the random-coefficients logit family (Berry, Levinsohn & Pakes
// 1995), the default.
var RCLogit Family = rcLogitFamily{}

type rcLogitFamily struct{}

func (rcLogitFamily) NewMarket(p *Problem) Market { return &rcLogitMarket{*newRCLogit(p)} }
func (rcLogitFamily) Params() int                 { return 0 }
func (rcLogitFamily) Check(*Problem) error        { return nil }
func (rcLogitFamily) String() string              { return "random-coefficients logit" }

// Span is a half-open block of rows [Start, End).
type Span struct{ Start, End int }

// Len returns End − Start.
func (s Span) Len() int { return s.End - s.Start }

// Param places one taste parameter of θ2: it multiplies random column Col of
// X2 and agent variable Var, so ∂μ_ij/∂θ_p = x2_j,Col · v_i,Var.
type Param struct{ Col, Var int }

// Problem is the data of the share model for all markets.
type Problem struct {
	K2       int         // random characteristic columns
	Params   []Param     // the taste parameters of θ2
	X2       []float64   // N×K2 row-major
	LogShare []float64   // N, ln s_obs
	Products []Span      // rows of each market
	Agents   []Span      // agents of each market
	Weight   []float64   // one weight per agent
	Vars     [][]float64 // agent variables, one slice over all agents per variable
	// PriceCol is the column of X2 holding price, or −1 when price has no
	// random coefficient. Market.Reprice writes there.
	PriceCol int
	// LogNormal marks the columns of X2 (nil, or one flag per column) whose
	// coefficient is log-normal and negative: a_ik = −exp(Σ_{p: Col_p = k}
	// θ_p v_i,Var_p) instead of the sum itself. Its location is a taste
	// parameter on an agent variable of ones.
	LogNormal []bool
	// Family is the demand family; nil means RCLogit.
	Family Family
}

// family returns p's family with the default filled in.
func (p *Problem) family() Family {
	if p.Family == nil {
		return RCLogit
	}
	return p.Family
}

// NumParams returns the length of θ2: the taste parameters followed by the
// family's own.
func (p *Problem) NumParams() int { return len(p.Params) + p.family().Params() }

// NewMarket returns an evaluator of p's family for one goroutine.
func (p *Problem) NewMarket() Market { return p.family().NewMarket(p) }

// Validate checks the dimensions of p.
func (p *Problem) Validate() error {
	n := len(p.LogShare)
	if len(p.X2) != n*p.K2 {
		return fmt.Errorf("contraction: X2 has %d values, want %d×%d", len(p.X2), n, p.K2)
	}
	if len(p.Products) != len(p.Agents) {
		return fmt.Errorf("contraction: %d product spans but %d agent spans", len(p.Products), len(p.Agents))
	}
	if p.PriceCol < -1 || p.PriceCol >= p.K2 {
		return fmt.Errorf("contraction: price column %d out of range for %d random columns", p.PriceCol, p.K2)
	}
	if p.LogNormal != nil && len(p.LogNormal) != p.K2 {
		return fmt.Errorf("contraction: %d log-normal flags for %d random columns", len(p.LogNormal), p.K2)
	}
	for _, q := range p.Params {
		if q.Col < 0 || q.Col >= p.K2 || q.Var < 0 || q.Var >= len(p.Vars) {
			return fmt.Errorf("contraction: parameter %+v out of range", q)
		}
	}
	for _, v := range p.Vars {
		if len(v) != len(p.Weight) {
			return fmt.Errorf("contraction: an agent variable has %d values for %d agents", len(v), len(p.Weight))
		}
	}
	return p.family().Check(p)
}

// grow returns b with length n, reallocating only when its capacity is short.
func grow[T any](b []T, n int) []T {
	if cap(b) < n {
		return make([]T, n)
	}
	return b[:n]
}
