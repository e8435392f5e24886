package demand

import (
	"math"
	"slices"
	"time"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
)

// point is one evaluation of the GMM objective: Q at θ2 and, when the
// inversion succeeded and the Jacobian was asked for, the gradient and the
// Jacobian of the concentrated moments.
type point struct {
	theta []float64
	q     float64 // +Inf when some market's inversion failed
	fit   Fit
	grad  []float64  // dQ/dθ2 = 2N·G'Wḡ (nil without the Jacobian)
	gc    *mat.Dense // dḡ/dθ2 with β concentrated out (M×P; nil without the Jacobian)
}

// ok reports whether the shares could be inverted at the point.
func (pt *point) ok() bool { return !math.IsInf(pt.q, 1) }

// objective evaluates Q(θ2) = N·ḡ'Wḡ, its gradient and the Jacobian of the
// concentrated moments for one weighting matrix; it owns a share solver.
type objective struct {
	m      *Model
	iv     *IV
	solver *contraction.Solver
	jac    []float64 // N×P, ∂δ/∂θ2 of the last inversion with the Jacobian
	jacD   []float64 // the same, fixed effects removed
	delta  []float64
	p      int
	mon    Monitor
	lim    *limits
	tol    float64 // gradient tolerance of convergence

	calls, innerIter int
	innerFail        []int // per market, summed over evaluations
	innerIterByMkt   []int

	solvedAt []float64 // θ2 of the last inversion
	haveJac  bool      // o.jac holds ∂δ/∂θ2 from an inversion near solvedAt
	last     *point    // the last evaluation (memo)
}

func newObjective(m *Model, iv *IV, set Settings, mon Monitor, lim *limits) (*objective, error) {
	s, err := contraction.NewSolver(m.Problem)
	if err != nil {
		return nil, err
	}
	s.Tolerance = set.InnerTolerance
	s.MaxIterations = set.InnerMaxIterations
	p := len(m.Params)
	n := m.N()
	T := len(m.Problem.Products)
	if lim == nil {
		lim = newLimits(set)
	}
	return &objective{m: m, iv: iv, solver: s, jac: make([]float64, n*p), jacD: make([]float64, n*p),
		delta: make([]float64, n), p: p, mon: mon, lim: lim, tol: set.GradientTolerance,
		innerFail: make([]int, T), innerIterByMkt: make([]int, T)}, nil
}

// at evaluates the objective at theta, with the gradient and the moment
// Jacobian when withJac is set. Asking again at the last point under the
// same weighting matrix costs nothing.
func (o *objective) at(theta []float64, withJac bool) *point {
	if l := o.last; l != nil && l.fit.W == o.iv.W() && slices.Equal(l.theta, theta) && (!withJac || o.p == 0 || l.gc != nil || !l.ok()) {
		return l
	}
	pt := o.evaluate(slices.Clone(theta), withJac)
	o.last = pt
	return pt
}

// evaluate is at without the memo.
func (o *objective) evaluate(theta []float64, withJac bool) *point {
	o.calls++
	o.lim.calls++
	pt := &point{theta: theta, q: math.Inf(1)}
	var jac []float64
	if withJac && o.p > 0 {
		jac = o.jac
	}
	if o.haveJac && o.solvedAt != nil {
		d := make([]float64, len(theta))
		floats.SubTo(d, theta, o.solvedAt)
		o.solver.Predict(o.jac, d)
	}
	sum := o.solver.Solve(theta, jac)
	o.solvedAt = append(o.solvedAt[:0], theta...)
	if jac != nil {
		o.haveJac = sum.Failures == 0
	}
	o.innerIter += sum.Iterations
	for t, it := range o.solver.Iterations {
		o.innerIterByMkt[t] += it
		if o.solver.Failed[t] {
			o.innerFail[t]++
		}
	}
	if sum.Failures > 0 {
		return pt
	}
	copy(o.delta, o.solver.Delta)
	if o.m.absorb != nil {
		o.m.absorb.apply(o.delta)
	}
	pt.fit = o.iv.Solve(o.delta)
	pt.q = pt.fit.Q
	if withJac && o.p > 0 {
		pt.gc = o.iv.ConcentratedJacobian(o.jacobian(), o.p)
		pt.grad = o.iv.Gradient(o.jacobian(), o.p, pt.fit.GBar)
	}
	return pt
}

// jacobian returns ∂δ/∂θ2 of the last evaluation with the fixed effects
// removed (the Jacobian of ξ with respect to θ2 before β is concentrated
// out).
func (o *objective) jacobian() []float64 {
	if o.m.absorb == nil {
		return o.jac
	}
	jd := o.jacD
	copy(jd, o.jac)
	col := make([]float64, o.m.N())
	for q := 0; q < o.p; q++ {
		for i := range col {
			col[i] = jd[i*o.p+q]
		}
		o.m.absorb.apply(col)
		for i := range col {
			jd[i*o.p+q] = col[i]
		}
	}
	return jd
}

// gaussNewton returns 2N·Gc'WGc, the Gauss–Newton part of the Hessian of Q
// at a point with its Jacobian.
func (o *objective) gaussNewton(pt *point) *mat.SymDense {
	var wg mat.Dense
	wg.Mul(o.iv.W(), pt.gc)
	var h mat.Dense
	h.Mul(pt.gc.T(), &wg)
	h.Scale(2*float64(o.m.N()), &h)
	return symOf(&h)
}

// infNorm returns max_i |g_i|.
func infNorm(g []float64) float64 {
	if len(g) == 0 {
		return 0
	}
	return floats.Norm(g, math.Inf(1))
}

// limits bounds the work of an estimation: objective calls over the whole
// run (all steps and starts) and a wall-clock limit.
type limits struct {
	calls, maxCalls int
	deadline        time.Time // zero: none
}

func newLimits(set Settings) *limits {
	l := &limits{maxCalls: set.MaxObjectiveCalls}
	if set.TimeLimit > 0 {
		l.deadline = time.Now().Add(set.TimeLimit)
	}
	return l
}

// exceeded returns the status of the limit reached, or Running.
func (l *limits) exceeded() Status {
	switch {
	case l.maxCalls > 0 && l.calls >= l.maxCalls:
		return CallLimit
	case !l.deadline.IsZero() && time.Now().After(l.deadline):
		return TimeLimit
	}
	return Running
}
