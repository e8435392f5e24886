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
	jac    []float64 // N×P2, ∂δ/∂θ2 of the last inversion with the Jacobian
	jacY   []float64 // rows×P, ∂Y/∂θ of the stacked left-hand side (fixed effects removed)
	delta  []float64
	y      []float64 // rows: the stacked left-hand side [δ − p·β_price ; y_s]
	priceD []float64 // N, price with the fixed effects removed (supply side)
	costs  *costEval // nil without a supply side
	dys    []float64 // N×P, ∂y_s/∂θ
	col    []float64 // N, scratch for a column of ∂Y/∂θ
	idx    []int     // Model.shareIndex
	feSum  []float64 // scratch of the fixed effects' removal
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
	costErr  error     // why the last evaluation's costs failed, if they did
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
	rows := n * iv.Equations
	T := len(m.Problem.Products)
	if lim == nil {
		lim = newLimits(set)
	}
	o := &objective{m: m, iv: iv, solver: s, jac: make([]float64, n*m.Problem.NumParams()), jacY: make([]float64, rows*p),
		delta: make([]float64, n), y: make([]float64, rows), col: make([]float64, n), idx: m.shareIndex(), p: p, mon: mon, lim: lim, tol: set.GradientTolerance,
		innerFail: make([]int, T), innerIterByMkt: make([]int, T)}
	if m.absorb != nil {
		o.feSum = make([]float64, m.absorb.size)
	}
	if m.Supply != nil {
		o.costs = newCostEval(m)
		o.dys = make([]float64, n*p)
		o.priceD = mat.Col(nil, m.PriceX1, m.X1) // fixed effects removed at assembly
	}
	return o, nil
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
	theta2 := o.m.ShareTheta(theta)
	var jac []float64
	if withJac && len(theta2) > 0 {
		jac = o.jac
	}
	if o.haveJac && o.solvedAt != nil {
		d := make([]float64, len(theta2))
		floats.SubTo(d, theta2, o.solvedAt)
		o.solver.Predict(o.jac, d)
	}
	sum := o.solver.Solve(theta2, jac)
	o.solvedAt = append(o.solvedAt[:0], theta2...)
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
	if !o.stack(theta, withJac) {
		return pt
	}
	pt.fit = o.iv.Solve(o.y)
	pt.q = pt.fit.Q
	if withJac && o.p > 0 {
		pt.gc = o.iv.ConcentratedJacobian(o.jacY, o.p)
		pt.grad = o.iv.Gradient(o.jacY, o.p, pt.fit.GBar)
	}
	return pt
}

// stack writes the left-hand side Y of the linear IV at θ (δ, minus p·β_price
// and followed by the cost equation's y_s with a supply side) and, with
// withJac, its Jacobian ∂Y/∂θ, fixed effects removed from the demand rows.
// It reports false when the costs cannot be computed at θ.
func (o *objective) stack(theta []float64, withJac bool) bool {
	m := o.m
	n := m.N()
	copy(o.delta, o.solver.Delta)
	if m.absorb != nil {
		m.absorb.applyWith(o.delta, o.feSum)
	}
	copy(o.y, o.delta)
	if m.Supply != nil {
		bp := theta[m.PriceParam]
		for i := 0; i < n; i++ {
			o.y[i] -= bp * o.priceD[i]
		}
		var dys []float64
		if withJac {
			dys = o.dys
		}
		o.costErr = o.costs.evaluate(theta, o.solver.Delta, o.jac, o.y[n:], dys)
		if o.costErr != nil {
			return false
		}
	}
	if withJac && o.p > 0 {
		o.fillJacobian()
	}
	return true
}

// fillJacobian writes ∂Y/∂θ (rows×P): ∂δ/∂θ2 (fixed effects removed) and
// −p for the price coefficient in the demand rows; ∂y_s/∂θ below.
func (o *objective) fillJacobian() {
	m := o.m
	n, P := m.N(), o.p
	P2 := m.Problem.NumParams()
	idx := o.idx
	col := o.col
	for k := 0; k < P; k++ {
		if idx[k] < 0 {
			for i := range col {
				col[i] = -o.priceD[i]
			}
		} else {
			for i := range col {
				col[i] = o.jac[i*P2+idx[k]]
			}
			if m.absorb != nil {
				m.absorb.applyWith(col, o.feSum)
			}
		}
		for i, v := range col {
			o.jacY[i*P+k] = v
		}
	}
	if m.Supply != nil {
		copy(o.jacY[n*P:], o.dys)
	}
}

// jacobian returns ∂Y/∂θ of the last evaluation with its Jacobian.
func (o *objective) jacobian() []float64 { return o.jacY }

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
