package contraction

import (
	"math"

	"gonum.org/v1/gonum/blas"
	"gonum.org/v1/gonum/blas/blas64"
	"gonum.org/v1/gonum/floats"
	"gonum.org/v1/gonum/lapack/lapack64"
)

// Workspace holds the buffers for one market at a time. A Workspace is used by
// one goroutine; it is sized for the largest market once and reused.
type Workspace struct {
	j, i, k2 int // current market: products, agents, random columns

	x2     []float64 // J×K2 characteristics (view, not owned)
	weight []float64 // I agent weights (view)

	taste  []float64 // I×K2 agent coefficient deviations a_ik
	tasteT []float64 // K2×I, the same, column-major
	exps   []float64 // J×I, E_ji = exp(μ_ij − m_i)
	out    []float64 // I, o_i = exp(−m_i)
	mx     []float64 // I, m_i = max(0, max_j μ_ij)
	den    []float64 // I
	inv    []float64 // I, w_i / den_i

	e, s, raw         []float64 // J
	x0, x1, x2b, r, v []float64

	// Jacobian buffers.
	sij  []float64 // J×I unweighted agent shares s_ij
	ws   []float64 // J×I weighted agent shares w_i s_ij
	xbar []float64 // I
	negm []float64 // I, −m_i
	dsd  []float64 // J×J ∂s/∂δ
	dst  []float64 // J×P ∂s/∂θ
	sw   []float64 // J×I √w_i s_ij
	vm   []float64 // P×I agent variables of the parameters
	tm   []float64 // P×I
	ipiv []int
	col  []float64 // I

	// factored reports that dsd holds the upper Cholesky factor of ∂s/∂δ
	// after Jacobians (non-negative weights, P > 0).
	factored bool
	save     []float64 // J
}

// NewWorkspace returns a workspace for markets of up to maxJ products and maxI
// agents, with k2 random columns and up to p parameters.
func NewWorkspace(maxJ, maxI, k2, p int) *Workspace {
	w := &Workspace{k2: k2}
	w.taste = make([]float64, maxI*k2)
	w.tasteT = make([]float64, maxI*k2)
	w.exps = make([]float64, maxJ*maxI)
	w.sij = make([]float64, maxJ*maxI)
	w.ws = make([]float64, maxJ*maxI)
	w.mx = make([]float64, maxI)
	w.out = make([]float64, maxI)
	w.den = make([]float64, maxI)
	w.inv = make([]float64, maxI)
	w.xbar = make([]float64, max(maxI, k2))
	w.negm = make([]float64, maxI)
	w.col = make([]float64, max(maxI, k2))
	for _, b := range []*[]float64{&w.e, &w.s, &w.raw, &w.x0, &w.x1, &w.x2b, &w.r, &w.v} {
		*b = make([]float64, maxJ)
	}
	w.dsd = make([]float64, maxJ*maxJ)
	w.dst = make([]float64, maxJ*max(p, 1))
	w.sw = make([]float64, maxJ*maxI)
	w.vm = make([]float64, maxI*p)
	w.tm = make([]float64, maxI*p)
	w.ipiv = make([]int, maxJ)
	w.save = make([]float64, maxJ)
	return w
}

// SetMarket points the workspace at a market: x2 is its J×K2 characteristics
// block, taste its I×K2 agent coefficient deviations a_ik (so that
// μ_ij = Σ_k x2_jk a_ik) and weight its I weights. It computes E and o.
func (w *Workspace) SetMarket(x2 []float64, J int, taste, weight []float64) {
	I := len(weight)
	w.j, w.i = J, I
	w.x2 = x2
	w.weight = weight
	k2 := w.k2
	copy(w.taste[:I*k2], taste[:I*k2])
	w.computeExps()
}

// Tastes returns the I×K2 buffer of agent coefficient deviations, for callers
// that fill it in place before SetTastes.
func (w *Workspace) Tastes(I int) []float64 { return w.taste[:I*w.k2] }

// SetTastes is SetMarket for tastes already written into Tastes(len(weight)).
func (w *Workspace) SetTastes(x2 []float64, J int, weight []float64) {
	w.j, w.i = J, len(weight)
	w.x2 = x2
	w.weight = weight
	w.computeExps()
}

// SetX2 replaces the characteristics (for example after a price change) and
// recomputes E, keeping the tastes.
func (w *Workspace) SetX2(x2 []float64) {
	w.x2 = x2
	w.computeExps()
}

func (w *Workspace) computeExps() {
	J, I, k2 := w.j, w.i, w.k2
	E := w.exps[:J*I]
	// Column-major copy of the tastes so the inner loops run over agents.
	tc := w.tasteT[:k2*I]
	for i := 0; i < I; i++ {
		for k := 0; k < k2; k++ {
			tc[k*I+i] = w.taste[i*k2+k]
		}
	}
	// m_i = max(0, Σ_k max_j x_jk·a_ik): an upper bound on max_j μ_ij, so
	// that E_ji = exp(μ_ij − m_i) ≤ 1. With mid_k and half_k the midpoint and
	// half-range of x_·k over the market, max_j x_jk·a = a·mid_k + |a|·half_k,
	// which needs no branch.
	mid, half := w.xbar[:k2], w.col[:k2]
	for k := 0; k < k2; k++ {
		lo, hi := math.Inf(1), math.Inf(-1)
		for j := 0; j < J; j++ {
			x := w.x2[j*k2+k]
			lo, hi = min(lo, x), max(hi, x)
		}
		mid[k], half[k] = (lo+hi)/2, (hi-lo)/2
	}
	m := w.mx[:I]
	for i := range m {
		m[i] = 0
	}
	for k := 0; k < k2; k++ {
		col := tc[k*I : (k+1)*I]
		for i, a := range col {
			m[i] += a*mid[k] + math.Abs(a)*half[k]
		}
	}
	negm, out := w.negm[:I], w.out[:I]
	for i, b := range m {
		b = max(b, 0)
		m[i], negm[i], out[i] = b, -b, -b
	}
	expShifted(out)
	for j := 0; j < J; j++ {
		row := E[j*I : (j+1)*I]
		xj := w.x2[j*k2 : (j+1)*k2]
		copy(row, negm)
		for k, x := range xj {
			if x != 0 {
				axpy(x, tc[k*I:(k+1)*I], row)
			}
		}
		expShifted(row)
	}
}

// shares computes the market shares at delta into w.s. It returns false when a
// share is not a positive finite number.
func (w *Workspace) shares(delta []float64) bool {
	J, I := w.j, w.i
	d := 0.0
	for _, x := range delta[:J] {
		if x > d {
			d = x
		}
	}
	e := w.e[:J]
	for j, x := range delta[:J] {
		e[j] = exp(x - d)
	}
	ed := exp(-d)
	den := w.den[:I]
	for i, o := range w.out[:I] {
		den[i] = ed * o
	}
	E := w.exps[:J*I]
	for j, ej := range e {
		axpy(ej, E[j*I:(j+1)*I], den)
	}
	inv := w.inv[:I]
	floats.DivTo(inv, w.weight[:I], den) // assembly kernel
	raw := w.raw[:J]
	for j := range raw {
		raw[j] = dot(E[j*I:(j+1)*I], inv)
	}
	ok := true
	for j := range raw {
		s := e[j] * raw[j]
		w.s[j] = s
		if !(s > 0) || math.IsInf(s, 0) {
			ok = false
		}
	}
	return ok
}

// Shares writes the market shares at delta into dst (length J).
func (w *Workspace) Shares(delta, dst []float64) bool {
	ok := w.shares(delta)
	copy(dst, w.s[:w.j])
	return ok
}

// step sets dst = src + logShare − ln s(src) and returns max|dst − src|, or
// NaN when the shares at src are not finite and positive.
func (w *Workspace) step(dst, src, logShare []float64) float64 {
	if !w.shares(src) {
		return math.NaN()
	}
	diff := 0.0
	for j := range dst[:w.j] {
		dj := logShare[j] - math.Log(w.s[j])
		dst[j] = src[j] + dj
		if a := math.Abs(dj); a > diff || math.IsNaN(a) {
			diff = a
		}
	}
	return diff
}

// Invert solves s(δ) = exp(logShare) for the current market, starting from
// and overwriting delta. It returns the number of map evaluations and whether
// max|Δδ| fell below tol within maxIter evaluations.
func (w *Workspace) Invert(delta, logShare []float64, tol float64, maxIter int, accelerate bool) (int, bool) {
	if accelerate {
		return w.squarem(delta, logShare, tol, maxIter)
	}
	J := w.j
	x1 := w.x1[:J]
	for it := 1; it <= maxIter; it++ {
		diff := w.step(x1, delta, logShare)
		if math.IsNaN(diff) {
			return it, false
		}
		copy(delta[:J], x1)
		if diff < tol {
			return it, true
		}
	}
	return maxIter, false
}

func (w *Workspace) squarem(delta, logShare []float64, tol float64, maxIter int) (int, bool) {
	J := w.j
	x0, x1, x2, r, v := delta[:J], w.x1[:J], w.x2b[:J], w.r[:J], w.v[:J]
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

// Jacobians computes, at delta (which should solve the market), the shares
// into s (length J, may be nil) and ∂δ/∂θ into ddelta (J×P row-major) for the
// parameters given by cols (k(p)) and vars (the I values v_i,l(p) for each p).
// It returns false when ∂s/∂δ is singular.
func (w *Workspace) Jacobians(delta []float64, cols []int, vars [][]float64, ddelta []float64) bool {
	J, I := w.j, w.i
	P := len(cols)
	w.factored = false
	ws := w.ws[:J*I]
	// ∂s/∂δ = diag(s) − Σ_i w_i s_i s_i'. With non-negative weights it is
	// (√w∘S)(√w∘S)' subtracted from diag(s): a symmetric rank-I update
	// (half the work of a general product) of a positive definite matrix,
	// solved by Cholesky; otherwise a general product and LU.
	dsd := w.dsd[:J*J]
	D := blas64.General{Rows: J, Cols: J, Stride: J, Data: dsd}
	positive := true
	for _, x := range w.weight {
		if x < 0 {
			positive = false
			break
		}
	}
	if positive {
		// One pass over E gives w_i s_ij = e_j E_ji w_i/den_i and
		// √w_i s_ij = e_j E_ji √w_i/den_i.
		w.shares(delta)
		rs := w.sw[:J*I]
		c, inv, den := w.col[:I], w.inv[:I], w.den[:I]
		for i, x := range w.weight[:I] {
			c[i] = math.Sqrt(x) / den[i]
		}
		for j := 0; j < J; j++ {
			ej := w.e[j]
			row := w.exps[j*I : (j+1)*I]
			wrow, rrow := ws[j*I:(j+1)*I], rs[j*I:(j+1)*I]
			wrow, rrow, inv, c := wrow[:len(row)], rrow[:len(row)], inv[:len(row)], c[:len(row)]
			for i, x := range row {
				v := ej * x
				wrow[i] = v * inv[i]
				rrow[i] = v * c[i]
			}
		}
		for j := 0; j < J; j++ {
			rj := rs[j*I : (j+1)*I]
			for l := j; l < J; l++ {
				v := -dot(rj, rs[l*I:(l+1)*I])
				dsd[j*J+l], dsd[l*J+j] = v, v
			}
			dsd[j*J+j] += w.s[j]
		}
	} else {
		w.AgentShares(delta)
		blas64.Gemm(blas.NoTrans, blas.Trans, -1,
			blas64.General{Rows: J, Cols: I, Stride: I, Data: ws},
			blas64.General{Rows: J, Cols: I, Stride: I, Data: w.sij[:J*I]}, 0, D)
		for j := 0; j < J; j++ {
			dsd[j*J+j] += w.s[j]
		}
	}
	if P == 0 {
		return true
	}
	// ∂s_j/∂θ_p = Σ_i w_i s_ij v_ip (x_jk − x̄_ik), x̄_ik = Σ_m s_im x_mk
	// (from the weighted shares: x̄_ik = Σ_m w_i s_im x_mk / w_i):
	// with V (P×I) of rows v_p and T (P×I) of rows v_p∘x̄_k(p),
	// ∂s/∂θ = X∘(WS·V') − WS·T', two matrix products.
	k2 := w.k2
	xbar := w.xbar[:I]
	V, T := w.vm[:P*I], w.tm[:P*I]
	lastK := -1
	for p, k := range cols {
		if k != lastK {
			for i := range xbar {
				xbar[i] = 0
			}
			for m := 0; m < J; m++ {
				if x := w.x2[m*k2+k]; x != 0 {
					axpy(x, ws[m*I:(m+1)*I], xbar)
				}
			}
			for i, wi := range w.weight {
				if wi != 0 {
					xbar[i] /= wi
				} else {
					xbar[i] = 0
				}
			}
			lastK = k
		}
		vp := vars[p][:I]
		copy(V[p*I:(p+1)*I], vp)
		tp := T[p*I : (p+1)*I]
		for i, v := range vp {
			tp[i] = v * xbar[i]
		}
	}
	dst := w.dst[:J*P]
	for j := 0; j < J; j++ {
		row := ws[j*I : (j+1)*I]
		for p, k := range cols {
			dst[j*P+p] = w.x2[j*k2+k]*dot(row, V[p*I:(p+1)*I]) - dot(row, T[p*I:(p+1)*I])
		}
	}
	// ∂δ/∂θ = −(∂s/∂δ)⁻¹ ∂s/∂θ.
	B := blas64.General{Rows: J, Cols: P, Stride: P, Data: dst}
	if positive {
		if _, ok := lapack64.Potrf(blas64.Symmetric{Uplo: blas.Upper, N: J, Stride: J, Data: dsd}); !ok {
			return false
		}
		w.factored = true
		cholSolve(dsd, J, dst, P)
	} else {
		ipiv := w.ipiv[:J]
		if !lapack64.Getrf(D, ipiv) {
			return false
		}
		lapack64.Getrs(blas.NoTrans, D, B, ipiv)
	}
	for n, x := range dst {
		ddelta[n] = -x
	}
	return true
}

// AgentShares computes the unweighted agent shares s_ij at delta into the
// workspace (see AgentShareRow), their weighted version w_i s_ij, and the
// market shares (see Share).
func (w *Workspace) AgentShares(delta []float64) bool {
	ok := w.shares(delta)
	J, I := w.j, w.i
	S, WS := w.sij[:J*I], w.ws[:J*I]
	r := w.col[:I]
	for i, dn := range w.den[:I] {
		r[i] = 1 / dn
	}
	for j := 0; j < J; j++ {
		ej := w.e[j]
		row := w.exps[j*I : (j+1)*I]
		out := S[j*I : (j+1)*I]
		wout := WS[j*I : (j+1)*I]
		for i, x := range row {
			v := ej * x
			out[i] = v * r[i]
			wout[i] = v * w.inv[i]
		}
	}
	return ok
}

// AgentShareRow returns the I agent shares of product j after AgentShares.
func (w *Workspace) AgentShareRow(j int) []float64 { return w.sij[j*w.i : (j+1)*w.i] }

// Share returns market share s_j after Shares, AgentShares or Jacobians.
func (w *Workspace) Share(j int) float64 { return w.s[j] }

// LogInclusive returns ln(1 + Σ_j exp(δ_j + μ_ij)) for agent i after shares
// have been computed at delta: from the shifted denominator,
// ln(den_i) + d + m_i, where den_i = exp(−d−m_i)(1 + Σ_j exp(δ_j+μ_ij)).
func (w *Workspace) LogInclusive(i int, delta []float64) float64 {
	d := 0.0
	for _, x := range delta[:w.j] {
		if x > d {
			d = x
		}
	}
	return math.Log(w.den[i]) + d + w.mx[i]
}

// Factor copies the upper Cholesky factor of ∂s/∂δ left by the last
// Jacobians call into dst (J×J) and reports whether there was one.
func (w *Workspace) Factor(dst []float64) bool {
	if !w.factored {
		return false
	}
	copy(dst, w.dsd[:w.j*w.j])
	return true
}

// ChordInvert solves s(δ) = exp(logShare) by chord Newton steps
// δ ← δ + (∂s/∂δ)⁻¹(s ∘ (ln s_obs − ln s(δ))), with ∂s/∂δ fixed at an earlier
// solution nearby (factor, its upper Cholesky factor from Factor). Each step
// costs one share evaluation, like a contraction step, but converges in a few
// steps from a warm start. It stops on the contraction's own criterion,
// max|ln s_obs − ln s(δ)| < tol. If the residual fails to halve in a step
// the attempt is abandoned: delta is restored and false returned, so the
// caller can fall back to the contraction.
func (w *Workspace) ChordInvert(delta, logShare, factor []float64, tol float64, maxIter int) (int, bool) {
	J := w.j
	save := w.save[:J]
	copy(save, delta[:J])
	r := w.x1[:J]
	prev := math.Inf(1)
	for it := 1; it <= maxIter; it++ {
		if !w.shares(delta) {
			break
		}
		res := 0.0
		for j := range r {
			d := logShare[j] - math.Log(w.s[j])
			res = math.Max(res, math.Abs(d))
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
	return 0, false
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
