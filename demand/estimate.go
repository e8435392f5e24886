package demand

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"strings"
	"sync"
	"time"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/optimize"

	"rcdemand/contraction"
)

// Options control an estimation beyond the spec.
type Options struct {
	Starts int    // starting points for step 1 (1 = the spec's start only)
	Seed   uint64 // for the random starts
	// Progress, when set, is called after every optimiser iteration.
	Progress func(step, iteration int, objective float64)
	// Stop, when set and closed, makes the estimation return ErrInterrupted.
	Stop <-chan struct{}
	// Version is recorded in the results.
	Version string
}

// ErrInterrupted is returned when Options.Stop is closed.
var ErrInterrupted = errors.New("interrupted")

// objective evaluates Q(θ2) and its gradient for one weighting matrix; it
// owns a share solver, so several can run at once.
type objective struct {
	m      *Model
	iv     *IV
	solver *contraction.Solver
	jac    []float64 // N×P
	jacD   []float64 // the same, fixed effects removed
	delta  []float64
	p      int
	stop   <-chan struct{}

	evals, innerIter int
	innerFail        []int // per market, summed over evaluations
	innerIterByMkt   []int
	lastFit          Fit
	lastOK           bool

	solvedAt []float64 // θ2 of the last inversion
	haveJac  bool      // o.jac holds ∂δ/∂θ2 from an inversion near solvedAt
	memo     memo
}

func newObjective(m *Model, iv *IV, stop <-chan struct{}) (*objective, error) {
	s, err := contraction.NewSolver(m.Problem)
	if err != nil {
		return nil, err
	}
	s.Tolerance = m.Spec.Estimation.InnerTolerance
	s.MaxIterations = m.Spec.Estimation.InnerMaxIter
	p := len(m.Params)
	n := m.N()
	T := len(m.Problem.Products)
	return &objective{m: m, iv: iv, solver: s, jac: make([]float64, n*p), jacD: make([]float64, n*p),
		delta: make([]float64, n), p: p, stop: stop, innerFail: make([]int, T), innerIterByMkt: make([]int, T)}, nil
}

// abs maps the optimiser's unconstrained θ2 to the model's: σ enters through
// its absolute value, Π as it is.
func (o *objective) abs(x []float64) []float64 {
	t := make([]float64, len(x))
	for i, v := range x {
		if o.m.Params[i].Kind == "sigma" {
			v = math.Abs(v)
		}
		t[i] = v
	}
	return t
}

// eval returns Q at x and, when grad is not nil, dQ/dx. A failed inversion
// gives +Inf, which the line search treats as a step too far.
func (o *objective) eval(x, grad []float64) float64 {
	theta := o.abs(x)
	if m := &o.memo; m.ok && m.w == o.iv.W() && equal(m.theta, theta) && (grad == nil || m.grad != nil) {
		// The last evaluation was at this θ2 under this weighting matrix:
		// its results (and the solver's δ and Jacobian) still hold.
		o.lastFit, o.lastOK = m.fit, !math.IsInf(m.q, 1)
		for i := range grad {
			grad[i] = m.grad[i]
			if o.m.Params[i].Kind == "sigma" && x[i] < 0 {
				grad[i] = -grad[i]
			}
		}
		return m.q
	}
	q := o.evaluate(theta, x, grad)
	o.memo = memo{ok: true, w: o.iv.W(), theta: theta, q: q, fit: o.lastFit}
	if grad != nil {
		o.memo.grad = make([]float64, len(grad))
		for i := range grad {
			o.memo.grad[i] = grad[i]
			if o.m.Params[i].Kind == "sigma" && x[i] < 0 {
				o.memo.grad[i] = -grad[i]
			}
		}
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

// evaluate is eval without the memo.
func (o *objective) evaluate(theta, x, grad []float64) float64 {
	o.evals++
	var jac []float64
	if grad != nil && o.p > 0 {
		jac = o.jac
	}
	if o.haveJac && o.solvedAt != nil {
		d := make([]float64, len(theta))
		for i := range d {
			d[i] = theta[i] - o.solvedAt[i]
		}
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
		jd := o.jac
		if o.m.absorb != nil {
			jd = o.jacD
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
		}
		g := o.iv.Gradient(jd, o.p, fit.GBar)
		for i := range g {
			if o.m.Params[i].Kind == "sigma" && x[i] < 0 {
				g[i] = -g[i]
			}
			grad[i] = g[i]
		}
	}
	return fit.Q
}

// gradient returns Q and dQ/dx at x.
func (o *objective) gradient(x []float64) (float64, []float64) {
	g := make([]float64, o.p)
	q := o.eval(x, g)
	return q, g
}

func infNorm(g []float64) float64 {
	n := 0.0
	for _, v := range g {
		n = math.Max(n, math.Abs(v))
	}
	return n
}

// hessian returns the central finite-difference Hessian of the analytic
// gradient at x, symmetrised.
func (o *objective) hessian(x []float64) *mat.SymDense {
	p := o.p
	H := mat.NewDense(p, p, nil)
	for q := 0; q < p; q++ {
		h := 1e-5 * math.Max(1, math.Abs(x[q]))
		up := append([]float64(nil), x...)
		dn := append([]float64(nil), x...)
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
func (o *objective) minimize(x0 []float64, step int, opt Options, newtonFirst bool) (stageResult, error) {
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
		MajorIterations:   o.m.Spec.Estimation.MaxIterations,
		Converger:         &optimize.FunctionConverge{Absolute: 1e-15, Relative: 1e-15, Iterations: 25},
		Recorder:          &progress{fn: opt.Progress, step: step, stop: o.stop},
	}
	var cache struct {
		x    []float64
		f    float64
		grad []float64
	}
	evalBoth := func(x []float64) {
		if cache.x != nil && equal(cache.x, x) {
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
		if p.Kind == "sigma" && sr.x[i] < 1e-4 && g[i] > 0 {
			g[i] = 0
			sr.boundary = append(sr.boundary, p.Name())
		}
	}
	sr.gnorm = infNorm(g)
	sr.converged = !math.IsInf(q, 1) && sr.gnorm <= o.m.Spec.Estimation.GradientTolerance*math.Max(1, q)
	if sr.message == "" {
		sr.message = "no optimiser run"
	}
	return sr, nil
}

func equal(a, b []float64) bool {
	if len(a) != len(b) {
		return false
	}
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}

// progress adapts Options.Progress and Options.Stop to gonum's Recorder.
type progress struct {
	fn   func(step, iteration int, objective float64)
	step int
	n    int
	stop <-chan struct{}
}

func (p *progress) Init() error { return nil }

func (p *progress) Record(loc *optimize.Location, op optimize.Operation, _ *optimize.Stats) error {
	if p.stop != nil {
		select {
		case <-p.stop:
			return ErrInterrupted
		default:
		}
	}
	if op == optimize.MajorIteration && p.fn != nil {
		p.n++
		p.fn(p.step, p.n, loc.F)
	}
	return nil
}

// Estimate runs the two-step GMM estimator of the model.
func Estimate(m *Model, opt Options) (*Results, error) {
	res, err := estimate(m, opt, m.Start())
	if err != nil || !contains(m.Spec.Instruments.Generate, "optimal") {
		return res, err
	}
	m2, err := m.WithOptimalInstruments(res.BetaValues(), res.Theta2())
	if err != nil {
		return nil, fmt.Errorf("%s: optimal instruments: %v", m.Spec.File, err)
	}
	res2, err := estimate(m2, opt, res.Theta2())
	if err != nil {
		return nil, err
	}
	res.Diagnostics = nil
	res.Covariance = Matrix{}
	res.Convergence.Markets = nil
	res2.Preliminary = res
	res2.Notes = append(res2.Notes, "estimated with approximate optimal instruments built at a preliminary estimate (recorded under \"preliminary\")")
	return res2, nil
}

func estimate(m *Model, opt Options, start []float64) (*Results, error) {
	began := time.Now()
	spec := m.Spec
	iv, err := NewIV(m.X1, m.Z, m.X1Names, m.ZNames)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", spec.File, err)
	}
	M, K, P := iv.M(), iv.K(), len(m.Params)
	if M < K+P {
		return nil, fmt.Errorf("%s: %d moments for %d parameters (%d linear, %d nonlinear): add instruments",
			spec.File, M, K+P, K, P)
	}
	W1, err := iv.InitialWeight()
	if err != nil {
		return nil, fmt.Errorf("%s: %v", spec.File, err)
	}
	if err := iv.SetWeight(W1); err != nil {
		return nil, fmt.Errorf("%s: %v", spec.File, err)
	}
	res := &Results{Schema: ResultsSchema, SpecFile: spec.File, Notes: m.Notes}
	res.Run = RunInfo{Version: opt.Version, Seed: opt.Seed}

	obj, err := newObjective(m, iv, opt.Stop)
	if err != nil {
		return nil, err
	}
	conv := Convergence{Converged: true}
	var theta []float64
	var stage stageResult

	// Step 1, possibly from several starts.
	starts := [][]float64{start}
	if P > 0 && opt.Starts > 1 {
		rng := rand.New(rand.NewPCG(opt.Seed, 0x5eed))
		for s := 1; s < opt.Starts; s++ {
			x := make([]float64, P)
			for i, q := range m.Params {
				if q.Kind == "sigma" {
					x[i] = rng.Float64() * 3
				} else {
					x[i] = rng.NormFloat64()
				}
			}
			starts = append(starts, x)
		}
	}
	if P == 0 {
		stage = stageResult{q: obj.eval(nil, nil), converged: true, message: "closed form (no nonlinear parameters)"}
	} else if len(starts) == 1 {
		if stage, err = obj.minimize(starts[0], 1, opt, false); err != nil {
			return nil, err
		}
	} else {
		stage, err = multiStart(m, iv, starts, opt, res)
		if err != nil {
			return nil, err
		}
	}
	theta = stage.x
	record := func(step int, sr stageResult) {
		q := obj.eval(sr.x, nil)
		fit := obj.lastFit
		if math.IsInf(q, 1) {
			fit.Beta = make([]float64, K)
		}
		res.Stages = append(res.Stages, Stage{Step: step, Objective: q, Beta: fit.Beta, Theta2: sr.x,
			GradientNorm: sr.gnorm, Iterations: sr.iterations, Evaluations: obj.evals, Converged: sr.converged})
		conv.Iterations += sr.iterations
		if len(sr.boundary) > 0 && step == spec.Estimation.Steps {
			res.Notes = append(res.Notes, fmt.Sprintf("%s at the boundary 0 at step %d: the usual standard error does not apply there", strings.Join(sr.boundary, ", "), step))
		}
		if !sr.converged {
			conv.Converged = false
			conv.Message = fmt.Sprintf("step %d did not converge: gradient norm %.3g (%s)", step, sr.gnorm, sr.message)
		}
	}
	record(1, stage)
	if !obj.lastOK {
		return nil, fmt.Errorf("%s: the share inversion fails at the step-1 estimate in %s", spec.File, m.failedMarkets(obj.solver.Failed))
	}
	W := W1
	if spec.Estimation.Steps == 2 {
		S := iv.MomentCovariance(obj.lastFit.Xi, spec.Estimation.Covariance, m.Clusters)
		W2, err := invertSym(S, "the moment covariance S at the step-1 residuals")
		if err != nil {
			return nil, fmt.Errorf("%s: %v", spec.File, err)
		}
		if err := iv.SetWeight(W2); err != nil {
			return nil, fmt.Errorf("%s: %v", spec.File, err)
		}
		W = W2
		if P == 0 {
			stage = stageResult{q: obj.eval(nil, nil), converged: true, message: "closed form"}
		} else if stage, err = obj.minimize(theta, 2, opt, true); err != nil {
			return nil, err
		}
		theta = stage.x
		record(2, stage)
	}
	// Final evaluation with the Jacobian.
	grad := make([]float64, P)
	q := obj.eval(theta, grad)
	if math.IsInf(q, 1) {
		return nil, fmt.Errorf("%s: the share inversion fails at the final estimate in %s", spec.File, m.failedMarkets(obj.solver.Failed))
	}
	fit := obj.lastFit
	jac := obj.jac
	if m.absorb != nil {
		jac = obj.jacD
	}
	G := iv.Jacobian(jac, P)
	S := iv.MomentCovariance(fit.Xi, spec.Estimation.Covariance, m.Clusters)
	V, err := Sandwich(G, W, S, m.N())
	if err != nil {
		return nil, fmt.Errorf("%s: the covariance cannot be computed: %v (the parameters may not be identified)", spec.File, err)
	}
	names := append([]string(nil), m.X1Names...)
	for _, p := range m.Params {
		names = append(names, p.Name())
	}
	se := func(i int) float64 { return math.Sqrt(math.Max(V.At(i, i), 0)) }
	for k, c := range m.X1Names {
		res.Beta = append(res.Beta, Coef{Name: c, Value: fit.Beta[k], SE: se(k)})
	}
	for i, p := range m.Params {
		c := Coef{Name: p.Column, Value: theta[i], SE: se(K + i)}
		if p.Kind == "sigma" {
			res.Sigma = append(res.Sigma, c)
		} else {
			c.Demographic = p.Demographic
			res.Pi = append(res.Pi, c)
		}
	}
	if res.Sigma == nil {
		res.Sigma = []Coef{}
	}
	if res.Pi == nil {
		res.Pi = []Coef{}
	}
	res.Covariance = Matrix{Names: names, Values: symRows(V)}
	df := M - K - P
	res.GMM = GMMInfo{Steps: spec.Estimation.Steps, Objective: q, Observations: m.N(), Markets: len(m.Products.Markets),
		Moments: M, Covariance: spec.Estimation.Covariance, Instruments: m.ZNames, JDF: df}
	if spec.Estimation.Steps == 2 {
		p := chiSquareSurvival(q, df)
		if df == 0 {
			p = 1
		}
		res.GMM.J, res.GMM.JPValue = &q, &p
	}
	conv.GradientNorm = infNorm(grad)
	conv.ObjectiveEvaluations = obj.evals
	conv.InnerIterations = obj.innerIter
	for t, mk := range m.Products.Markets {
		conv.InnerFailures += obj.innerFail[t]
		conv.Markets = append(conv.Markets, MarketInner{Market: mk.ID, Iterations: obj.innerIterByMkt[t], Failures: obj.innerFail[t]})
	}
	if P > 0 {
		H := obj.hessian(theta)
		var eig mat.EigenSym
		if eig.Factorize(H, false) {
			conv.HessianEigenvalues = eig.Values(nil)
			if conv.HessianEigenvalues[0] <= 0 {
				conv.Converged = false
				conv.Message = fmt.Sprintf("the objective's Hessian has a non-positive eigenvalue %.3g: a saddle point or a flat direction", conv.HessianEigenvalues[0])
			}
		}
	}
	res.Convergence = conv
	res.Diagnostics = diagnose(m, iv, G, W, res)
	res.Run.Seconds = time.Since(began).Seconds()
	return res, nil
}

// failedMarkets names the markets flagged in failed, for messages.
func (m *Model) failedMarkets(failed []bool) string {
	var ids []string
	for t, f := range failed {
		if f {
			ids = append(ids, fmt.Sprintf("%q", m.Products.Markets[t].ID))
		}
	}
	if len(ids) > 8 {
		return fmt.Sprintf("%d markets (%s, …)", len(ids), strings.Join(ids[:8], ", "))
	}
	return fmt.Sprintf("%d markets (%s)", len(ids), strings.Join(ids, ", "))
}

func symRows(V *mat.SymDense) [][]float64 {
	n := V.SymmetricDim()
	out := make([][]float64, n)
	for i := range out {
		out[i] = make([]float64, n)
		for j := range out[i] {
			out[i][j] = V.At(i, j)
		}
	}
	return out
}

// multiStart runs step 1 from every start in parallel, each with its own share
// solver, keeps the lowest objective and records how many starts reached it
// (within 1e-6 relative).
func multiStart(m *Model, iv *IV, starts [][]float64, opt Options, res *Results) (stageResult, error) {
	out := make([]stageResult, len(starts))
	errs := make([]error, len(starts))
	var wg sync.WaitGroup
	sem := make(chan struct{}, contraction.Workers())
	for s := range starts {
		wg.Add(1)
		go func(s int) {
			defer wg.Done()
			sem <- struct{}{}
			defer func() { <-sem }()
			o, err := newObjective(m, iv, opt.Stop)
			if err != nil {
				errs[s] = err
				return
			}
			o2 := opt
			if s != 0 {
				o2.Progress = nil
			}
			out[s], errs[s] = o.minimize(starts[s], 1, o2, false)
		}(s)
	}
	wg.Wait()
	for _, err := range errs {
		if err != nil {
			return stageResult{}, err
		}
	}
	best := 0
	ms := &MultiStart{Starts: len(starts)}
	for s, r := range out {
		ms.Objectives = append(ms.Objectives, r.q)
		if r.q < out[best].q {
			best = s
		}
	}
	for _, r := range out {
		if math.Abs(r.q-out[best].q) <= 1e-6*math.Max(1, math.Abs(out[best].q)) {
			ms.ReachedBest++
		}
	}
	ms.Best = best
	res.MultiStart = ms
	return out[best], nil
}
