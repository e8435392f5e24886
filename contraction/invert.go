package contraction

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// Worker is one goroutine's share-model evaluator (a Market of the problem's
// family) with the scratch that the inversion and the implicit-function
// Jacobian need. It is the worker type of the pools that run over markets.
type Worker struct {
	Market
	p *Problem

	s, damp, x1, x2, r, v, save []float64 // J
	dsdd                        []float64 // J×J
	dsdt                        []float64 // J×P
	ipiv                        []int
	factored                    bool // dsdd holds the upper Cholesky factor of ∂s/∂δ

	t     int       // the current market
	theta []float64 // the current θ2
	fd    []float64 // scratch of the finite-difference PriceJacobianTheta
}

// NewWorker returns a worker for the markets of p.
func (p *Problem) NewWorker() *Worker { return &Worker{Market: p.NewMarket(), p: p} }

// Set points the worker at market t at θ2 and sizes its scratch.
func (w *Worker) Set(t int, theta []float64) {
	w.Market.Set(t, theta)
	w.t = t
	w.theta = append(w.theta[:0], theta...)
	J, _ := w.Size()
	P := w.p.NumParams()
	for _, b := range []*[]float64{&w.s, &w.damp, &w.x1, &w.x2, &w.r, &w.v, &w.save} {
		*b = grow(*b, J)
	}
	w.dsdd = grow(w.dsdd, J*J)
	w.dsdt = grow(w.dsdt, J*max(P, 1))
	w.ipiv = grow(w.ipiv, J)
	w.Market.Damping(w.damp)
	w.factored = false
}

// step sets dst = src + damping∘(logShare − ln s(src)) and returns the
// largest step max|dst − src|, or NaN when the shares at src are not finite
// and positive. (With damping 1, as in the logit, the step is the residual
// in log shares.)
func (w *Worker) step(dst, src, logShare []float64) float64 {
	if !w.Shares(src, w.s) {
		return math.NaN()
	}
	diff := 0.0
	for j := range dst {
		dj := w.damp[j] * (logShare[j] - math.Log(w.s[j]))
		dst[j] = src[j] + dj
		if a := math.Abs(dj); a > diff || math.IsNaN(a) {
			diff = a
		}
	}
	return diff
}

// Invert solves s(δ) = exp(logShare) for the current market, starting from
// and overwriting delta, by the damped fixed point δ ← δ +
// damping∘(ln s_obs − ln s(δ)), SQUAREM-accelerated when accelerate is set.
// It returns the number of map evaluations and whether the largest step
// max|damping∘(ln s_obs − ln s(δ))| fell below tol within maxIter
// evaluations.
func (w *Worker) Invert(delta, logShare []float64, tol float64, maxIter int, accelerate bool) (int, bool) {
	if accelerate {
		return w.squarem(delta, logShare, tol, maxIter)
	}
	x1 := w.x1
	for it := 1; it <= maxIter; it++ {
		diff := w.step(x1, delta, logShare)
		if math.IsNaN(diff) {
			return it, false
		}
		copy(delta, x1)
		if diff < tol {
			return it, true
		}
	}
	return maxIter, false
}

func (w *Worker) squarem(delta, logShare []float64, tol float64, maxIter int) (int, bool) {
	x0, x1, x2, r, v := delta[:len(w.x1)], w.x1, w.x2, w.r, w.v
	stepMax := 1.0
	it := 0
	for it < maxIter {
		diff := w.step(x1, x0, logShare)
		it++
		if math.IsNaN(diff) {
			return it, false
		}
		if diff < tol {
			copy(x0, x1)
			return it, true
		}
		diff = w.step(x2, x1, logShare)
		it++
		if math.IsNaN(diff) {
			return it, false
		}
		if diff < tol {
			copy(x0, x2)
			return it, true
		}
		rr, vv := 0.0, 0.0
		for j := range r {
			r[j] = x1[j] - x0[j]
			v[j] = x2[j] - 2*x1[j] + x0[j]
			rr += r[j] * r[j]
			vv += v[j] * v[j]
		}
		if vv == 0 {
			copy(x0, x2)
			continue
		}
		alpha := -math.Sqrt(rr / vv)
		if alpha > -1 {
			alpha = -1
		}
		if alpha < -stepMax {
			alpha = -stepMax
			stepMax *= 4
		}
		// Extrapolate into x1, then stabilise with one map evaluation into x0.
		for j := range x1 {
			x1[j] = x0[j] - 2*alpha*r[j] + alpha*alpha*v[j]
		}
		d := w.step(x0, x1, logShare)
		it++
		if math.IsNaN(d) {
			copy(x0, x2)
			stepMax = 1
		}
	}
	return it, false
}

// DeltaJacobian computes, at delta (which should solve the market), ∂δ/∂θ2
// = −(∂s/∂δ)⁻¹ ∂s/∂θ2 (implicit function theorem) into ddelta (J×P,
// row-major). When ∂s/∂δ has a Cholesky factor (it is symmetric, and
// positive definite at interior shares with non-negative weights) and factor
// is not nil, the upper factor is copied there for ChordInvert. It returns
// false when ∂s/∂δ is singular or the shares are not finite.
func (w *Worker) DeltaJacobian(delta, ddelta, factor []float64) bool {
	J := len(w.s)
	P := w.p.NumParams()
	dsdd, dsdt := w.dsdd[:J*J], w.dsdt[:J*P]
	w.factored = false
	if !w.Jacobians(delta, dsdd, dsdt) {
		return false
	}
	if P == 0 {
		return true
	}
	if _, ok := lapack64.Potrf(blas64.Symmetric{Uplo: blas.Upper, N: J, Stride: J, Data: dsdd}); ok {
		w.factored = true
		cholSolve(dsdd, J, dsdt, P)
		if factor != nil {
			copy(factor, dsdd)
		}
	} else {
		// Potrf stopped part-way: recompute ∂s/∂δ and use LU.
		w.Jacobians(delta, dsdd, nil)
		D := blas64.General{Rows: J, Cols: J, Stride: J, Data: dsdd}
		if !lapack64.Getrf(D, w.ipiv[:J]) {
			return false
		}
		lapack64.Getrs(blas.NoTrans, D, blas64.General{Rows: J, Cols: P, Stride: P, Data: dsdt}, w.ipiv[:J])
	}
	for n, x := range dsdt {
		ddelta[n] = -x
	}
	return true
}

// ChordInvert solves s(δ) = exp(logShare) by chord Newton steps
// δ ← δ + (∂s/∂δ)⁻¹(s ∘ (ln s_obs − ln s(δ))), with ∂s/∂δ fixed at an earlier
// solution nearby (factor, its upper Cholesky factor from DeltaJacobian).
// Each step costs one share evaluation, like a contraction step, but
// converges in a few steps from a warm start. It stops on the contraction's
// own criterion, max|damping∘(ln s_obs − ln s(δ))| < tol. If the residual fails to
// halve in a step the attempt is abandoned: delta is restored and false
// returned with the share evaluations spent, so the caller can fall back to
// the contraction (and count them).
func (w *Worker) ChordInvert(delta, logShare, factor []float64, tol float64, maxIter int) (int, bool) {
	J := len(w.s)
	save := w.save
	copy(save, delta[:J])
	r := w.x1
	prev := math.Inf(1)
	it := 0
	for it < maxIter {
		it++
		if !w.Shares(delta, w.s) {
			break
		}
		res := 0.0
		for j := range r {
			d := logShare[j] - math.Log(w.s[j])
			res = math.Max(res, math.Abs(w.damp[j]*d))
			r[j] = w.s[j] * d
		}
		if res < tol {
			return it, true
		}
		if !(res < prev/2) {
			break
		}
		prev = res
		cholSolve(factor, J, r, 1)
		for j := range r {
			delta[j] += r[j]
		}
	}
	copy(delta[:J], save)
	return it, false
}

// cholSolve overwrites the J×P row-major b with the solution of U'U x = b,
// U the upper Cholesky factor held in the upper triangle of u (J×J,
// row-major): a forward substitution with U' and a back substitution with U.
// For the small systems here it is much cheaper than a general solver.
func cholSolve(u []float64, J int, b []float64, P int) {
	for j := 0; j < J; j++ { // U'y = b
		d := u[j*J+j]
		for p := 0; p < P; p++ {
			acc := b[j*P+p]
			for k := 0; k < j; k++ {
				acc -= u[k*J+j] * b[k*P+p]
			}
			b[j*P+p] = acc / d
		}
	}
	for j := J - 1; j >= 0; j-- { // U x = y
		d := u[j*J+j]
		for p := 0; p < P; p++ {
			acc := b[j*P+p]
			for k := j + 1; k < J; k++ {
				acc -= u[j*J+k] * b[k*P+p]
			}
			b[j*P+p] = acc / d
		}
	}
}

// priceThetaDeriver is the optional capability of a family that gives
// d(∂s/∂p)/dθ2 in closed form (see rcLogitMarket.PriceJacobianTheta).
type priceThetaDeriver interface {
	PriceJacobianTheta(delta []float64, betaPrice float64, ddelta, dst []float64)
}

// PriceJacobianTheta writes d(∂s/∂p)/dθ_k for every parameter k of θ2 into
// dst (P×J×J, block k row l column j = d(∂s_l/∂p_j)/dθ_k) at delta, for price
// coefficients from betaPrice, when δ moves with θ2 as ddelta (J×P, such as
// ∂δ/∂θ2 at fixed shares). It is what the supply side's ∂η/∂θ needs. A
// family without the closed form gets differences in θ2 (step
// 1e-6·max(1, |θ_k|)) along δ + h·ddelta_k: central, or one-sided where a
// step leaves the family's parameter space (ρ at 0).
func (w *Worker) PriceJacobianTheta(delta []float64, betaPrice float64, ddelta, dst []float64) {
	if d, ok := w.Market.(priceThetaDeriver); ok {
		d.PriceJacobianTheta(delta, betaPrice, ddelta, dst)
		return
	}
	m, P, t := w.Market, w.p.NumParams(), w.t
	J, I := m.Size()
	w.fd = grow(w.fd, 2*J+I+3*J*J+P)
	sc := w.fd
	dplus, alpha, lam := sc[:J], sc[J:J+I], sc[J+I:2*J+I]
	up, dn, mid := sc[2*J+I:2*J+I+J*J], sc[2*J+I+J*J:2*J+I+2*J*J], sc[2*J+I+2*J*J:2*J+I+3*J*J]
	th := sc[2*J+I+3*J*J:]
	// at writes ∂s/∂p at θ2 + s·h·e_k and δ + s·h·ddelta_k into out and
	// reports whether it is finite.
	at := func(k int, h, s float64, out []float64) bool {
		copy(th, w.theta)
		th[k] += s * h
		m.Set(t, th)
		for j := range dplus {
			dplus[j] = delta[j] + s*h*ddelta[j*P+k]
		}
		m.Alpha(betaPrice, alpha)
		m.PriceJacobian(dplus, alpha, out, lam)
		for _, v := range out {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				return false
			}
		}
		return true
	}
	haveMid := false
	for k := 0; k < P; k++ {
		h := 1e-6 * math.Max(1, math.Abs(w.theta[k]))
		okUp, okDn := at(k, h, 1, up), at(k, h, -1, dn)
		if okUp != okDn && !haveMid {
			at(k, h, 0, mid)
			haveMid = true
		}
		out := dst[k*J*J : (k+1)*J*J]
		for n := range out {
			switch {
			case okUp && okDn:
				out[n] = (up[n] - dn[n]) / (2 * h)
			case okUp:
				out[n] = (up[n] - mid[n]) / h
			case okDn:
				out[n] = (mid[n] - dn[n]) / h
			default:
				out[n] = math.NaN()
			}
		}
	}
	m.Set(t, w.theta)
}

// priceHessianer is the optional capability of a family that gives the
// second price derivatives of its shares in closed form (see
// rcLogitMarket.PriceHessian).
type priceHessianer interface {
	PriceHessian(delta, alpha, u, dst []float64)
}

// PriceHessian writes dst_jm = Σ_l u_jl ∂²s_l/∂p_j∂p_m (J×J, row-major u
// and dst) at delta for agents' price coefficients alpha — the second
// derivatives of the shares in prices, contracted row by row with u; with
// u_jl = Ω_jl (p_l − c_l) the curvature term of the Jacobian of the
// Bertrand–Nash first-order conditions — and reports true, when the family
// has the closed form. Otherwise it leaves dst alone and reports false, and
// the caller differentiates ∂s/∂p numerically (demand.Market.FOCJacobian
// does, in prices).
func (w *Worker) PriceHessian(delta, alpha, u, dst []float64) bool {
	if h, ok := w.Market.(priceHessianer); ok {
		h.PriceHessian(delta, alpha, u, dst)
		return true
	}
	return false
}
