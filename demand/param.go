package demand

import (
	"fmt"
	"math"
	"math/rand/v2"
)

// Kind is the kind of a model parameter. A kind carries its bounds and its
// label, so code asks a parameter what it is instead of comparing strings.
type Kind int

// The parameter kinds.
const (
	Beta     Kind = iota // coefficient of a linear characteristic in mean utility
	Sigma                // standard deviation of a normal taste
	Pi                   // interaction of a characteristic with a demographic
	Rho                  // nesting parameter
	Cholesky             // entry of the Cholesky factor of the taste covariance
	Gamma                // coefficient of a marginal-cost column
)

var kindNames = [...]string{Beta: "beta", Sigma: "sigma", Pi: "pi", Rho: "rho", Cholesky: "cholesky", Gamma: "gamma"}

// String returns the kind's name as used in the results file ("beta", …).
func (k Kind) String() string {
	if k < 0 || int(k) >= len(kindNames) {
		return fmt.Sprintf("Kind(%d)", int(k))
	}
	return kindNames[k]
}

// rhoMax is the largest nesting parameter the optimiser may try: at ρ = 1
// the within-nest logit is degenerate (common practice to stop short of it).
const rhoMax = 1 - 1e-6

// Param is one parameter of the model.
type Param struct {
	Kind        Kind
	Column      string // the characteristic (or cost column) it belongs to
	Demographic string // Pi: the demographic
	Nest        string // Rho: the nest, or "all"
	Other       string // Cholesky: the column of the taste draw (Column is the row)
}

// Name is the parameter's label, e.g. "sigma[price]", "pi[price×income]",
// "rho[all]", "cholesky[price,1]".
func (p Param) Name() string {
	switch p.Kind {
	case Pi:
		return "pi[" + p.Column + "×" + p.Demographic + "]"
	case Rho:
		return "rho[" + p.Nest + "]"
	case Cholesky:
		return "cholesky[" + p.Column + "," + p.Other + "]"
	}
	return p.Kind.String() + "[" + p.Column + "]"
}

// Bounds returns the interval the parameter lives in: σ ≥ 0, 0 ≤ ρ < 1, a
// diagonal Cholesky entry ≥ 0; the others are unbounded.
func (p Param) Bounds() (lo, hi float64) {
	switch {
	case p.Kind == Sigma, p.Kind == Cholesky && p.Column == p.Other:
		return 0, math.Inf(1)
	case p.Kind == Rho:
		return 0, rhoMax
	}
	return math.Inf(-1), math.Inf(1)
}

// Project returns x moved into the parameter's bounds: the transform that a
// bound-constrained optimiser applies to a trial point.
func (p Param) Project(x float64) float64 {
	lo, hi := p.Bounds()
	return math.Min(math.Max(x, lo), hi)
}

// DefaultStart is the starting value when the spec gives none: 1 for a
// standard deviation (or a diagonal Cholesky entry), 0.5 for a nesting
// parameter, 0 otherwise.
func (p Param) DefaultStart() float64 {
	switch {
	case p.Kind == Sigma, p.Kind == Cholesky && p.Column == p.Other:
		return 1
	case p.Kind == Rho:
		return 0.5
	}
	return 0
}

// RandomStart draws a starting value for a multi-start search from rng,
// by kind: σ and a diagonal Cholesky entry uniform on [0, 3·max(1, start)],
// ρ uniform on [0, 0.9], the others start + N(0, 1).
func (p Param) RandomStart(rng *rand.Rand, start float64) float64 {
	switch {
	case p.Kind == Sigma, p.Kind == Cholesky && p.Column == p.Other:
		return rng.Float64() * 3 * math.Max(1, start)
	case p.Kind == Rho:
		return rng.Float64() * 0.9
	}
	return start + rng.NormFloat64()
}
