package demand

import (
	"math"
	"slices"

	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
)

// objective evaluates Q(θ2) and its gradient for one weighting matrix; it
// owns a share solver.
type objective struct {
	m      *Model
	iv     *IV
	solver *contraction.Solver
	jac    []float64 // N×P
	jacD   []float64 // the same, fixed effects removed
	delta  []float64
	p      int
	mon    Monitor
	tol    float64 // gradient tolerance

	evals, innerIter int
	innerFail        []int // per market, summed over evaluations
	innerIterByMkt   []int
	lastFit          Fit
	lastOK           bool

	solvedAt []float64 // θ2 of the last inversion
	haveJac  bool      // o.jac holds ∂δ/∂θ2 from an inversion near solvedAt
	memo     memo
}

func newObjective(m *Model, iv *IV, set Settings, mon Monitor) (*objective, error) {
	s, err := contraction.NewSolver(m.Problem)
	if err != nil {
		return nil, err
	}
	s.Tolerance = set.InnerTolerance
	s.MaxIterations = set.InnerMaxIterations
	p := len(m.Params)
	n := m.N()
	T := len(m.Problem.Products)
	return &objective{m: m, iv: iv, solver: s, jac: make([]float64, n*p), jacD: make([]float64, n*p),
		delta: make([]float64, n), p: p, mon: mon, tol: set.GradientTolerance,
		innerFail: make([]int, T), innerIterByMkt: make([]int, T)}, nil
}

// abs maps the optimiser's unconstrained θ2 to the model's: σ enters through
// its absolute value, the others as they are.
func (o *objective) abs(x []float64) []float64 {
	t := make([]float64, len(x))
	for i, v := range x {
		if o.m.Params[i].Kind == Sigma {
			v = math.Abs(v)
		}
		t[i] = v
	}
	return t
}

// flipSigns turns a gradient with respect to the model's θ2 (σ ≥ 0) into
// one with respect to the optimiser's x, where σ = |x|.
func (o *objective) flipSigns(x, g []float64) {
	for i := range g {
		if o.m.Params[i].Kind == Sigma && x[i] < 0 {
			g[i] = -g[i]
		}
	}
}

// eval returns Q at x and, when grad is not nil, dQ/dx. A failed inversion
// gives +Inf, which the line search treats as a step too far.
func (o *objective) eval(x, grad []float64) float64 {
	theta := o.abs(x)
	if m := &o.memo; m.ok && m.w == o.iv.W() && slices.Equal(m.theta, theta) && (grad == nil || m.grad != nil) {
		// The last evaluation was at this θ2 under this weighting matrix:
		// its results (and the solver's δ and Jacobian) still hold.
		o.lastFit, o.lastOK = m.fit, !math.IsInf(m.q, 1)
		copy(grad, m.grad)
		o.flipSigns(x, grad)
		return m.q
	}
	q := o.evaluate(theta, grad)
	o.memo = memo{ok: true, w: o.iv.W(), theta: theta, q: q, fit: o.lastFit}
	if grad != nil {
		o.memo.grad = slices.Clone(grad)
		o.flipSigns(x, grad)
	}
	return q
}

// memo is the last evaluation of an objective; grad (nil when not computed)
// is with respect to θ2 with σ ≥ 0.
type memo struct {
	ok    bool
	w     *mat.SymDense
	theta []float64
	q     float64
	grad  []float64
	fit   Fit
}

// evaluate is eval without the memo, at the model's θ2; grad is with respect
// to θ2.
func (o *objective) evaluate(theta, grad []float64) float64 {
	o.evals++
	var jac []float64
	if grad != nil && o.p > 0 {
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
		o.lastOK = false
		for i := range grad {
			grad[i] = 0
		}
		return math.Inf(1)
	}
	copy(o.delta, o.solver.Delta)
	if o.m.absorb != nil {
		o.m.absorb.apply(o.delta)
	}
	fit := o.iv.Solve(o.delta)
	o.lastFit, o.lastOK = fit, true
	if grad != nil && o.p > 0 {
		copy(grad, o.iv.Gradient(o.jacobian(), o.p, fit.GBar))
	}
	return fit.Q
}

// jacobian returns ∂δ/∂θ2 of the last evaluation with the fixed effects
// removed (the Jacobian of ξ with respect to θ2).
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

// gradient returns Q and dQ/dx at x.
func (o *objective) gradient(x []float64) (float64, []float64) {
	g := make([]float64, o.p)
	q := o.eval(x, g)
	return q, g
}

// infNorm returns max_i |g_i|.
func infNorm(g []float64) float64 {
	if len(g) == 0 {
		return 0
	}
	return floats.Norm(g, math.Inf(1))
}

// hessian returns the central finite-difference Hessian of the analytic
// gradient at x, symmetrised.
func (o *objective) hessian(x []float64) *mat.SymDense {
	p := o.p
	H := mat.NewDense(p, p, nil)
	for q := 0; q < p; q++ {
		h := 1e-5 * math.Max(1, math.Abs(x[q]))
		up := slices.Clone(x)
		dn := slices.Clone(x)
		up[q] += h
		dn[q] -= h
		_, gu := o.gradient(up)
		_, gd := o.gradient(dn)
		for r := 0; r < p; r++ {
			H.Set(r, q, (gu[r]-gd[r])/(2*h))
		}
	}
	return symOf(H)
}
