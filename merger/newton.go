package merger

import (
	"math"

	"gonum.org/v1/gonum/floats"
)

// Safeguards of the Newton stage.
const (
	armijo      = 1e-4  // sufficient decrease of ½‖R‖² per unit of slope
	minLambda   = 1e-10 // smallest step fraction tried by the line search
	maxRelStep  = 0.5   // a step moves no price by more than this share of max(|p_j|, |c_j|)
	singularJac = 1e14  // condition number above which a matrix is treated as singular
)

// newton solves the first-order conditions from s.p in their markup form
// R(p) = p − c − Δ(p)⁻¹s(p) = −Δ⁻¹r(p), whose roots are those of r but
// which is measured in prices and does not vanish as every share does
// (‖r‖ falls towards zero as prices grow without bound, ‖R‖ does not). Its
// Jacobian is ∂R/∂p = −Δ⁻¹M with M = ∂s/∂p + Ω∘(∂s/∂p)ᵀ + Σ_l Ω_jl η_l
// ∂²s_l/∂p_j∂p_m, the FOC Jacobian (demand.Market.FOCJacobian) at costs
// p − η, so the Newton step solves M d = −r. Each step is capped so that no
// price moves by more than maxRelStep of its scale, then shortened by
// backtracking until ½‖R‖² falls by the Armijo condition. When the Newton
// direction is unusable (M singular) or its line search fails, the
// steepest-descent direction of ½‖R‖², ∇ = −MᵀΔ⁻ᵀR, is tried; when that
// fails too, p is a stationary point of ‖R‖ that is not a root and the
// stage gives up. It converges when a full, uncapped Newton step is shorter
// than the tolerance (solver.tolerance).
func (s *solver) newton() bool {
	s.stage = MethodNewton
	f, ok := s.evalMarkup(s.p)
	if !ok {
		return false
	}
	for it := 0; it < newtonMaxIter; it++ {
		if f == 0 {
			return true
		}
		s.iters++
		if !s.gradient() {
			return false
		}
		full := s.newtonDirection()
		full = s.capStep() && full
		if full && maxAbs(s.d) <= s.tolerance(s.p) {
			// Converged: the last step is below what the residual can resolve.
			for j := range s.p {
				s.p[j] += s.d[j]
			}
			return true
		}
		fq, lambda, ok := s.lineSearch(f)
		if !ok && full {
			full = false
			s.gradientDirection()
			fq, lambda, ok = s.lineSearch(f)
		}
		if !ok {
			return false
		}
		copy(s.p, s.q)
		f = fq
		if full && lambda == 1 && maxAbs(s.d) <= s.tolerance(s.p) {
			return true
		}
	}
	return false
}

// gradient sets s.jac to M at the prices last evaluated, s.p, and s.g to
// ∇½‖R‖² = −MᵀΔ⁻ᵀR there. It reports false when Δ cannot be solved.
func (s *solver) gradient() bool {
	J := s.J
	for j := range s.c2 {
		s.c2[j] = s.p[j] - s.eta[j]
	}
	s.mk.FOCJacobian(s.p, s.c2, s.owner, s.jac)
	if err := s.luD.SolveVecTo(s.yV, true, s.mrV); err != nil {
		return false
	}
	for m := 0; m < J; m++ {
		g := 0.0
		for j := 0; j < J; j++ {
			g -= s.jac[j*J+m] * s.y[j]
		}
		s.g[m] = g
	}
	return true
}

// newtonDirection writes d solving M d = −r into s.d, or the
// steepest-descent direction when M is singular or ill-conditioned; it
// reports whether d is the Newton direction.
func (s *solver) newtonDirection() bool {
	s.lu.Factorize(s.jacM)
	if c := s.lu.Cond(); !(c < singularJac) {
		s.gradientDirection()
		return false
	}
	for j, x := range s.r {
		s.d[j] = -x
	}
	if err := s.lu.SolveVecTo(s.dV, false, s.dV); err != nil {
		s.gradientDirection()
		return false
	}
	return true
}

// gradientDirection writes −∇½‖R‖² into s.d, scaled to the largest step
// capStep allows.
func (s *solver) gradientDirection() {
	for j, g := range s.g {
		s.d[j] = -g
	}
	if k := s.relStep(); k > 0 {
		for j := range s.d {
			s.d[j] *= maxRelStep / k
		}
	}
}

// relStep returns max_j |d_j| / max(|p_j|, |c_j|, 1e-8·max|p|).
func (s *solver) relStep() float64 {
	floor := 1e-8 * maxAbs(s.p)
	k := 0.0
	for j, x := range s.d {
		scale := math.Max(math.Max(math.Abs(s.p[j]), math.Abs(s.c[j])), floor)
		if scale > 0 {
			k = math.Max(k, math.Abs(x)/scale)
		}
	}
	return k
}

// capStep shortens d so that no price moves by more than maxRelStep of its
// scale and reports whether d was left whole.
func (s *solver) capStep() bool {
	k := s.relStep()
	if !(k > maxRelStep) {
		return true
	}
	for j := range s.d {
		s.d[j] *= maxRelStep / k
	}
	return false
}

// lineSearch tries q = p + λd for λ = 1, ½, ¼, … ≥ minLambda until
// ½‖R(q)‖² ≤ f + armijo·λ·(∇·d), leaving q in s.q and the market evaluated
// there. It returns ½‖R(q)‖², λ and whether a step was accepted.
func (s *solver) lineSearch(f float64) (float64, float64, bool) {
	slope := 0.0
	for j, g := range s.g {
		slope += g * s.d[j]
	}
	if !(slope < 0) {
		return f, 0, false
	}
	for lambda := 1.0; lambda >= minLambda; lambda /= 2 {
		for j := range s.q {
			s.q[j] = s.p[j] + lambda*s.d[j]
		}
		if fq, ok := s.evalMarkup(s.q); ok && fq <= f+armijo*lambda*slope {
			return fq, lambda, true
		}
	}
	return f, 0, false
}

// maxAbs returns max_i |x_i| (gonum's infinity norm).
func maxAbs(x []float64) float64 {
	if len(x) == 0 {
		return 0
	}
	return floats.Norm(x, math.Inf(1))
}
