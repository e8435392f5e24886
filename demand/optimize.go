package demand

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"
)

type stageResult struct {
	x          []float64
	q          float64
	gnorm      float64
	iterations int
	converged  bool
	message    string
	boundary   []string // σ parameters at the corner 0
}

// minimize finds a local minimum from x0: BFGS (gonum) with the analytic
// gradient, then Newton steps on the finite-difference Hessian of the
// analytic gradient until the gradient is tiny. With newtonFirst (step 2,
// which starts next to its optimum) Newton steps are tried first and BFGS
// runs only if they do not converge.
func (o *objective) minimize(x0 []float64, step, maxIter int, newtonFirst bool) (stageResult, error) {
	sr := stageResult{x: append([]float64(nil), x0...), q: math.Inf(1)}
	if newtonFirst {
		x, q, g, its := o.newton(sr.x)
		sr.x, sr.iterations = x, its
		sr.message = "Newton steps from the previous step's estimate"
		if infNorm(g) <= 1e-8*math.Max(1, q) {
			return o.finish(sr)
		}
	}
	settings := &optimize.Settings{
		GradientThreshold: 1e-7,
		MajorIterations:   maxIter,
		Converger:         &optimize.FunctionConverge{Absolute: 1e-15, Relative: 1e-15, Iterations: 25},
		Recorder:          &progress{mon: o.mon, step: step},
	}
	var cache struct {
		x    []float64
		f    float64
		grad []float64
	}
	evalBoth := func(x []float64) {
		if cache.x != nil && slices.Equal(cache.x, x) {
			return
		}
		cache.grad = make([]float64, len(x))
		cache.f = o.eval(x, cache.grad)
		cache.x = append(cache.x[:0], x...)
	}
	prob := optimize.Problem{
		Func: func(x []float64) float64 { evalBoth(x); return cache.f },
		Grad: func(g, x []float64) { evalBoth(x); copy(g, cache.grad) },
	}
	res, err := optimize.Minimize(prob, sr.x, settings, &optimize.BFGS{Linesearcher: &optimize.MoreThuente{}})
	if errors.Is(err, ErrInterrupted) {
		return stageResult{}, ErrInterrupted
	}
	if res != nil && res.X != nil {
		sr.x = append([]float64(nil), res.X...)
		sr.iterations += res.Stats.MajorIterations
		if err != nil {
			sr.message = fmt.Sprintf("BFGS stopped: %v", err)
		} else {
			sr.message = "BFGS: " + res.Status.String()
		}
	}
	x, _, _, its := o.newton(sr.x)
	sr.x = x
	sr.iterations += its
	return o.finish(sr)
}

// newton takes up to 15 Newton steps with step halving from x, stopping when
// the gradient is below 1e-10·max(1, Q) or a step does not improve. The
// Hessian is the central finite-difference Hessian of the analytic gradient
// at the first point, then updated by BFGS from the steps taken (so each
// further step costs one evaluation); it is recomputed by finite differences
// when an updated one fails to give an improving step.
func (o *objective) newton(x []float64) ([]float64, float64, []float64, int) {
	q, g := o.gradient(x)
	its := 0
	var H *mat.SymDense
	fresh := false
	for it := 0; it < 15 && infNorm(g) > 1e-10*math.Max(1, q) && !math.IsInf(q, 1); it++ {
		its++
		if H == nil {
			H, fresh = o.hessian(x), true
		}
		xn, qn, gn, ok := o.newtonStep(x, q, g, H)
		if !ok {
			if fresh {
				break
			}
			H = nil // retry with a finite-difference Hessian
			continue
		}
		// BFGS update with s = xn − x, y = gn − g (skipped unless y's > 0).
		sv := mat.NewVecDense(o.p, nil)
		yv := mat.NewVecDense(o.p, nil)
		for i := range xn {
			sv.SetVec(i, xn[i]-x[i])
			yv.SetVec(i, gn[i]-g[i])
		}
		if ys := mat.Dot(yv, sv); ys > 0 {
			var hs mat.VecDense
			hs.MulVec(H, sv)
			shs := mat.Dot(sv, &hs)
			H.SymRankOne(H, 1/ys, yv)
			H.SymRankOne(H, -1/shs, &hs)
		}
		fresh = false
		x, q, g = xn, qn, gn
	}
	return x, q, g, its
}

// newtonStep tries x − λH⁻¹g for λ = 1, ½, … and returns the first point
// that lowers the gradient without raising Q.
func (o *objective) newtonStep(x []float64, q float64, g []float64, H *mat.SymDense) ([]float64, float64, []float64, bool) {
	var ch mat.Cholesky
	if !ch.Factorize(H) {
		return nil, 0, nil, false
	}
	d := mat.NewVecDense(o.p, nil)
	if err := ch.SolveVecTo(d, mat.NewVecDense(o.p, g)); err != nil {
		return nil, 0, nil, false
	}
	for lam := 1.0; lam > 1e-3; lam /= 2 {
		xn := make([]float64, o.p)
		for i := range xn {
			xn[i] = x[i] - lam*d.AtVec(i)
		}
		qn, gn := o.gradient(xn)
		if qn <= q+1e-12*math.Abs(q) && infNorm(gn) < infNorm(g) {
			return xn, qn, gn, true
		}
	}
	return nil, 0, nil, false
}

// finish reports σ ≥ 0 and the convergence facts of a stage.
func (o *objective) finish(sr stageResult) (stageResult, error) {
	// Report σ ≥ 0.
	sr.x = o.abs(sr.x)
	q, g := o.gradient(sr.x)
	sr.q = q
	// A σ at its boundary 0 with dQ/dσ > 0 is a corner minimum (σ enters
	// through |σ|, so Q has a kink there): its gradient component does not
	// count against convergence.
	for i, p := range o.m.Params {
		if p.Kind == Sigma && sr.x[i] < 1e-4 && g[i] > 0 {
			g[i] = 0
			sr.boundary = append(sr.boundary, p.Name())
		}
	}
	sr.gnorm = infNorm(g)
	sr.converged = !math.IsInf(q, 1) && sr.gnorm <= o.tol*math.Max(1, q)
	if sr.message == "" {
		sr.message = "no optimiser run"
	}
	return sr, nil
}

// progress adapts a Monitor to gonum's Recorder.
type progress struct {
	mon  Monitor
	step int
	n    int
}

func (p *progress) Init() error { return nil }

func (p *progress) Record(loc *optimize.Location, op optimize.Operation, _ *optimize.Stats) error {
	if p.mon.stopped() {
		return ErrInterrupted
	}
	if op == optimize.MajorIteration && p.mon.Progress != nil {
		p.n++
		p.mon.Progress(p.step, p.n, loc.F)
	}
	return nil
}
