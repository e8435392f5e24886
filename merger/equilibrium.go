package merger

import (
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"

	"rcdemand/contraction"
	"rcdemand/demand"
)

// The stages of the equilibrium solver, as recorded in Solution.Method.
const (
	MethodZeta   = "zeta"   // the ζ fixed point of Morrow & Skerlos (2011)
	MethodNewton = "newton" // Newton steps on the first-order conditions with a line search
	MethodDamped = "damped" // damped ζ iterations
)

// Iteration limits of the stages (see the package documentation).
const (
	zetaMaxIter   = 1000
	newtonMaxIter = 100
	dampedMaxIter = 1000 // over all damping factors together
	dampedStall   = 200  // damped iterations without a new smallest step before ω is halved
)

// Solution is a counterfactual equilibrium of one market.
type Solution struct {
	Price      []float64
	Shares     []float64
	Iterations int     // over all stages tried
	Residual   float64 // largest first-order-condition residual at Price
	Converged  bool
	// Method is the stage that converged or, when none did, the stage that
	// reached the prices with the smallest ζ step (returned in Price).
	Method string
	// Reason says in words why no stage converged; empty when one did.
	Reason string
}

// Failure returns the record of a market, named market, whose search
// ended in sol without an equilibrium.
func (sol Solution) Failure(market string) FailedMarket {
	return FailedMarket{Market: market, Residual: sol.Residual, Method: sol.Method, Iterations: sol.Iterations, Reason: sol.Reason}
}

// Equilibrium finds the Bertrand–Nash prices p = c + Δ(p)⁻¹s(p) of the
// market mk is bound to, under ownership owner (a firm index per product)
// and costs c, from start, to max|Δp| < tol: the ζ fixed point first, then
// Newton steps on the first-order conditions, then damped ζ iterations,
// each from the prices with the smallest ζ step so far. When no stage
// converges the solution holds those prices, Converged is false and Reason
// says why. mk is left at the returned prices.
func Equilibrium(mk *demand.Market, c []float64, owner []int, start []float64, tol float64) Solution {
	var s solver
	return s.equilibrium(mk, c, owner, start, tol)
}

// equilibrium is Equilibrium on s's buffers, which it reuses when they are
// large enough: a pool worker keeps one solver for all its markets.
func (s *solver) equilibrium(mk *demand.Market, c []float64, owner []int, start []float64, tol float64) Solution {
	s.reset(mk, c, owner, tol)
	copy(s.best, start)
	sol := Solution{}
	for _, stage := range []struct {
		name string
		run  func() bool
	}{{MethodZeta, s.zeta}, {MethodNewton, s.newton}, {MethodDamped, s.damped}} {
		copy(s.p, s.best)
		if stage.run() {
			sol.Converged, sol.Method = true, stage.name
			break
		}
	}
	p := s.p
	if !sol.Converged {
		p, sol.Method = s.best, s.bestMethod
	}
	sol.Iterations = s.iters
	mk.SetPrices(p)
	sol.Price = slices.Clone(p)
	sol.Shares = slices.Clone(mk.Shares())
	sol.Residual = mk.FOCResidual(p, c, owner)
	switch {
	case !sol.Converged:
		sol.Reason = s.reason(sol.Residual)
	case !s.secondOrder(p):
		sol.Converged = false
		sol.Reason = s.reasonSecondOrder()
	}
	return sol
}

// worker is a pool worker: an evaluator of one market at a time and an
// equilibrium solver whose buffers it reuses from market to market.
type worker struct {
	mk *demand.Market
	eq solver
}

// newWorkers returns a pool of workers over the markets of pr.
func newWorkers(pr *demand.Pricing) *contraction.Pool[*worker] {
	return contraction.NewPool(func() *worker { return &worker{mk: pr.NewMarket()} })
}

// SolveMarkets finds the equilibrium (see Equilibrium) of markets ts of pr
// (every market when ts is nil), markets in parallel, each from its
// observed prices pr.Price0 to tolerance tol, into sols[t]. market(t)
// gives market t's costs and owners (a firm index per product). It returns
// the markets of ts without an equilibrium, in the order of ts.
func SolveMarkets(pr *demand.Pricing, ts []int, tol float64, market func(t int) (cost []float64, owner []int), sols []Solution) []int {
	if ts == nil {
		ts = make([]int, len(pr.Problem.Products))
		for t := range ts {
			ts[t] = t
		}
	}
	newWorkers(pr).Run(len(ts), func(w *worker, k int) {
		t := ts[k]
		w.mk.Bind(t)
		c, owner := market(t)
		sols[t] = w.eq.equilibrium(w.mk, c, owner, w.mk.Price0(), tol)
	})
	var failed []int
	for _, t := range ts {
		if !sols[t].Converged {
			failed = append(failed, t)
		}
	}
	return failed
}

// secondOrder reports whether every firm's profit is at a local maximum in
// its own prices at p, the prices last set: the Hessian of firm f's profit
// Σ_{l∈f} (p_l − c_l) s_l in its prices is the f×f block of ∂r/∂p, which
// must be negative definite (Cholesky of its negative). The first firm that
// fails is left in s.failedFirm.
func (s *solver) secondOrder(p []float64) bool {
	J := s.J
	s.mk.FOCJacobian(p, s.c, s.owner, s.jac)
	done := s.done
	clear(done)
	for j := 0; j < J; j++ {
		if done[j] {
			continue
		}
		idx := s.firm[:0]
		for l := j; l < J; l++ {
			if s.owner[l] == s.owner[j] {
				idx = append(idx, l)
				done[l] = true
			}
		}
		s.neg.Reset()
		s.neg.ReuseAsSym(len(idx))
		for a, ja := range idx {
			for b := a; b < len(idx); b++ {
				jb := idx[b]
				s.neg.SetSym(a, b, -(s.jac[ja*J+jb]+s.jac[jb*J+ja])/2)
			}
		}
		if !s.chol.Factorize(&s.neg) {
			s.failedFirm = j
			return false
		}
	}
	return true
}

// solver holds one market's equilibrium search. Its buffers are sized by
// reset and reused from market to market.
type solver struct {
	mk       *demand.Market
	c        []float64
	owner    []int
	tol      float64
	J, iters int

	p, pn, r, d, q    []float64 // J
	eta, mr, g, c2, y []float64 // J: markups Δ⁻¹s, markup residual R, ∇½‖R‖², p − η, Δ⁻ᵀR
	jac, dm           []float64 // J×J: M of the Newton step, Δ
	jacM, dmM         *mat.Dense
	etaV, mrV, dV, yV *mat.VecDense // over eta, mr, d, y
	lu, luD           mat.LU

	done []bool       // J: products whose firm the second-order check has seen
	firm []int        // the products of one firm
	neg  mat.SymDense // minus the Hessian of one firm's profit
	chol mat.Cholesky // of neg

	best       []float64 // prices with the smallest ζ step max|r_j/Λ_j| seen
	bestRes    float64
	bestMethod string
	stage      string
	failedFirm int // a product of the firm whose second-order condition fails
}

// reset starts a search in the market mk is bound to, with costs c, owners
// owner and tolerance tol, resizing the buffers when the market's number of
// products differs from the last one's.
func (s *solver) reset(mk *demand.Market, c []float64, owner []int, tol float64) {
	if J := mk.Len(); J != s.J || s.best == nil {
		s.resize(J)
	}
	s.mk, s.c, s.owner, s.tol = mk, c, owner, tol
	s.iters, s.bestRes, s.bestMethod, s.stage, s.failedFirm = 0, math.Inf(1), MethodZeta, "", 0
}

// resize sizes the buffers for J products, growing them only when needed.
func (s *solver) resize(J int) {
	s.J = J
	for _, b := range []*[]float64{&s.p, &s.pn, &s.r, &s.d, &s.q, &s.eta, &s.mr, &s.g, &s.c2, &s.y, &s.best} {
		*b = grow(*b, J)
	}
	s.jac, s.dm = grow(s.jac, J*J), grow(s.dm, J*J)
	if cap(s.done) < J {
		s.done, s.firm = make([]bool, J), make([]int, 0, J)
	}
	s.done = s.done[:J]
	if J == 0 {
		return
	}
	s.jacM, s.dmM = mat.NewDense(J, J, s.jac), mat.NewDense(J, J, s.dm)
	s.etaV, s.mrV, s.dV, s.yV = mat.NewVecDense(J, s.eta), mat.NewVecDense(J, s.mr), mat.NewVecDense(J, s.d), mat.NewVecDense(J, s.y)
}

// grow returns b with length n, reallocated only when its capacity is short.
func grow(b []float64, n int) []float64 {
	if cap(b) < n {
		return make([]float64, n)
	}
	return b[:n]
}

// eval evaluates the market at prices p and the first-order conditions r
// = s − Δ(p − c) there into s.r; positive prices p become the best point
// when the largest ζ step |r_j/Λ_j| = |c_j + ζ_j(p) − p_j| (a residual in
// prices, which does not vanish as every share does) is the smallest so
// far. It reports false when the shares are not finite.
func (s *solver) eval(p []float64) bool {
	mk := s.mk
	if !mk.SetPrices(p) {
		return false
	}
	demand.FOC(s.r, mk.PriceJacobian(), mk.Shares(), p, s.c, s.owner)
	worst := 0.0
	for j, lam := range mk.Lambda() {
		if z := math.Abs(s.r[j] / lam); z > worst || math.IsNaN(z) {
			worst = z
		}
	}
	if math.IsNaN(worst) {
		return false
	}
	if worst < s.bestRes && slices.Min(p) > 0 {
		s.bestRes = worst
		copy(s.best, p)
		s.bestMethod = s.stage
	}
	return true
}

// evalMarkup evaluates the market at prices p (eval) and the markups η =
// Δ⁻¹s into s.eta (Δ factored in s.luD) and the markup residual R = p − c
// − η = −Δ⁻¹r into s.mr. It returns ½‖R‖², and false when the shares are
// not finite or Δ is singular.
func (s *solver) evalMarkup(p []float64) (float64, bool) {
	if !s.eval(p) {
		return math.Inf(1), false
	}
	demand.FillSupplyMatrix(s.dm, s.mk.PriceJacobian(), s.owner)
	s.luD.Factorize(s.dmM)
	if !(s.luD.Cond() < singularJac) {
		return math.Inf(1), false
	}
	copy(s.eta, s.mk.Shares())
	if err := s.luD.SolveVecTo(s.etaV, false, s.etaV); err != nil {
		return math.Inf(1), false
	}
	f := 0.0
	for j, x := range p {
		R := x - s.c[j] - s.eta[j]
		s.mr[j] = R
		f += R * R / 2
	}
	if math.IsNaN(f) {
		return math.Inf(1), false
	}
	return f, true
}

// zetaMap writes the ζ update c + ζ(p) = c + Λ⁻¹(Ω∘Γ)(p − c) − Λ⁻¹s at the
// prices last evaluated, p, into dst and returns max|dst − p|. With ∂s/∂p
// = diag(Λ) − Γ, Γ_jl = Λ_j 1[j=l] − ∂s_j/∂p_l.
func (s *solver) zetaMap(dst, p []float64) float64 {
	J := s.J
	D, lam, sh := s.mk.PriceJacobian(), s.mk.Lambda(), s.mk.Shares()
	diff := 0.0
	for j := 0; j < J; j++ {
		acc := 0.0
		for l := 0; l < J; l++ {
			if s.owner[j] == s.owner[l] {
				gam := -D[j*J+l]
				if j == l {
					gam += lam[j]
				}
				acc += gam * (p[l] - s.c[l])
			}
		}
		dst[j] = s.c[j] + (acc-sh[j])/lam[j]
		if a := math.Abs(dst[j] - p[j]); a > diff || math.IsNaN(a) {
			diff = a
		}
	}
	return diff
}

// zeta iterates p ← c + ζ(p) from s.p until max|Δp| < tol. It gives up
// after zetaMaxIter iterations or when the shares stop being finite.
func (s *solver) zeta() bool {
	s.stage = MethodZeta
	for it := 0; it < zetaMaxIter; it++ {
		if !s.eval(s.p) {
			return false
		}
		diff := s.zetaMap(s.pn, s.p)
		s.iters++
		copy(s.p, s.pn)
		if math.IsNaN(diff) {
			return false
		}
		if diff < s.tolerance(s.p) {
			return true
		}
	}
	return false
}

// tolerance returns the stopping tolerance on max|Δp| at prices p: tol, or
// four units in the last place of the largest price when that is larger
// (at prices of 10⁴ a double cannot resolve 1e-12).
func (s *solver) tolerance(p []float64) float64 {
	return math.Max(s.tol, 4*ulp*maxAbs(p))
}

// ulp is the spacing of doubles at 1 (2⁻⁵²).
const ulp = 0x1p-52

// damped iterates p ← p + ω(c + ζ(p) − p) for ω = ½, ¼, ⅛, 1/16 in turn,
// each from the best prices so far until its step has not reached a new
// minimum for dampedStall iterations, dampedMaxIter iterations in all, and
// stops when the undamped step max|c + ζ(p) − p| < tol.
func (s *solver) damped() bool {
	s.stage = MethodDamped
	budget := dampedMaxIter
	for omega := 0.5; omega >= 1.0/16 && budget > 0; omega /= 2 {
		copy(s.p, s.best)
		smallest, since := math.Inf(1), 0
		for ; budget > 0 && since < dampedStall; budget-- {
			if !s.eval(s.p) {
				break
			}
			diff := s.zetaMap(s.pn, s.p)
			s.iters++
			if math.IsNaN(diff) {
				break
			}
			if diff < s.tolerance(s.p) {
				copy(s.p, s.pn)
				return true
			}
			if diff < smallest {
				smallest, since = diff, 0
			} else {
				since++
			}
			for j := range s.p {
				s.p[j] += omega * (s.pn[j] - s.p[j])
			}
		}
	}
	return false
}

// reason explains a failure: agents whose demand rises with price, or a
// residual that stops falling (with the least price-sensitive agent, whose
// monopoly markup 1/|α_i| bounds how far prices can be pulled up).
func (s *solver) reason(residual float64) string {
	n, top := s.nonNegativeAlpha()
	if n > 0 {
		return fmt.Sprintf("%d of %d agents have a price coefficient ≥ 0 (largest %+.3g): their demand does not fall with price, "+
			"so a firm's profit need not have a maximum and the first-order conditions may have no root", n, len(s.mk.Alpha()), top)
	}
	return fmt.Sprintf("no equilibrium found: the first-order-condition residual stops falling at %.3g (ζ, Newton and damped "+
		"iterations tried; the least price-sensitive agent's coefficient is %.3g)", residual, top)
}

// nonNegativeAlpha returns the number of agents whose price coefficient is
// not negative and the largest coefficient.
func (s *solver) nonNegativeAlpha() (int, float64) {
	n, top := 0, math.Inf(-1)
	for _, a := range s.mk.Alpha() {
		if !(a < 0) {
			n++
		}
		top = math.Max(top, a)
	}
	return n, top
}

// reasonSecondOrder explains a root of the first-order conditions that is
// not an equilibrium.
func (s *solver) reasonSecondOrder() string {
	why := ""
	if n, top := s.nonNegativeAlpha(); n > 0 {
		why = fmt.Sprintf("; %d of %d agents have a price coefficient ≥ 0 (largest %+.3g)", n, len(s.mk.Alpha()), top)
	}
	return fmt.Sprintf("the first-order conditions hold, but the profit of the firm that owns the market's product %d "+
		"(in data order) is not at a maximum in its prices there (second-order condition fails): these prices are not an equilibrium%s",
		s.failedFirm+1, why)
}

// HHI returns Σ_f (100·S_f/Σ_j s_j)² for shares s owned by owner.
func HHI(s []float64, owner []int) float64 {
	total := 0.0
	nf := 0
	for _, o := range owner {
		nf = max(nf, o+1)
	}
	byFirm := make([]float64, nf) // indexed, so the sum has a fixed order
	for j, v := range s {
		total += v
		byFirm[owner[j]] += v
	}
	h := 0.0
	for _, v := range byFirm {
		x := 100 * v / total
		h += x * x
	}
	return h
}
