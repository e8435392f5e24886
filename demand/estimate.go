package demand

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"time"

	"gonum.org/v1/gonum/mat"
)

// Estimate runs the two-step GMM estimator of the model. With "optimal" in
// [instruments] generate it estimates twice: first with the spec's
// instruments, then with the approximate optimal instruments built at that
// estimate (kept under Results.Preliminary).
func Estimate(m *Model, set Settings, mon Monitor) (*Results, error) {
	res, err := estimate(m, set, mon, m.Start())
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
	obj   *objective
	W     *mat.SymDense
	res   *Results
	conv  Convergence
	began time.Time
}

func estimate(m *Model, set Settings, mon Monitor, start []float64) (*Results, error) {
	e, err := newEstimation(m, set, mon)
	if err != nil {
		return nil, err
	}
	stage, err := e.step1(start)
	if err != nil {
		return nil, err
	}
	e.record(1, stage)
	if !e.obj.lastOK {
		return nil, fmt.Errorf("%s: the share inversion fails at the step-1 estimate in %s", m.Spec.File, m.failedMarkets(e.obj.solver.Failed))
	}
	if m.Spec.Estimation.Steps == 2 {
		if stage, err = e.step2(stage.x); err != nil {
			return nil, err
		}
		e.record(2, stage)
	}
	if err := e.finish(stage.x); err != nil {
		return nil, err
	}
	return e.res, nil
}

// newEstimation checks the instruments and sets up step 1: W1 = (Z'Z/N)⁻¹.
func newEstimation(m *Model, set Settings, mon Monitor) (*estimation, error) {
	file := m.Spec.File
	iv, err := NewIV(m.X1, m.Z, m.X1Names, m.ZNames)
	if err != nil {
		return nil, fmt.Errorf("%s: %v", file, err)
	}
	M, K, P := iv.M(), iv.K(), len(m.Params)
	if M < K+P {
		return nil, fmt.Errorf("%s: %d moments for %d parameters (%d linear, %d nonlinear): add instruments",
			file, M, K+P, K, P)
	}
	W1, err := iv.InitialWeight()
	if err != nil {
		return nil, fmt.Errorf("%s: %v", file, err)
	}
	if err := iv.SetWeight(W1); err != nil {
		return nil, fmt.Errorf("%s: %v", file, err)
	}
	obj, err := newObjective(m, iv, set, mon)
	if err != nil {
		return nil, err
	}
	res := &Results{Schema: ResultsSchema, SpecFile: file, Notes: slices.Clone(m.Notes)}
	res.Run = RunInfo{Seed: set.Seed}
	return &estimation{m: m, set: set, mon: mon, iv: iv, obj: obj, W: W1, res: res,
		conv: Convergence{Converged: true}, began: time.Now()}, nil
}

// step1 minimises Q under W1 from start, or from several starts.
func (e *estimation) step1(start []float64) (stageResult, error) {
	P := len(e.m.Params)
	if P == 0 {
		return stageResult{q: e.obj.eval(nil, nil), converged: true, message: "closed form (no nonlinear parameters)"}, nil
	}
	starts := [][]float64{start}
	if e.set.Starts > 1 {
		rng := rand.New(rand.NewPCG(e.set.Seed, 0x5eed))
		for s := 1; s < e.set.Starts; s++ {
			x := make([]float64, P)
			for i, q := range e.m.Params {
				if q.Kind == Sigma {
					x[i] = rng.Float64() * 3
				} else {
					x[i] = rng.NormFloat64()
				}
			}
			starts = append(starts, x)
		}
	}
	if len(starts) == 1 {
		return e.obj.minimize(starts[0], 1, e.set.MaxIterations, false)
	}
	return e.multiStart(starts)
}

// step2 sets W2 = S⁻¹ at the step-1 residuals and re-optimises from the
// step-1 θ2.
func (e *estimation) step2(theta []float64) (stageResult, error) {
	spec := e.m.Spec
	S := e.iv.MomentCovariance(e.obj.lastFit.Xi, spec.Estimation.Covariance, e.m.Clusters)
	W2, err := invertSym(S, "the moment covariance S at the step-1 residuals")
	if err != nil {
		return stageResult{}, fmt.Errorf("%s: %v", spec.File, err)
	}
	if err := e.iv.SetWeight(W2); err != nil {
		return stageResult{}, fmt.Errorf("%s: %v", spec.File, err)
	}
	e.W = W2
	if len(e.m.Params) == 0 {
		return stageResult{q: e.obj.eval(nil, nil), converged: true, message: "closed form"}, nil
	}
	return e.obj.minimize(theta, 2, e.set.MaxIterations, true)
}

// record adds a step's results to the stages and the convergence record.
func (e *estimation) record(step int, sr stageResult) {
	q := e.obj.eval(sr.x, nil)
	fit := e.obj.lastFit
	if math.IsInf(q, 1) {
		fit.Beta = make([]float64, e.iv.K())
	}
	e.res.Stages = append(e.res.Stages, Stage{Step: step, Objective: q, Beta: fit.Beta, Theta2: sr.x,
		GradientNorm: sr.gnorm, Iterations: sr.iterations, Evaluations: e.obj.evals, Converged: sr.converged})
	e.conv.Iterations += sr.iterations
	if len(sr.boundary) > 0 && step == e.m.Spec.Estimation.Steps {
		e.res.Notes = append(e.res.Notes, fmt.Sprintf("%s at the boundary 0 at step %d: the usual standard error does not apply there", strings.Join(sr.boundary, ", "), step))
	}
	if !sr.converged {
		e.conv.Converged = false
		e.conv.Message = fmt.Sprintf("step %d did not converge: gradient norm %.3g (%s)", step, sr.gnorm, sr.message)
	}
}

// finish computes the covariance, the fit, the convergence record and the
// diagnostics at the final θ2.
func (e *estimation) finish(theta []float64) error {
	m, res := e.m, e.res
	spec := m.Spec
	P := len(m.Params)
	grad := make([]float64, P)
	q := e.obj.eval(theta, grad)
	if math.IsInf(q, 1) {
		return fmt.Errorf("%s: the share inversion fails at the final estimate in %s", spec.File, m.failedMarkets(e.obj.solver.Failed))
	}
	fit := e.obj.lastFit
	G := e.iv.Jacobian(e.obj.jacobian(), P)
	S := e.iv.MomentCovariance(fit.Xi, spec.Estimation.Covariance, m.Clusters)
	V, err := Sandwich(G, e.W, S, m.N())
	if err != nil {
		return fmt.Errorf("%s: the covariance cannot be computed: %v (the parameters may not be identified)", spec.File, err)
	}
	values := append(slices.Clone(fit.Beta), theta...)
	res.setEstimates(m, values, V)
	M, K := e.iv.M(), e.iv.K()
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
	e.conv.GradientNorm = infNorm(grad)
	e.innerRecord()
	if P > 0 {
		e.curvature(theta)
	}
	res.Convergence = e.conv
	res.Diagnostics = diagnose(m, e.iv, G, e.W, res)
	res.Run.Seconds = time.Since(e.began).Seconds()
	return nil
}

// innerRecord copies the objective's counts into the convergence record.
func (e *estimation) innerRecord() {
	o := e.obj
	e.conv.ObjectiveEvaluations = o.evals
	e.conv.InnerIterations = o.innerIter
	for t, mk := range e.m.Products.Markets {
		e.conv.InnerFailures += o.innerFail[t]
		e.conv.Markets = append(e.conv.Markets, MarketInner{Market: mk.ID, Iterations: o.innerIterByMkt[t], Failures: o.innerFail[t]})
	}
}

// curvature records the eigenvalues of the finite-difference Hessian of Q
// at θ2; a non-positive one marks the estimate as not converged.
func (e *estimation) curvature(theta []float64) {
	H := e.obj.hessian(theta)
	var eig mat.EigenSym
	if !eig.Factorize(H, false) {
		return
	}
	e.conv.HessianEigenvalues = eig.Values(nil)
	if e.conv.HessianEigenvalues[0] <= 0 {
		e.conv.Converged = false
		e.conv.Message = fmt.Sprintf("the objective's Hessian has a non-positive eigenvalue %.3g: a saddle point or a flat direction", e.conv.HessianEigenvalues[0])
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

// multiStart runs step 1 from every start in turn (each start's inversions
// use the whole worker pool), keeps the lowest objective and records how
// many starts reached it (within 1e-6 relative).
func (e *estimation) multiStart(starts [][]float64) (stageResult, error) {
	out := make([]stageResult, len(starts))
	for s := range starts {
		mon := e.mon
		if s != 0 {
			mon.Progress = nil
		}
		o, err := newObjective(e.m, e.iv, e.set, mon)
		if err != nil {
			return stageResult{}, err
		}
		if out[s], err = o.minimize(starts[s], 1, e.set.MaxIterations, false); err != nil {
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
	e.res.MultiStart = ms
	return out[best], nil
}
