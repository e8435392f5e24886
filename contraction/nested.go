package contraction

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/floats"
)

// Nested is the random-coefficients nested logit family (Berry 1994;
// Grigolon & Verboven 2014): products are grouped into nests, the outside
// good is alone, and the nesting parameters ρ (one for all nests, or one per
// nest with ByNest) follow the taste parameters in θ2. With no taste
// parameters it is the plain nested logit. See the package documentation
// for the formulas.
type Nested struct {
	Nest   []int // nest (0..Nests−1) of each row of the problem
	Nests  int   // number of nests
	ByNest bool  // one ρ per nest (in nest order) instead of one for all
}

// NewMarket returns a nested-logit evaluator for the markets of p.
func (f *Nested) NewMarket(p *Problem) Market {
	return &rcNested{rcLogit: *newRCLogit(p), fam: f}
}

// Params returns the number of nesting parameters: 1, or Nests with ByNest.
func (f *Nested) Params() int {
	if f.ByNest {
		return f.Nests
	}
	return 1
}

// Check reports whether every row of p has a nest in range.
func (f *Nested) Check(p *Problem) error {
	if f.Nests < 1 {
		return fmt.Errorf("contraction: a nested logit needs at least one nest")
	}
	if len(f.Nest) != len(p.LogShare) {
		return fmt.Errorf("contraction: %d nest indices for %d rows", len(f.Nest), len(p.LogShare))
	}
	for n, g := range f.Nest {
		if g < 0 || g >= f.Nests {
			return fmt.Errorf("contraction: row %d: nest %d out of range for %d nests", n, g, f.Nests)
		}
	}
	return nil
}

func (f *Nested) String() string { return "random-coefficients nested logit" }

// Rows returns the family of a problem made of the given rows of f's
// problem, in that order (see RowFamily).
func (f *Nested) Rows(rows []int) Family {
	g := *f
	g.Nest = make([]int, len(rows))
	for i, r := range rows {
		g.Nest[i] = f.Nest[r]
	}
	return &g
}

// rcNested is the nested logit of one market at a time. It reuses the RC
// logit's tastes; its E holds exp((μ_ij − b_gi)/(1−ρ_g)) with b_gi =
// max_{l∈g} μ_il for product j of nest g.
type rcNested struct {
	rcLogit
	fam *Nested

	g      int       // nests present in the market
	ok     bool      // every ρ of the market is in [0, 1)
	nestOf []int     // J: local nest of each product
	global []int     // G: global nest of each local nest
	local  []int     // Nests: local index of each global nest, −1 when absent
	rho    []float64 // G
	scale  []float64 // G: 1/(1−ρ_g)
	dg     []float64 // G: d_g = max_{j∈g} δ_j

	logE []float64 // J×I: ln E_ji = (μ_ij − b_gi)/(1−ρ_g), unclamped
	cond []float64 // J×I: within-nest shares s_ij|g

	bmax []float64 // G×I: b_gi
	dsum []float64 // G×I: D̃_gi = Σ_{j∈g} e_j E_ji
	lsum []float64 // G×I: ln D̃_gi
	q    []float64 // G×I: exp(A_gi − M_i), the unnormalised nest shares
	sg   []float64 // G×I: nest shares s_ig = q_gi/den_i
	c    []float64 // G×I: w_i s_ig / D̃_gi
	big  []float64 // I: M_i, the agent's shift of the outer log-sum
	ent  []float64 // G×I: within-nest entropy H_gi (then s_ig H_gi)
	tg   []float64 // G×I scratch: within-nest means of a characteristic
}

// sizeNested grows the nested buffers for J products, I agents and G nests.
func (r *rcNested) sizeNested(J, I, G int) {
	r.logE = grow(r.logE, J*I)
	r.cond = grow(r.cond, J*I)
	for _, b := range []*[]float64{&r.bmax, &r.dsum, &r.lsum, &r.q, &r.sg, &r.c, &r.ent, &r.tg} {
		*b = grow(*b, G*I)
	}
	r.big = grow(r.big, I)
}

// Set points the evaluator at market t at θ2: tastes as in the RC logit,
// the market's nests and their ρ, then E.
func (r *rcNested) Set(t int, theta []float64) {
	r.setTastes(t, theta)
	r.setNests(t, theta[len(r.p.Params):])
	r.computeExps()
}

// setNests numbers the nests present in market t in order of first
// appearance and reads their ρ from the family's part of θ2.
func (r *rcNested) setNests(t int, rho []float64) {
	f := r.fam
	m := r.p.Products[t]
	J := m.Len()
	r.local = grow(r.local, f.Nests)
	for g := range r.local {
		r.local[g] = -1
	}
	r.nestOf = grow(r.nestOf, J)
	r.global = r.global[:0]
	for j := 0; j < J; j++ {
		g := f.Nest[m.Start+j]
		if r.local[g] < 0 {
			r.local[g] = len(r.global)
			r.global = append(r.global, g)
		}
		r.nestOf[j] = r.local[g]
	}
	G := len(r.global)
	r.g = G
	r.rho, r.scale, r.dg = grow(r.rho, G), grow(r.scale, G), grow(r.dg, G)
	r.ok = true
	for l, g := range r.global {
		x := rho[0]
		if f.ByNest {
			x = rho[g]
		}
		r.rho[l] = x
		r.scale[l] = 1 / (1 - x)
		r.ok = r.ok && x >= 0 && x < 1
	}
	r.sizeNested(J, r.i, G)
}

// Reprice writes price into the market's X2 and recomputes E.
func (r *rcNested) Reprice(price []float64) {
	if r.setPrice(price) {
		r.computeExps()
	}
}

// computeExps sets b_gi = max_{j∈g} μ_ij (shifted by the RC logit's m_i)
// and E_ji = exp((μ_ij − b_gi)/(1−ρ_g)) ≤ 1, keeping its logarithm.
func (r *rcNested) computeExps() {
	if !r.ok {
		return
	}
	r.rcLogit.computeExps(false) // E_ji = μ_ij − m_i
	J, I, G := r.j, r.i, r.g
	E, bm := r.exps[:J*I], r.bmax[:G*I]
	for k := range bm {
		bm[k] = math.Inf(-1)
	}
	for j := 0; j < J; j++ {
		b := bm[r.nestOf[j]*I : (r.nestOf[j]+1)*I]
		for i, u := range E[j*I : (j+1)*I] {
			b[i] = max(b[i], u)
		}
	}
	for j := 0; j < J; j++ {
		g := r.nestOf[j]
		b, sc := bm[g*I:(g+1)*I], r.scale[g]
		row, lrow := E[j*I:(j+1)*I], r.logE[j*I:(j+1)*I]
		for i, u := range row {
			v := (u - b[i]) * sc
			row[i], lrow[i] = v, v
		}
		expShifted(row)
	}
	for g := 0; g < G; g++ {
		for i, m := range r.mx[:I] {
			bm[g*I+i] += m
		}
	}
}

// shares computes the market shares at delta into r.s, leaving e_j, D̃, its
// logarithm, the unnormalised nest terms q and c = w∘s_ig/D̃ for the
// agent-level passes. With d_g = max_{j∈g} δ_j, e_j = exp((δ_j − d_g)/(1−ρ_g)),
// A_gi = d_g + b_gi + (1−ρ_g) ln D̃_gi (the log of D_ig^(1−ρ_g)) and M_i =
// max(0, max_g A_gi), q_gi = exp(A_gi − M_i), den_i = exp(−M_i) + Σ_h q_hi:
//
//	s_ig = q_gi / den_i,   s_ij = e_j E_ji / D̃_gi · s_ig.
func (r *rcNested) shares(delta []float64) bool {
	if !r.ok {
		return false
	}
	J, I, G := r.j, r.i, r.g
	dg := r.dg[:G]
	for g := range dg {
		dg[g] = math.Inf(-1)
	}
	for j, x := range delta[:J] {
		if g := r.nestOf[j]; x > dg[g] {
			dg[g] = x
		}
	}
	e := r.e[:J]
	for j, x := range delta[:J] {
		g := r.nestOf[j]
		e[j] = exp((x - dg[g]) * r.scale[g])
	}
	D, E := r.dsum[:G*I], r.exps[:J*I]
	clear(D)
	for j, ej := range e {
		g := r.nestOf[j]
		axpy(ej, E[j*I:(j+1)*I], D[g*I:(g+1)*I])
	}
	big, den := r.big[:I], r.den[:I]
	clear(big)
	for g := 0; g < G; g++ {
		a, base := 1-r.rho[g], dg[g]
		Dg := D[g*I : (g+1)*I]
		Lg, qg, bg := r.lsum[g*I:(g+1)*I], r.q[g*I:(g+1)*I], r.bmax[g*I:(g+1)*I]
		Lg, qg, bg, big := Lg[:len(Dg)], qg[:len(Dg)], bg[:len(Dg)], big[:len(Dg)]
		logVec(Lg, Dg)
		for i, l := range Lg {
			v := base + bg[i] + a*l
			qg[i] = v
			if v > big[i] {
				big[i] = v
			}
		}
	}
	q := r.q[:G*I]
	for i, m := range big {
		den[i] = -m
	}
	for g := 0; g < G; g++ {
		floats.Sub(q[g*I:(g+1)*I], big)
	}
	expShifted(den)
	expShifted(q)
	for g := 0; g < G; g++ {
		floats.Add(den, q[g*I:(g+1)*I])
	}
	wd := r.inv[:I]
	floats.DivTo(wd, r.weight[:I], den) // w_i/den_i
	c := r.c[:G*I]
	for g := 0; g < G; g++ {
		cg := c[g*I : (g+1)*I]
		floats.MulTo(cg, q[g*I:(g+1)*I], wd)
		floats.Div(cg, D[g*I:(g+1)*I])
	}
	ok := true
	for j := range e {
		g := r.nestOf[j]
		s := e[j] * dot(E[j*I:(j+1)*I], c[g*I:(g+1)*I])
		r.s[j] = s
		if !(s > 0) || math.IsInf(s, 0) {
			ok = false
		}
	}
	return ok
}

func (r *rcNested) Shares(delta, dst []float64) bool {
	ok := r.shares(delta)
	copy(dst, r.s[:r.j])
	return ok
}

// Damping writes 1 − ρ_g for each product of nest g.
func (r *rcNested) Damping(dst []float64) {
	for j := range dst[:r.j] {
		dst[j] = 1
		if r.ok {
			dst[j] = 1 - r.rho[r.nestOf[j]]
		}
	}
}

// Start writes the nested logit's exact inversion at σ = 0, δ_j = ln s_j −
// ln s_0 − ρ_g ln s_{j|g} (Berry 1994), for the current market.
func (r *rcNested) Start(logShare, delta []float64) {
	J, G := r.j, r.g
	logitStart(logShare[:J], delta[:J])
	sum := r.dg[:G] // scratch: the nests' observed shares
	clear(sum)
	for j, l := range logShare[:J] {
		sum[r.nestOf[j]] += math.Exp(l)
	}
	for j, l := range logShare[:J] {
		g := r.nestOf[j]
		rho := 0.0
		if r.ok {
			rho = r.rho[g]
		}
		delta[j] -= rho * (l - math.Log(sum[g]))
	}
}

// agentShares fills the nest shares s_ig (r.sg), the unweighted agent
// shares s_ij (r.sij), the weighted ones times factor_i (r.ws: w_i factor_i
// s_ij; factor nil means 1) and the within-nest shares s_ij|g (r.cond)
// after shares.
func (r *rcNested) agentShares(factor []float64) {
	J, I, G := r.j, r.i, r.g
	E, D, w := r.exps[:J*I], r.dsum, r.weight[:I]
	sg, invD := r.sg[:G*I], r.tg[:G*I]
	for g := 0; g < G; g++ {
		floats.DivTo(sg[g*I:(g+1)*I], r.q[g*I:(g+1)*I], r.den[:I])
		for i, d := range D[g*I : (g+1)*I] {
			invD[g*I+i] = 1 / d
		}
	}
	for j := 0; j < J; j++ {
		g := r.nestOf[j]
		ej := r.e[j]
		row := E[j*I : (j+1)*I]
		cond, sij, ws := r.cond[j*I:(j+1)*I], r.sij[j*I:(j+1)*I], r.ws[j*I:(j+1)*I]
		iD, qg := invD[g*I:(g+1)*I], sg[g*I:(g+1)*I]
		cond, sij, ws, iD, qg = cond[:len(row)], sij[:len(row)], ws[:len(row)], iD[:len(row)], qg[:len(row)]
		for i, x := range row {
			v := ej * x * iD[i]
			cond[i] = v
			sij[i] = v * qg[i]
			ws[i] = w[i] * sij[i]
		}
		if factor != nil {
			floats.Mul(ws, factor[:I])
		}
	}
}

// crossTerms writes into dst (J×J) −Σ_i ws_ij s_il − [same nest] ρ_g/(1−ρ_g)
// Σ_i ws_ij s_il|g and returns, in diag, Σ_i ws_ij/(1−ρ_g): the agent-level
// derivative ∂s_ij/∂δ_l = s_ij(1[j=l]/(1−ρ_g) − 1[l∈g] ρ_g/(1−ρ_g) s_il|g −
// s_il) summed with the weights in r.ws. The result is symmetric.
func (r *rcNested) crossTerms(dst, diag []float64) {
	J, I := r.j, r.i
	for j := 0; j < J; j++ {
		g := r.nestOf[j]
		wj := r.ws[j*I : (j+1)*I]
		for l := j; l < J; l++ {
			v := -dot(wj, r.sij[l*I:(l+1)*I])
			if r.nestOf[l] == g && r.rho[g] != 0 {
				v -= r.rho[g] * r.scale[g] * dot(wj, r.cond[l*I:(l+1)*I])
			}
			dst[j*J+l], dst[l*J+j] = v, v
		}
		sum := 0.0
		for _, x := range wj {
			sum += x
		}
		diag[j] = sum * r.scale[g]
	}
}

// Jacobians computes ∂s/∂δ and ∂s/∂θ2 (taste parameters, then ρ):
//
//	∂s_j/∂δ_l = Σ_i w_i s_ij (1[j=l]/(1−ρ_g) − 1[l∈g] ρ_g/(1−ρ_g) s_il|g − s_il),
//
// and see thetaJacobian and rhoJacobian.
func (r *rcNested) Jacobians(delta, dsdd, dsdt []float64) bool {
	ok := r.shares(delta)
	if !r.ok {
		return false
	}
	J := r.j
	r.agentShares(nil)
	diag := r.raw[:J]
	r.crossTerms(dsdd, diag)
	for j := 0; j < J; j++ {
		dsdd[j*J+j] += diag[j]
	}
	if dsdt != nil {
		P := r.p.NumParams()
		clear(dsdt[:J*P])
		r.thetaJacobian(dsdt, P)
		r.rhoJacobian(delta, dsdt, P)
	}
	return ok
}
