package contraction

import (
	"math"
	"slices"

	"gonum.org/v1/gonum/floats"
)

// rcLogit is the random-coefficients logit share model of one market at a
// time (see the package documentation for the factored exponentials).
type rcLogit struct {
	p        *Problem
	j, i, k2 int // current market: products, agents, random columns

	cols   []int       // Col of each taste parameter
	lnCols []int       // columns whose coefficient is log-normal: a_ik = −exp(Σ_p θ_p v_ip)
	lnPar  []bool      // per taste parameter: it sits on a log-normal column
	x2     []float64   // J×K2 characteristics (a view of the problem's, or x2own after Reprice)
	x2own  []float64   // the market's characteristics with repriced price column
	weight []float64   // I agent weights (view)
	vars   [][]float64 // per parameter, the market's agent values (views)

	taste  []float64 // I×K2 agent coefficient deviations a_ik
	tasteT []float64 // K2×I, the same, column-major
	exps   []float64 // J×I, E_ji = exp(μ_ij − m_i)
	out    []float64 // I, o_i = exp(−m_i)
	mx     []float64 // I, m_i ≥ max(0, max_j μ_ij)
	negm   []float64 // I, −m_i
	den    []float64 // I, shifted denominators
	inv    []float64 // I, w_i / den_i
	col    []float64 // max(I, K2) scratch
	xbar   []float64 // max(I, K2) scratch

	e, s, raw []float64 // J

	// The last delta shares were computed at, and their outcome: shares
	// are not recomputed at the same delta until Set or Reprice changes E.
	memo      []float64 // J
	memoOK    bool
	memoValid bool

	sij []float64 // J×I unweighted agent shares s_ij
	ws  []float64 // J×I weighted agent shares w_i s_ij (or w_i α_i s_ij)
	sw  []float64 // J×I √w_i s_ij
	vm  []float64 // P×I agent variables of the parameters
	tm  []float64 // P×I
	pjt []float64 // 3·J×I, for PriceJacobianTheta
}

// rcLogitMarket is the RC logit family's evaluator: the shared taste and
// share code of rcLogit with the closed forms that hold only for the logit
// (PriceHessian, PriceJacobianTheta). Families that build on rcLogit (the
// nested logit) embed rcLogit, not this type, so they cannot inherit a
// formula that is not theirs; the Worker differentiates for them.
type rcLogitMarket struct{ rcLogit }

func newRCLogit(p *Problem) *rcLogit {
	r := &rcLogit{p: p, k2: p.K2, vars: make([][]float64, len(p.Params))}
	for _, q := range p.Params {
		r.cols = append(r.cols, q.Col)
		r.lnPar = append(r.lnPar, q.Col < len(p.LogNormal) && p.LogNormal[q.Col])
	}
	for k, ln := range p.LogNormal {
		if ln {
			r.lnCols = append(r.lnCols, k)
		}
	}
	return r
}

// size grows the buffers for a market of J products and I agents.
func (r *rcLogit) size(J, I int) {
	k2, P := r.k2, len(r.cols)
	r.j, r.i = J, I
	r.taste = grow(r.taste, I*k2)
	r.tasteT = grow(r.tasteT, I*k2)
	for _, b := range []*[]float64{&r.exps, &r.sij, &r.ws, &r.sw} {
		*b = grow(*b, J*I)
	}
	for _, b := range []*[]float64{&r.out, &r.mx, &r.negm, &r.den, &r.inv} {
		*b = grow(*b, I)
	}
	r.col = grow(r.col, max(I, k2))
	r.xbar = grow(r.xbar, max(I, k2))
	for _, b := range []*[]float64{&r.e, &r.s, &r.raw, &r.memo} {
		*b = grow(*b, J)
	}
	r.vm = grow(r.vm, P*I)
	r.tm = grow(r.tm, P*I)
}

func (r *rcLogit) Size() (int, int) { return r.j, r.i }

// Set points the evaluator at market t: a_ik = Σ_{p: Col_p = k} θ_p v_i,Var_p
// (−exp of that sum on a log-normal column), then E and o.
func (r *rcLogit) Set(t int, theta []float64) {
	r.setTastes(t, theta)
	r.computeExps(true)
}

// setTastes points the evaluator at market t and computes the agents'
// tastes a_ik at θ2 = theta (only its taste parameters are read).
func (r *rcLogit) setTastes(t int, theta []float64) {
	p := r.p
	m, a := p.Products[t], p.Agents[t]
	J, I := m.Len(), a.Len()
	r.size(J, I)
	k2 := r.k2
	r.x2 = p.X2[m.Start*k2 : m.End*k2]
	r.weight = p.Weight[a.Start:a.End]
	tastes := r.taste
	for i := range tastes {
		tastes[i] = 0
	}
	for q, par := range p.Params {
		v := p.Vars[par.Var][a.Start:a.End]
		r.vars[q] = v
		th := theta[q]
		if th == 0 {
			continue
		}
		for i, x := range v {
			tastes[i*k2+par.Col] += th * x
		}
	}
	for _, k := range r.lnCols {
		for i := 0; i < I; i++ {
			tastes[i*k2+k] = -math.Exp(tastes[i*k2+k])
		}
	}
}

// Reprice writes price into the price column of the market's X2 (a copy)
// and recomputes E.
func (r *rcLogit) Reprice(price []float64) {
	if r.setPrice(price) {
		r.computeExps(true)
	}
}

// setPrice writes price into the price column of a copy of the market's X2
// and reports whether price has such a column.
func (r *rcLogit) setPrice(price []float64) bool {
	c := r.p.PriceCol
	if c < 0 {
		return false
	}
	J, k2 := r.j, r.k2
	r.x2own = grow(r.x2own, J*k2)
	copy(r.x2own, r.x2[:J*k2])
	for j, x := range price[:J] {
		r.x2own[j*k2+c] = x
	}
	r.x2 = r.x2own
	return true
}

// computeExps fills row j of E with μ_ij − m_i and, when exponentiate is
// set, replaces it by its exponential; o_i = exp(−m_i) either way.
func (r *rcLogit) computeExps(exponentiate bool) {
	J, I, k2 := r.j, r.i, r.k2
	r.memoValid = false
	E := r.exps[:J*I]
	// Column-major copy of the tastes so the inner loops run over agents.
	tc := r.tasteT[:k2*I]
	for i := 0; i < I; i++ {
		for k := 0; k < k2; k++ {
			tc[k*I+i] = r.taste[i*k2+k]
		}
	}
	// m_i = max(0, Σ_k max_j x_jk·a_ik): an upper bound on max_j μ_ij, so
	// that E_ji = exp(μ_ij − m_i) ≤ 1. With mid_k and half_k the midpoint and
	// half-range of x_·k over the market, max_j x_jk·a = a·mid_k + |a|·half_k,
	// which needs no branch.
	mid, half := r.xbar[:k2], r.col[:k2]
	for k := 0; k < k2; k++ {
		lo, hi := math.Inf(1), math.Inf(-1)
		for j := 0; j < J; j++ {
			x := r.x2[j*k2+k]
			lo, hi = min(lo, x), max(hi, x)
		}
		mid[k], half[k] = (lo+hi)/2, (hi-lo)/2
	}
	m := r.mx[:I]
	for i := range m {
		m[i] = 0
	}
	for k := 0; k < k2; k++ {
		col := tc[k*I : (k+1)*I]
		for i, a := range col {
			m[i] += a*mid[k] + math.Abs(a)*half[k]
		}
	}
	negm, out := r.negm[:I], r.out[:I]
	for i, b := range m {
		b = max(b, 0)
		m[i], negm[i], out[i] = b, -b, -b
	}
	expShifted(out)
	for j := 0; j < J; j++ {
		row := E[j*I : (j+1)*I]
		xj := r.x2[j*k2 : (j+1)*k2]
		copy(row, negm)
		for k, x := range xj {
			if x != 0 {
				axpy(x, tc[k*I:(k+1)*I], row)
			}
		}
		if exponentiate {
			expShifted(row)
		}
	}
}

// shares computes the market shares at delta into r.s, leaving e_j =
// exp(δ_j − d), den_i and inv_i = w_i/den_i for the agent-level passes. It
// returns false when a share is not a positive finite number.
func (r *rcLogit) shares(delta []float64) bool {
	J, I := r.j, r.i
	if r.memoValid && slices.Equal(r.memo[:J], delta[:J]) {
		return r.memoOK
	}
	d := maxShift(delta[:J])
	e := r.e[:J]
	for j, x := range delta[:J] {
		e[j] = exp(x - d)
	}
	ed := exp(-d)
	den := r.den[:I]
	for i, o := range r.out[:I] {
		den[i] = ed * o
	}
	E := r.exps[:J*I]
	for j, ej := range e {
		axpy(ej, E[j*I:(j+1)*I], den)
	}
	inv := r.inv[:I]
	floats.DivTo(inv, r.weight[:I], den) // assembly kernel
	raw := r.raw[:J]
	for j := range raw {
		raw[j] = dot(E[j*I:(j+1)*I], inv)
	}
	ok := true
	for j := range raw {
		s := e[j] * raw[j]
		r.s[j] = s
		if !(s > 0) || math.IsInf(s, 0) {
			ok = false
		}
	}
	copy(r.memo[:J], delta[:J])
	r.memoOK, r.memoValid = ok, true
	return ok
}

// maxShift returns d = max(0, max_j δ_j), the shift of the exponentials.
func maxShift(delta []float64) float64 {
	d := 0.0
	for _, x := range delta {
		if x > d {
			d = x
		}
	}
	return d
}

func (r *rcLogit) Shares(delta, dst []float64) bool {
	ok := r.shares(delta)
	copy(dst, r.s[:r.j])
	return ok
}

func (r *rcLogit) Damping(dst []float64) {
	for j := range dst[:r.j] {
		dst[j] = 1
	}
}

// Jacobians computes ∂s/∂δ and ∂s/∂θ2:
//
//	∂s_j/∂δ_l = s_j 1[j=l] − Σ_i w_i s_ij s_il,
//	∂s_j/∂θ_p = Σ_i w_i s_ij v_ip (x_jk − x̄_ik),  x̄_ik = Σ_m s_im x_mk.
//
// With non-negative weights ∂s/∂δ is diag(s) − (√w∘S)(√w∘S)', a symmetric
// rank-I update computed by J(J+1)/2 dot products.
func (r *rcLogit) Jacobians(delta, dsdd, dsdt []float64) bool {
	J, I := r.j, r.i
	ok := r.shares(delta)
	ws, rs := r.ws[:J*I], r.sw[:J*I]
	// One pass over E gives w_i s_ij = e_j E_ji w_i/den_i and
	// √|w_i| s_ij (with the sign of w_i on the first factor).
	c, inv, den := r.col[:I], r.inv[:I], r.den[:I]
	positive := true
	for i, x := range r.weight[:I] {
		c[i] = math.Sqrt(math.Abs(x)) / den[i]
		positive = positive && x >= 0
	}
	for j := 0; j < J; j++ {
		ej := r.e[j]
		row := r.exps[j*I : (j+1)*I]
		wrow, rrow := ws[j*I:(j+1)*I], rs[j*I:(j+1)*I]
		wrow, rrow, inv, c := wrow[:len(row)], rrow[:len(row)], inv[:len(row)], c[:len(row)]
		for i, x := range row {
			v := ej * x
			wrow[i] = v * inv[i]
			rrow[i] = v * c[i]
		}
	}
	if positive {
		for j := 0; j < J; j++ {
			rj := rs[j*I : (j+1)*I]
			for l := j; l < J; l++ {
				v := -dot(rj, rs[l*I:(l+1)*I])
				dsdd[j*J+l], dsdd[l*J+j] = v, v
			}
		}
	} else {
		// Some weights are negative (sparse grids): Σ_i (w_i s_ij) s_il.
		S := r.sij[:J*I]
		for j := 0; j < J; j++ {
			ej := r.e[j]
			for i, x := range r.exps[j*I : (j+1)*I] {
				S[j*I+i] = ej * x / den[i]
			}
		}
		for j := 0; j < J; j++ {
			wj := ws[j*I : (j+1)*I]
			for l := j; l < J; l++ {
				v := -dot(wj, S[l*I:(l+1)*I])
				dsdd[j*J+l], dsdd[l*J+j] = v, v
			}
		}
	}
	for j := 0; j < J; j++ {
		dsdd[j*J+j] += r.s[j]
	}
	if dsdt != nil && len(r.cols) > 0 {
		r.thetaJacobian(dsdt)
	}
	return ok
}

// thetaJacobian writes ∂s/∂θ2 from the weighted agent shares in r.ws:
// with V (P×I) of rows v_p and T (P×I) of rows v_p∘x̄_k(p),
// ∂s/∂θ = X∘(WS·V') − WS·T'.
func (r *rcLogit) thetaJacobian(dst []float64) {
	J, I, k2 := r.j, r.i, r.k2
	P := len(r.cols)
	ws := r.ws[:J*I]
	xbar := r.xbar[:I]
	V, T := r.vm[:P*I], r.tm[:P*I]
	lastK := -1
	for p, k := range r.cols {
		if k != lastK {
			// x̄_ik = Σ_m w_i s_im x_mk / w_i.
			for i := range xbar {
				xbar[i] = 0
			}
			for m := 0; m < J; m++ {
				if x := r.x2[m*k2+k]; x != 0 {
					axpy(x, ws[m*I:(m+1)*I], xbar)
				}
			}
			for i, wi := range r.weight[:I] {
				if wi != 0 {
					xbar[i] /= wi
				} else {
					xbar[i] = 0
				}
			}
			lastK = k
		}
		vp := r.vars[p][:I]
		Vp := V[p*I : (p+1)*I]
		copy(Vp, vp)
		if r.lnPar[p] {
			// ∂a_ik/∂θ_p = a_ik v_ip on a log-normal column.
			for i, a := range r.tasteT[k*I : (k+1)*I] {
				Vp[i] *= a
			}
		}
		tp := T[p*I : (p+1)*I]
		for i, v := range Vp {
			tp[i] = v * xbar[i]
		}
	}
	for j := 0; j < J; j++ {
		row := ws[j*I : (j+1)*I]
		for p, k := range r.cols {
			dst[j*P+p] = r.x2[j*k2+k]*dot(row, V[p*I:(p+1)*I]) - dot(row, T[p*I:(p+1)*I])
		}
	}
}

// Alpha writes α_i = β_price + a_i,price (the taste deviation on the price
// column, when price has a random coefficient).
func (r *rcLogit) Alpha(betaPrice float64, dst []float64) {
	c := r.p.PriceCol
	for i := range dst[:r.i] {
		dst[i] = betaPrice
		if c >= 0 {
			dst[i] += r.taste[i*r.k2+c]
		}
	}
}

// PriceJacobian computes ∂s_j/∂p_l = Σ_i w_i α_i s_ij (1[j=l] − s_il) with
// Λ_j = Σ_i w_i α_i s_ij: with A_ji = w_i α_i s_ij, ∂s/∂p = diag(A·1) − A S',
// where Γ = A S' is symmetric, so J(J+1)/2 dot products give it.
func (r *rcLogit) PriceJacobian(delta, alpha, dsdp, lambda []float64) {
	J, I := r.j, r.i
	S, A := r.agentShares(delta), r.ws[:J*I]
	for j := 0; j < J; j++ {
		srow, arow := S[j*I:(j+1)*I], A[j*I:(j+1)*I]
		for i, v := range srow {
			arow[i] = v * r.weight[i] * alpha[i]
		}
	}
	for j := 0; j < J; j++ {
		aj := A[j*I : (j+1)*I]
		lam := 0.0
		for _, v := range aj {
			lam += v
		}
		lambda[j] = lam
		for l := j; l < J; l++ {
			v := -dot(aj, S[l*I:(l+1)*I])
			dsdp[j*J+l], dsdp[l*J+j] = v, v
		}
		dsdp[j*J+j] += lam
	}
}

// agentShares writes the agent shares s_ij at delta into r.sij (J×I, row j)
// and returns it.
func (r *rcLogit) agentShares(delta []float64) []float64 {
	J, I := r.j, r.i
	r.shares(delta)
	S := r.sij[:J*I]
	c := r.col[:I]
	for i, dn := range r.den[:I] {
		c[i] = 1 / dn
	}
	for j := 0; j < J; j++ {
		ej := r.e[j]
		row := r.exps[j*I : (j+1)*I]
		srow := S[j*I : (j+1)*I]
		for i, x := range row {
			srow[i] = ej * x * c[i]
		}
	}
	return S
}

// PriceHessian contracts the second price derivatives of the shares,
//
//	∂²s_l/∂p_j∂p_m = Σ_i w_i α_i² s_il [(1[l=j] − s_ij)(1[l=m] − s_im) − s_ij(1[j=m] − s_im)],
//
// row by row with u: with b_i = w_i α_i² and ū_ij = Σ_l u_jl s_il,
//
//	dst_jm = Σ_i b_i s_ij [1[j=m](u_jj − ū_ij) + s_im(2ū_ij − u_jj − u_jm)],
//
// 3J² products over agents.
func (r *rcLogitMarket) PriceHessian(delta, alpha, u, dst []float64) {
	J, I := r.j, r.i
	S := r.agentShares(delta)
	b := r.col[:I]
	for i, a := range alpha[:I] {
		b[i] = r.weight[i] * a * a
	}
	x, y := r.ws[:I], r.sw[:I] // b_i s_ij and b_i s_ij ū_ij of the current row j
	for j := 0; j < J; j++ {
		uj := u[j*J : (j+1)*J]
		for i := range y {
			y[i] = 0
		}
		for l, v := range uj {
			if v != 0 {
				axpy(v, S[l*I:(l+1)*I], y)
			}
		}
		sj, ujj := S[j*I:(j+1)*I], uj[j]
		diag := 0.0
		for i, v := range sj {
			xi := b[i] * v
			x[i] = xi
			diag += xi * (ujj - y[i])
			y[i] *= xi
		}
		for m := 0; m < J; m++ {
			sm := S[m*I : (m+1)*I]
			dst[j*J+m] = 2*dot(y, sm) - (ujj+uj[m])*dot(x, sm)
		}
		dst[j*J+j] += diag
	}
}

// LogInclusive writes ln(1 + Σ_j exp(δ_j + μ_ij)) per agent: from the
// shifted denominator, ln(den_i) + d + m_i.
func (r *rcLogit) LogInclusive(delta, dst []float64) {
	r.shares(delta)
	d := maxShift(delta[:r.j])
	for i := range dst[:r.i] {
		dst[i] = math.Log(r.den[i]) + d + r.mx[i]
	}
}

// PriceJacobianTheta writes d(∂s/∂p)/dθ_k for every taste parameter k into
// dst (P×J×J, block k row l column j = d(∂s_l/∂p_j)/dθ_k) at delta, for
// agents' price coefficients α_i = betaPrice + a_i,price, when δ moves with
// θ as ddelta (J×P) —
// ∂δ/∂θ2 at fixed shares, for the supply side. Agent by agent, with
// dv_ijk = ddelta_jk + x2_j,k(p)·v_ip and ds_ij = s_ij(dv_ij − Σ_m s_im
// dv_im), and dα_i = v_ip when parameter k is on the price column (a_ik v_ip
// in place of v_ip on a log-normal column):
//
//	d(∂s_l/∂p_j) = Σ_i w_i [dα_i s_il(1[l=j] − s_ij) + α_i ds_il(1[l=j] − s_ij) − α_i s_il ds_ij].
func (r *rcLogitMarket) PriceJacobianTheta(delta []float64, betaPrice float64, ddelta, dst []float64) {
	J, I := r.j, r.i
	P := len(r.cols)
	r.pjt = grow(r.pjt, 3*J*I+I)
	alpha := r.pjt[3*J*I:]
	r.Alpha(betaPrice, alpha)
	S, As := r.agentShares(delta), r.ws[:J*I]
	dS, Ads, wdS := r.pjt[:J*I], r.pjt[J*I:2*J*I], r.pjt[2*J*I:3*J*I]
	for j := 0; j < J; j++ {
		arow := As[j*I : (j+1)*I]
		for i, v := range S[j*I : (j+1)*I] {
			arow[i] = v * r.weight[i] * alpha[i]
		}
	}
	sbar := r.xbar[:I]
	for k := 0; k < P; k++ {
		col, vk := r.cols[k], r.vars[k][:I]
		if r.lnPar[k] {
			// ∂a_i/∂θ_k = a_i v_ik on a log-normal column.
			scaled := r.tm[k*I : (k+1)*I]
			for i, a := range r.tasteT[col*I : (col+1)*I] {
				scaled[i] = vk[i] * a
			}
			vk = scaled
		}
		// dv_ij = ddelta_jk + x_j,col v_ik; ds_ij = s_ij (dv_ij − Σ_m s_im dv_im).
		for i := range sbar {
			sbar[i] = 0
		}
		for m := 0; m < J; m++ {
			dm, xm := ddelta[m*P+k], r.x2[m*r.k2+col]
			sm := S[m*I : (m+1)*I]
			for i, s := range sm {
				sbar[i] += s * (dm + xm*vk[i])
			}
		}
		onPrice := col == r.p.PriceCol
		for j := 0; j < J; j++ {
			dj, xj := ddelta[j*P+k], r.x2[j*r.k2+col]
			sj := S[j*I : (j+1)*I]
			for i, s := range sj {
				ds := s * (dj + xj*vk[i] - sbar[i])
				dS[j*I+i] = ds
				Ads[j*I+i] = ds * r.weight[i] * alpha[i]
				wdS[j*I+i] = 0
				if onPrice {
					wdS[j*I+i] = r.weight[i] * vk[i] * s
				}
			}
		}
		blk := dst[k*J*J : (k+1)*J*J]
		for l := 0; l < J; l++ {
			diag := 0.0
			for _, v := range Ads[l*I : (l+1)*I] {
				diag += v
			}
			if onPrice {
				for _, v := range wdS[l*I : (l+1)*I] {
					diag += v
				}
			}
			for j := l; j < J; j++ {
				v := -dot(Ads[l*I:(l+1)*I], S[j*I:(j+1)*I]) - dot(As[l*I:(l+1)*I], dS[j*I:(j+1)*I])
				if onPrice {
					v -= dot(wdS[l*I:(l+1)*I], S[j*I:(j+1)*I])
				}
				blk[l*J+j], blk[j*J+l] = v, v
			}
			blk[l*J+l] += diag
		}
	}
}
