package demand

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"
)

// Status says how an optimisation step ended.
type Status int

// The statuses of a step.
const (
	Running         Status = iota // not finished (internal)
	Converged                     // the projected gradient is below the tolerance
	ClosedForm                    // no nonlinear parameters: nothing to optimise
	IterationLimit                // max_iterations reached
	CallLimit                     // max_objective_calls reached (over the whole run)
	TimeLimit                     // time_limit reached
	NoProgress                    // no step lowers Q any more, above the tolerance
	InversionFailed               // the shares cannot be inverted at the start
)

var statusNames = [...]string{Running: "running", Converged: "converged", ClosedForm: "closed form",
	IterationLimit: "iteration limit", CallLimit: "objective-call limit", TimeLimit: "time limit",
	NoProgress: "no further progress", InversionFailed: "inversion failed at the start"}

func (s Status) String() string {
	if s < 0 || int(s) >= len(statusNames) {
		return fmt.Sprintf("Status(%d)", int(s))
	}
	return statusNames[s]
}

// MarshalText writes the status's name.
func (s Status) MarshalText() ([]byte, error) { return []byte(s.String()), nil }

// UnmarshalText reads a status's name.
func (s *Status) UnmarshalText(b []byte) error {
	for i, n := range statusNames {
		if n == string(b) {
			*s = Status(i)
			return nil
		}
	}
	return fmt.Errorf("unknown status %q", b)
}

// stageResult is the end of one optimisation step.
type stageResult struct {
	x          []float64
	q          float64
	fit        Fit
	gnorm      float64 // ‖projected gradient‖∞
	iterations int
	calls      int
	status     Status
	converged  bool
	message    string
	onBound    []string // parameters at a bound with the gradient pointing out
}

// polishTol is where the iterations stop: ‖projected gradient‖∞ ≤
// polishTol·max(1, Q). The step counts as converged at the (looser)
// gradient_tolerance; iterating further costs a step or two near the
// minimum and makes estimates reproducible to about 1e-12.
const polishTol = 1e-10

// minimize finds a local minimum of Q from x0 within the parameters'
// bounds: a Levenberg–Marquardt method on the Gauss–Newton Hessian
// 2N·G'WG plus a structured secant correction for the residual term
// (Dennis, Gay & Welsch 1981), with bounds by projection and an active
// set (Bertsekas 1982). Every accepted step lowers Q; a trial at which the
// inversion fails counts as a failed step and enlarges the damping.
func (o *objective) minimize(x0 []float64, step, maxIter int) (stageResult, error) {
	calls0 := o.calls
	sr := o.startPoint(x0)
	if sr.status == InversionFailed {
		sr.calls = o.calls - calls0
		return sr, nil
	}
	lm := newMarquardt(o)
	pt := o.at(sr.x, true)
	for sr.status == Running {
		if o.mon.stopped() {
			return stageResult{}, ErrInterrupted
		}
		pg := o.projectedGradient(pt)
		sr.gnorm = infNorm(pg)
		switch {
		case sr.gnorm <= polishTol*math.Max(1, pt.q):
			sr.status = Converged
		case sr.iterations >= maxIter:
			sr.status = IterationLimit
		case o.lim.exceeded() != Running:
			sr.status = o.lim.exceeded()
		}
		if sr.status != Running {
			break
		}
		next, status := lm.step(pt, pg)
		if next == nil {
			sr.status = status
			break
		}
		pt = next
		sr.iterations++
		if o.mon.Progress != nil {
			o.mon.Progress(step, sr.iterations, pt.q)
		}
	}
	sr.x, sr.q, sr.fit = pt.theta, pt.q, pt.fit
	sr.calls = o.calls - calls0
	o.finishStage(&sr, pt)
	return sr, nil
}

// startPoint projects x0 into the bounds and evaluates it. When the shares
// cannot be inverted there, the start is moved halfway towards the lower
// bound (or 0) up to eight times, with a note.
func (o *objective) startPoint(x0 []float64) stageResult {
	x := o.project(x0)
	if moved, note := o.positiveCosts(x); note != "" {
		if moved == nil {
			return stageResult{x: x, q: math.Inf(1), status: InversionFailed, message: note}
		}
		x = moved
		sr := o.startPoint(x)
		sr.message = joinMessage(note, sr.message)
		return sr
	}
	for k := 0; k <= 8; k++ {
		pt := o.at(x, true)
		if pt.ok() {
			sr := stageResult{x: x, status: Running}
			if k > 0 {
				sr.message = fmt.Sprintf("the shares could not be inverted at the start in %s; started from %s instead",
					o.m.failedMarkets(o.solver.Failed), formatVector(x))
			}
			return sr
		}
		for i, p := range o.m.Params {
			lo, _ := p.Bounds()
			if math.IsInf(lo, -1) {
				lo = 0
			}
			x[i] = lo + (x[i]-lo)/2
		}
	}
	return stageResult{x: o.project(x0), q: math.Inf(1), status: InversionFailed,
		message: fmt.Sprintf("the shares cannot be inverted at the start or anywhere between it and the lower bounds (%s)", o.m.failedMarkets(o.solver.Failed))}
}

// positiveCosts handles a start at which the supply side's implied costs
// cannot enter the log cost equation (some p − η ≤ 0: markups too large for
// so small a price coefficient). It moves the price coefficient away from
// zero by factors of 1.25, up to 20 times, until every cost is positive, and
// returns the new start with a note; nil and the reason when that fails;
// and no note when the start was fine.
func (o *objective) positiveCosts(x []float64) ([]float64, string) {
	pp := o.m.PriceParam
	o.at(x, true)
	if pp < 0 || o.costErr == nil {
		return nil, ""
	}
	first := o.costErr.Error()
	y := slices.Clone(x)
	for k := 0; k < 20; k++ {
		y[pp] *= 1.25
		o.at(y, true)
		if o.costErr == nil {
			return y, fmt.Sprintf("at the start %s; the price coefficient was moved from %.4g to %.4g, where every implied cost is positive", first, x[pp], y[pp])
		}
	}
	return nil, "at the starting values: " + first + "; no price coefficient up to 87 times larger in magnitude makes every cost positive"
}

// finishStage judges convergence on the projected gradient and names the
// parameters held at a bound.
func (o *objective) finishStage(sr *stageResult, pt *point) {
	if !pt.ok() || pt.grad == nil {
		return
	}
	pg := o.projectedGradient(pt)
	sr.gnorm = infNorm(pg)
	sr.converged = sr.gnorm <= o.tol*math.Max(1, pt.q)
	if sr.converged && sr.status != Converged {
		// Stopped by a limit or by precision, but already within the
		// tolerance: that is convergence, with the reason kept.
		sr.message = joinMessage(sr.message, fmt.Sprintf("stopped (%s) within the gradient tolerance", sr.status))
		sr.status = Converged
	}
	for i, p := range o.m.Params {
		lo, hi := p.Bounds()
		if (sr.x[i] <= lo && pt.grad[i] > 0) || (sr.x[i] >= hi && pt.grad[i] < 0) {
			sr.onBound = append(sr.onBound, p.Name())
		}
	}
}

// project returns x moved into the parameters' bounds.
func (o *objective) project(x []float64) []float64 {
	out := make([]float64, len(x))
	for i, p := range o.m.Params {
		out[i] = p.Project(x[i])
	}
	return out
}

// projectedGradient returns x − P(x − g): the gradient for a free
// parameter, and 0 for one at its bound with the gradient pointing out.
func (o *objective) projectedGradient(pt *point) []float64 {
	pg := make([]float64, o.p)
	for i, p := range o.m.Params {
		pg[i] = pt.theta[i] - p.Project(pt.theta[i]-pt.grad[i])
	}
	return pg
}

// marquardt holds the state of the damped Gauss–Newton iterations.
type marquardt struct {
	o      *objective
	S      *mat.SymDense // structured secant correction of the Hessian
	lambda float64       // damping; < 0 before the first step
	nu     float64
}

func newMarquardt(o *objective) *marquardt {
	return &marquardt{o: o, S: mat.NewSymDense(o.p, nil), lambda: -1, nu: 2}
}

// step tries damped steps from pt until one lowers Q enough, and returns the
// new point, or nil and the reason it stopped.
func (lm *marquardt) step(pt *point, pg []float64) (*point, Status) {
	o := lm.o
	H := lm.hessian(pt)
	free := lm.freeSet(pt, pg)
	if lm.lambda < 0 {
		lm.lambda = 1e-3 // relative to diag(H): Marquardt's scaling
	}
	for trial := 0; trial < 60; trial++ {
		if s := o.lim.exceeded(); s != Running {
			return nil, s
		}
		d, ok := lm.direction(H, pt, free)
		if !ok {
			lm.grow()
			continue
		}
		xt := make([]float64, o.p)
		for i := range xt {
			xt[i] = o.m.Params[i].Project(pt.theta[i] + d[i])
		}
		s := make([]float64, o.p)
		for i := range s {
			s[i] = xt[i] - pt.theta[i]
		}
		if infNorm(s) <= 1e-15*(1+infNorm(pt.theta)) {
			return nil, NoProgress
		}
		pred := -(dot(pt.grad, s) + 0.5*quad(H, s))
		nt := o.at(xt, true)
		if nt.ok() && pred > 0 && nt.q < pt.q {
			if rho := (pt.q - nt.q) / pred; rho > 1e-4 {
				lm.update(pt, nt, s)
				lm.lambda *= math.Max(1.0/3, 1-math.Pow(2*rho-1, 3))
				lm.nu = 2
				return nt, Running
			}
		}
		if nt.ok() && lm.flat(pt, nt, pred) {
			// Q no longer resolves the decrease the model predicts: accept
			// a step that keeps Q within rounding and lowers the projected
			// gradient (polishing at the limit of precision).
			lm.update(pt, nt, s)
			return nt, Running
		}
		lm.grow()
		if lm.lambda > 1e20 {
			break
		}
	}
	return nil, NoProgress
}

// flat reports whether a trial nt from pt is within the rounding of Q
// (predicted and actual changes below 1e-13·max(1, Q)) and lowers the
// projected gradient.
func (lm *marquardt) flat(pt, nt *point, pred float64) bool {
	res := 1e-13 * math.Max(1, math.Abs(pt.q))
	if pred > res || math.Abs(nt.q-pt.q) > res || nt.grad == nil {
		return false
	}
	return infNorm(lm.o.projectedGradient(nt)) < infNorm(lm.o.projectedGradient(pt))
}

func (lm *marquardt) grow() {
	lm.lambda *= lm.nu
	lm.nu *= 2
}

// hessian returns the model Hessian: Gauss–Newton plus the secant
// correction.
func (lm *marquardt) hessian(pt *point) *mat.SymDense {
	H := lm.o.gaussNewton(pt)
	H.AddSym(H, lm.S)
	return H
}

// freeSet marks the parameters that move: all but those within a small
// distance of a bound whose gradient points out of the box (Bertsekas's
// ε-active set, ε = min(1e-6, ‖projected gradient‖∞)).
func (lm *marquardt) freeSet(pt *point, pg []float64) []bool {
	eps := math.Min(1e-6, infNorm(pg))
	free := make([]bool, lm.o.p)
	for i, p := range lm.o.m.Params {
		lo, hi := p.Bounds()
		x, g := pt.theta[i], pt.grad[i]
		free[i] = !(x <= lo+eps && g > 0) && !(x >= hi-eps && g < 0)
	}
	return free
}

// direction solves (H_FF + λ·diag(H_FF)) d_F = −g_F on the free parameters;
// a parameter held at a bound moves onto it.
func (lm *marquardt) direction(H *mat.SymDense, pt *point, free []bool) ([]float64, bool) {
	var idx []int
	for i, f := range free {
		if f {
			idx = append(idx, i)
		}
	}
	d := make([]float64, lm.o.p)
	for i, p := range lm.o.m.Params {
		if !free[i] {
			lo, hi := p.Bounds()
			if pt.grad[i] > 0 {
				d[i] = lo - pt.theta[i]
			} else {
				d[i] = hi - pt.theta[i]
			}
		}
	}
	if len(idx) == 0 {
		return d, true
	}
	scale := maxDiag(H, free)
	A := mat.NewSymDense(len(idx), nil)
	b := mat.NewVecDense(len(idx), nil)
	for a, i := range idx {
		for c := a; c < len(idx); c++ {
			A.SetSym(a, c, H.At(i, idx[c]))
		}
		A.SetSym(a, a, H.At(i, i)+lm.lambda*math.Max(H.At(i, i), 1e-12*scale))
		b.SetVec(a, -pt.grad[i])
	}
	var ch mat.Cholesky
	if !ch.Factorize(A) {
		return nil, false
	}
	var x mat.VecDense
	if err := ch.SolveVecTo(&x, b); err != nil {
		return nil, false
	}
	for a, i := range idx {
		d[i] = x.AtVec(a)
	}
	return d, true
}

// update corrects S after an accepted step s from pt to nt by the
// structured secant update of Dennis, Gay & Welsch (1981) with its sizing:
// y = g⁺ − g, y# = 2N(G⁺ − G)'Wḡ⁺ (what the residual term of the Hessian
// does to s), S ← τS + [(y# − τSs)y' + y(y# − τSs)']/(y's) − (y# −
// τSs)'s·yy'/(y's)², τ = min(1, |s'y#|/|s'Ss|). Skipped when y's ≤ 0.
func (lm *marquardt) update(pt, nt *point, s []float64) {
	o := lm.o
	p := o.p
	y := make([]float64, p)
	for i := range y {
		y[i] = nt.grad[i] - pt.grad[i]
	}
	ys := dot(y, s)
	if !(ys > 0) {
		return
	}
	var dg mat.Dense
	dg.Sub(nt.gc, pt.gc)
	wg := mat.NewVecDense(len(nt.fit.GBar), nil)
	wg.MulVec(o.iv.W(), mat.NewVecDense(len(nt.fit.GBar), nt.fit.GBar))
	ysh := mat.NewVecDense(p, nil)
	ysh.MulVec(dg.T(), wg)
	ysh.ScaleVec(2*float64(o.m.N()), ysh)
	if sSs := quad(lm.S, s); sSs != 0 {
		if tau := math.Min(1, math.Abs(dot(s, ysh.RawVector().Data))/math.Abs(sSs)); tau < 1 {
			lm.S.ScaleSym(tau, lm.S)
		}
	}
	sv := mat.NewVecDense(p, slices.Clone(s))
	var Ss mat.VecDense
	Ss.MulVec(lm.S, sv)
	r := mat.NewVecDense(p, nil)
	r.SubVec(ysh, &Ss)
	rs := mat.Dot(r, sv)
	next := mat.NewSymDense(p, nil)
	for i := 0; i < p; i++ {
		for j := i; j < p; j++ {
			v := lm.S.At(i, j) + (r.AtVec(i)*y[j]+y[i]*r.AtVec(j))/ys - rs*y[i]*y[j]/(ys*ys)
			next.SetSym(i, j, v)
		}
	}
	lm.S = next
}

func maxDiag(H *mat.SymDense, free []bool) float64 {
	m := 0.0
	for i, f := range free {
		if f {
			m = math.Max(m, math.Abs(H.At(i, i)))
		}
	}
	if m == 0 {
		return 1
	}
	return m
}

// dot returns a'b summed in order. (floats.Dot sums in several lanes on
// amd64, which rounds differently and moves the estimates of models with
// four or more parameters in θ by about 1e-10.)
func dot(a, b []float64) float64 {
	s := 0.0
	for i := range a {
		s += a[i] * b[i]
	}
	return s
}

// quad returns s'Hs.
func quad(H mat.Symmetric, s []float64) float64 {
	v := mat.NewVecDense(len(s), slices.Clone(s))
	var hv mat.VecDense
	hv.MulVec(H, v)
	return mat.Dot(v, &hv)
}

func formatVector(x []float64) string {
	s := "("
	for i, v := range x {
		if i > 0 {
			s += ", "
		}
		s += fmt.Sprintf("%.4g", v)
	}
	return s + ")"
}

func joinMessage(a, b string) string {
	switch {
	case a == "":
		return b
	case b == "":
		return a
	}
	return a + "; " + b
}

// curvature returns the eigenvalues of the Hessian of Q at x over the
// parameters not held at a bound: forward differences of the analytic
// gradient from the one at x (backward where the upper bound is within the
// step), symmetrised: one objective call per parameter rather than the two
// of central differences. The step of 1e-5 relative leaves an error of order
// step × third derivative (3e-4 relative to central differences on the
// medium benchmark model), immaterial to what the eigenvalues are for: the
// sign and the conditioning of the minimum.
func (o *objective) curvature(x []float64, onBound []string) []float64 {
	var idx []int
	for i, p := range o.m.Params {
		if !slices.Contains(onBound, p.Name()) {
			idx = append(idx, i)
		}
	}
	if len(idx) == 0 {
		return nil
	}
	g0 := o.at(x, true).grad // usually the point the optimiser stopped at, kept
	if g0 == nil {
		return nil
	}
	n := len(idx)
	H := mat.NewDense(n, n, nil)
	for c, i := range idx {
		lo, hi := o.m.Params[i].Bounds()
		h := 1e-5 * math.Max(1, math.Abs(x[i]))
		y := slices.Clone(x)
		if y[i] = x[i] + h; y[i] > hi {
			y[i] = math.Max(x[i]-h, lo)
		}
		g := o.at(y, true).grad
		if g == nil {
			return nil
		}
		for r, j := range idx {
			H.Set(r, c, (g[j]-g0[j])/(y[i]-x[i]))
		}
	}
	var eig mat.EigenSym
	if !eig.Factorize(symOf(H), false) {
		return nil
	}
	return eig.Values(nil)
}
