package demand

import (
	"fmt"
	"math"
	"slices"
	"strings"
	"time"

	"gonum.org/v1/gonum/mat"
)

// Estimate runs the two-step GMM estimator of the model. With "optimal" in
// [instruments] generate it estimates twice: first with the spec's
// instruments, then with the approximate optimal instruments built at that
// estimate (kept under Results.Preliminary).
//
// Estimate returns an error only when no estimate was found (bad data, or
// shares that cannot be inverted anywhere near the start). An estimate that
// did not converge, or whose covariance cannot be computed, is returned with
// Convergence.Converged false or null standard errors and the reason.
func Estimate(m *Model, set Settings, mon Monitor) (*Results, error) {
	return EstimateFrom(m, m.Start(), set, mon)
}

// EstimateFrom is Estimate from the starting θ start (in the model's order
// of Params) instead of the spec's.
func EstimateFrom(m *Model, start []float64, set Settings, mon Monitor) (*Results, error) {
	res, err := estimate(m, set, mon, start)
	if err != nil || !slices.Contains(m.Spec.Instruments.Generate, "optimal") {
		return res, err
	}
	theta, err := m.ThetaOf(res)
	if err != nil {
		return nil, err
	}
	m2, err := m.WithOptimalInstruments(res.BetaValues(), theta)
	if err != nil {
		return nil, fmt.Errorf("%s: optimal instruments: %v", m.Spec.File, err)
	}
	set.Starts = 1
	res2, err := estimate(m2, set, mon, theta)
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

// estimation is the state of one two-step GMM run.
type estimation struct {
	m     *Model
	set   Settings
	mon   Monitor
	iv    *IV
	obj   *objective   // the objective of the run's final path
	objs  []*objective // every objective used (multi-start), for the counts
	lim   *limits
	W1    *mat.SymDense
	res   *Results
	conv  Convergence
	began time.Time
}

func estimate(m *Model, set Settings, mon Monitor, start []float64) (*Results, error) {
	e, err := newEstimation(m, set, mon)
	if err != nil {
		return nil, err
	}
	if m.Supply != nil {
		if start, err = e.demandStart(start); err != nil {
			return nil, err
		}
	}
	var stage stageResult
	if set.Starts > 1 && len(m.Params) > 0 {
		stage, err = e.multiStart(start)
	} else {
		stage, err = e.path(e.obj, start)
	}
	if err != nil {
		return nil, err
	}
	if err := e.finish(stage); err != nil {
		return nil, err
	}
	if mon.stopped() { // during the last evaluations: the caller writes nothing
		return nil, ErrInterrupted
	}
	return e.res, nil
}

// path runs step 1 from start and, when the spec asks for two steps, step 2
// from the step-1 estimate, recording both.
func (e *estimation) path(o *objective, start []float64) (stageResult, error) {
	stage, err := e.step1(o, start)
	if err != nil {
		return stageResult{}, err
	}
	e.record(1, stage)
	if e.m.Spec.Estimation.Steps == 1 {
		return stage, nil
	}
	if err := e.secondWeight(stage.fit.Xi); err != nil {
		return stageResult{}, err
	}
	stage, err = e.step2(o, stage.x)
	if err != nil {
		return stageResult{}, err
	}
	e.record(2, stage)
	return stage, nil
}

// newEstimation checks the instruments and sets up step 1: W1 = (Z'Z/N)⁻¹.
func newEstimation(m *Model, set Settings, mon Monitor) (*estimation, error) {
	iv, W1, err := m.firstStepIV()
	if err != nil {
		return nil, err
	}
	lim := newLimits(set)
	obj, err := newObjective(m, iv, set, mon, lim)
	if err != nil {
		return nil, err
	}
	res := &Results{Schema: ResultsSchema, SpecFile: m.Spec.File, Notes: slices.Clone(m.Notes)}
	res.Run = RunInfo{Seed: set.Seed}
	return &estimation{m: m, set: set, mon: mon, iv: iv, obj: obj, objs: []*objective{obj}, lim: lim, W1: W1, res: res,
		conv: Convergence{Converged: true}, began: time.Now()}, nil
}

// step1 minimises Q under W1 from start.
func (e *estimation) step1(o *objective, start []float64) (stageResult, error) {
	if err := e.iv.SetWeight(e.W1); err != nil {
		return stageResult{}, fmt.Errorf("%s: %v", e.m.Spec.File, err)
	}
	return e.run(o, start, 1)
}

// secondWeight sets W2 = S⁻¹ with S at the step-1 residuals xi.
func (e *estimation) secondWeight(xi []float64) error {
	spec := e.m.Spec
	S := e.iv.MomentCovariance(xi, spec.Estimation.Covariance, e.m.Clusters)
	W2, err := invertSym(S, "the moment covariance S at the step-1 residuals")
	if err != nil {
		return fmt.Errorf("%s: %v", spec.File, err)
	}
	if err := e.iv.SetWeight(W2); err != nil {
		return fmt.Errorf("%s: %v", spec.File, err)
	}
	return nil
}

// step2 re-optimises from the step-1 θ2 under the weighting matrix set.
func (e *estimation) step2(o *objective, theta []float64) (stageResult, error) {
	return e.run(o, theta, 2)
}

// run minimises from x (or evaluates the closed form without nonlinear
// parameters), turning a start where nothing inverts into an error.
func (e *estimation) run(o *objective, x []float64, step int) (stageResult, error) {
	if len(e.m.Params) == 0 {
		pt := o.at(nil, true)
		if !pt.ok() {
			return stageResult{}, fmt.Errorf("%s: the shares cannot be inverted in %s", e.m.Spec.File, e.m.failedMarkets(o.solver.Failed))
		}
		return stageResult{q: pt.q, fit: pt.fit, status: ClosedForm, converged: true, calls: 1}, nil
	}
	sr, err := o.minimize(x, step, e.set.MaxIterations)
	if err != nil {
		return stageResult{}, err
	}
	if sr.status == InversionFailed {
		if o.costErr != nil {
			return stageResult{}, fmt.Errorf("%s: step %d: %s", e.m.Spec.File, step, sr.message)
		}
		return stageResult{}, fmt.Errorf("%s: step %d: %s; try smaller starting values in [estimation] start", e.m.Spec.File, step, sr.message)
	}
	return sr, nil
}

// record adds a step's results to the stages and the convergence record.
func (e *estimation) record(step int, sr stageResult) {
	beta := sr.fit.Beta
	if beta == nil {
		beta = make([]float64, e.iv.K())
	}
	e.res.Stages = append(e.res.Stages, Stage{Step: step, Objective: sr.q, Beta: beta, Theta2: sr.x,
		GradientNorm: sr.gnorm, Iterations: sr.iterations, ObjectiveCalls: sr.calls, Converged: sr.converged,
		Status: sr.status, Message: sr.message})
	e.conv.Iterations += sr.iterations
	e.conv.Status = sr.status
	e.conv.Converged = sr.converged
	e.conv.OnBound = sr.onBound
	e.conv.Message = ""
	if !sr.converged {
		e.conv.Message = fmt.Sprintf("step %d did not converge: %s, projected gradient norm %.3g", step, sr.status, sr.gnorm)
	}
	if sr.message != "" {
		e.res.Notes = append(e.res.Notes, fmt.Sprintf("step %d: %s", step, sr.message))
	}
}

// finish computes the covariance, the fit, the convergence record and the
// diagnostics at the final θ2. A covariance that cannot be computed leaves
// the standard errors null and names the unidentified direction.
func (e *estimation) finish(stage stageResult) error {
	m, res, o := e.m, e.res, e.obj
	spec := m.Spec
	P := len(m.Params)
	pt := o.at(stage.x, true)
	if !pt.ok() {
		return fmt.Errorf("%s: the share inversion fails at the final estimate in %s", spec.File, m.failedMarkets(o.solver.Failed))
	}
	// Counted now: the curvature check below evaluates Q next to the
	// estimate and overwrites the costs of o.y.
	negCosts := 0
	if m.Supply != nil && m.Supply.form == "linear" {
		negCosts = countNegative(o.y[m.N():])
	}
	var J []float64
	if P > 0 {
		J = o.jacobian()
	}
	G := e.iv.Jacobian(J, P)
	S := e.iv.MomentCovariance(pt.fit.Xi, spec.Estimation.Covariance, m.Clusters)
	V, covErr := Sandwich(G, e.iv.W(), S, m.N())
	// G's columns: the linear parameters of the IV (with a supply side, β
	// without price and γ), then θ.
	u := unidentified(G, e.iv.W(), append(slices.Clone(e.iv.XNames), m.ParamNames()...))
	if covErr == nil && !(u.Eigenvalue > identifiedRatio*u.Largest) {
		V, covErr = nil, fmt.Errorf("G'WG is singular to working precision (smallest/largest eigenvalue %.2g)", u.Eigenvalue/u.Largest)
	}
	values := append(slices.Clone(pt.fit.Beta), stage.x...)
	res.setEstimates(m, values, V)
	M, K := e.iv.M(), e.iv.K()
	df := M - K - P
	q := pt.q
	res.GMM = GMMInfo{Steps: spec.Estimation.Steps, Objective: q, Observations: m.N(), Markets: len(m.Products.Markets),
		Moments: M, Covariance: spec.Estimation.Covariance, Instruments: e.iv.ZNames, JDF: df}
	if spec.Estimation.Steps == 2 {
		p := chiSquareSurvival(q, df)
		if df == 0 {
			p = 1
		}
		res.GMM.J, res.GMM.JPValue = &q, &p
	}
	e.conv.GradientNorm = stage.gnorm
	if P > 0 && stage.status != ClosedForm {
		e.curvature(stage)
	}
	e.innerRecord()
	res.Convergence = e.conv
	res.Diagnostics = diagnose(m, e.iv, G, e.iv.W(), res)
	if negCosts > 0 {
		res.Notes = append(res.Notes, fmt.Sprintf("warning: %d of %d implied marginal costs p − η are negative at the estimates (under form = \"linear\" they are allowed, but a negative cost is not a credible cost)", negCosts, m.N()))
	}
	if len(e.conv.OnBound) > 0 {
		res.Notes = append(res.Notes, fmt.Sprintf("%s at a bound: the usual standard errors do not apply to a parameter on the boundary of its space", strings.Join(e.conv.OnBound, ", ")))
	}
	if near := e.nearBound(stage, V, len(pt.fit.Beta)); len(near) > 0 {
		res.Notes = append(res.Notes, fmt.Sprintf("the 95%% intervals of %s reach past the bounds of the parameter space: this close to a bound the normal approximation behind them is poor (rcdemand study shows how the estimates actually spread)", strings.Join(near, ", ")))
	}
	if covErr != nil {
		res.Diagnostics.Unidentified = u
		res.Notes = append(res.Notes, fmt.Sprintf("the covariance cannot be computed (%v): no standard errors; %s", covErr, res.Diagnostics.Unidentified.Describe()))
	}
	res.Run.Seconds = time.Since(e.began).Seconds()
	return nil
}

// nearBound names the parameters off their bounds whose 95% Wald interval
// (from V, in which θ2 follows the off linear parameters) reaches past a
// bound: σ = 0.05 with a standard error of 0.1, say.
func (e *estimation) nearBound(stage stageResult, V *mat.SymDense, off int) []string {
	if V == nil {
		return nil
	}
	var names []string
	for i, p := range e.m.Params {
		name := p.Name()
		if slices.Contains(stage.onBound, name) {
			continue
		}
		lo, hi := p.Bounds()
		h := NormalQuantile975 * math.Sqrt(V.At(off+i, off+i))
		if x := stage.x[i]; x-h < lo || x+h > hi {
			names = append(names, name)
		}
	}
	return names
}

// innerRecord sums the counts of every objective used.
func (e *estimation) innerRecord() {
	calls, inner := 0, 0
	T := len(e.m.Products.Markets)
	fail, iters := make([]int, T), make([]int, T)
	for _, o := range e.objs {
		calls += o.calls
		inner += o.innerIter
		for t := range fail {
			fail[t] += o.innerFail[t]
			iters[t] += o.innerIterByMkt[t]
		}
	}
	e.conv.ObjectiveCalls = calls
	e.conv.InnerIterations = inner
	for t, mk := range e.m.Products.Markets {
		e.conv.InnerFailures += fail[t]
		e.conv.Markets = append(e.conv.Markets, MarketInner{Market: mk.ID, Iterations: iters[t], Failures: fail[t]})
	}
}

// curvature records the eigenvalues of the Hessian of Q at the estimate
// over the parameters off their bounds; a non-positive one marks the
// estimate as not converged (a saddle point or a flat direction), without
// hiding the step's own message.
func (e *estimation) curvature(stage stageResult) {
	eig := e.obj.curvature(stage.x, stage.onBound)
	e.conv.Curvature = eig
	if len(eig) > 0 && eig[0] <= 0 {
		e.conv.Converged = false
		e.conv.Message = joinMessage(e.conv.Message, fmt.Sprintf("the objective's curvature at the estimate has a non-positive eigenvalue %.3g: a saddle point or a flat direction", eig[0]))
	}
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

// identifiedRatio is the smallest ratio of G'WG's smallest to largest
// eigenvalue taken as invertible: below it the matrix is singular to
// working precision (about 1000·ε; common practice for numerical rank).
const identifiedRatio = 1e-13

// Unidentified describes the parameter combination the moments do not pin
// down: the eigenvector of the smallest eigenvalue of G'WG.
type Unidentified struct {
	Names      []string  `json:"names"`
	Direction  []float64 `json:"direction"`
	Eigenvalue float64   `json:"eigenvalue"`
	Largest    float64   `json:"largest_eigenvalue"`
}

// unidentified returns the direction of G'WG's smallest eigenvalue.
func unidentified(G *mat.Dense, W *mat.SymDense, names []string) *Unidentified {
	var wg mat.Dense
	wg.Mul(W, G)
	var gwg mat.Dense
	gwg.Mul(G.T(), &wg)
	var eig mat.EigenSym
	if !eig.Factorize(symOf(&gwg), true) {
		return &Unidentified{Names: names}
	}
	vals := eig.Values(nil)
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	dir := mat.Col(nil, 0, &vecs)
	// Sign: largest component positive.
	big := 0
	for i, v := range dir {
		if math.Abs(v) > math.Abs(dir[big]) {
			big = i
		}
	}
	if dir[big] < 0 {
		for i := range dir {
			dir[i] = -dir[i]
		}
	}
	return &Unidentified{Names: names, Direction: dir, Eigenvalue: vals[0], Largest: vals[len(vals)-1]}
}

// Describe names the parameters that make up the direction (components of
// at least 0.1 in absolute value).
func (u *Unidentified) Describe() string {
	var parts []string
	for i, v := range u.Direction {
		if math.Abs(v) >= 0.1 {
			parts = append(parts, fmt.Sprintf("%+.3f·%s", v, u.Names[i]))
		}
	}
	if len(parts) == 0 {
		return "the moments do not identify every parameter"
	}
	return "the moments do not identify the combination " + strings.Join(parts, " ")
}

func countNegative(x []float64) int {
	n := 0
	for _, v := range x {
		if v < 0 {
			n++
		}
	}
	return n
}

// demandStart returns the start of a joint estimation: the step-1 estimate
// of demand alone (its price coefficient and θ2), from the spec's start.
// Markups at an arbitrary start can be absurd (an agent with a positive
// price coefficient, costs below zero); at a demand estimate they are those
// the demand side implies. Its objective calls count in the run's total.
func (e *estimation) demandStart(start []float64) ([]float64, error) {
	m := e.m
	d := m.demandOnly()
	de, err := newEstimation(d, e.set, Monitor{Stop: e.mon.Stop})
	if err != nil {
		return nil, err
	}
	de.lim = e.lim
	de.obj.lim = e.lim
	stage, err := de.run(de.obj, m.ShareTheta(start), 1)
	if err != nil {
		return nil, err
	}
	e.objs = append(e.objs, de.obj)
	out := append([]float64{stage.fit.Beta[d.PriceX1]}, stage.x...)
	e.res.Notes = append(e.res.Notes, fmt.Sprintf("the joint estimation starts from the step-1 estimate of demand alone (price coefficient %.4g)", out[0]))
	return out, nil
}
