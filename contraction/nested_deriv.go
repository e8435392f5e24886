package contraction

import (
	"math"

	"gonum.org/v1/gonum/floats"
)

// thetaJacobian writes ∂s/∂θ_p for the taste parameters into dst (J×P,
// row-major) from the agent shares of Jacobians. For product j of nest g,
// with ∂μ_ij/∂θ_p = x_jk v_ip (times a_ik on a log-normal column),
// x̄_ik = Σ_m s_im x_mk and x̄_gik = Σ_{m∈g} s_im|g x_mk:
//
//	∂s_j/∂θ_p = Σ_i w_i s_ij v_ip (x_jk/(1−ρ_g) − ρ_g/(1−ρ_g) x̄_gik − x̄_ik).
func (r *rcNested) thetaJacobian(dst []float64, P int) {
	if len(r.cols) == 0 {
		return
	}
	J, I, G, k2 := r.j, r.i, r.g, r.k2
	V, T, xbar, xg := r.vm[:I], r.tm[:I], r.xbar[:I], r.tg[:G*I]
	for p, k := range r.cols {
		clear(xbar)
		clear(xg)
		for m := 0; m < J; m++ {
			if x := r.x2[m*k2+k]; x != 0 {
				g := r.nestOf[m]
				axpy(x, r.sij[m*I:(m+1)*I], xbar)
				axpy(x, r.cond[m*I:(m+1)*I], xg[g*I:(g+1)*I])
			}
		}
		copy(V, r.vars[p][:I])
		if r.lnPar[p] {
			for i, a := range r.tasteT[k*I : (k+1)*I] {
				V[i] *= a
			}
		}
		for i, v := range V {
			T[i] = v * xbar[i]
		}
		for g := 0; g < G; g++ {
			for i, v := range V {
				xg[g*I+i] *= v
			}
		}
		for j := 0; j < J; j++ {
			g := r.nestOf[j]
			wj := r.ws[j*I : (j+1)*I]
			v := r.x2[j*k2+k]*r.scale[g]*dot(wj, V) - dot(wj, T)
			if r.rho[g] != 0 {
				v -= r.rho[g] * r.scale[g] * dot(wj, xg[g*I:(g+1)*I])
			}
			dst[j*P+p] = v
		}
	}
}

// rhoJacobian adds ∂s/∂ρ into the nesting columns of dst (J×P, after the
// taste parameters; one column, or one per nest in the family's order).
// With the within-nest entropy H_hi = −Σ_{l∈h} s_il|h ln s_il|h,
//
//	∂s_j/∂ρ_h = Σ_i w_i s_ij (1[j∈h] (ln s_ij|h + ρ_h H_hi)/(1−ρ_h) + s_ih H_hi),
//
// where ln s_ij|h = ln E_ji + (δ_j − d_h)/(1−ρ_h) − ln D̃_hi needs no
// logarithm per agent and product.
func (r *rcNested) rhoJacobian(delta, dst []float64, P int) {
	J, I, G := r.j, r.i, r.g
	P0 := len(r.cols)
	H, L, lc := r.ent[:G*I], r.lsum[:G*I], r.sw[:J*I]
	clear(H)
	for j := 0; j < J; j++ {
		g := r.nestOf[j]
		off := (delta[j] - r.dg[g]) * r.scale[g]
		lrow, crow, lg := r.logE[j*I:(j+1)*I], r.cond[j*I:(j+1)*I], L[g*I:(g+1)*I]
		out, hg := lc[j*I:(j+1)*I], H[g*I:(g+1)*I]
		for i, x := range lrow {
			l := x + off - lg[i]
			out[i] = l
			hg[i] -= crow[i] * l
		}
	}
	col := func(h int) int {
		if r.fam.ByNest {
			return P0 + r.global[h]
		}
		return P0
	}
	for j := 0; j < J; j++ {
		g := r.nestOf[j]
		wj := r.ws[j*I : (j+1)*I]
		a := dot(wj, lc[j*I:(j+1)*I]) + r.rho[g]*dot(wj, H[g*I:(g+1)*I])
		dst[j*P+col(g)] += a * r.scale[g]
	}
	floats.Mul(H, r.sg[:G*I])
	for j := 0; j < J; j++ {
		wj := r.ws[j*I : (j+1)*I]
		for h := 0; h < G; h++ {
			dst[j*P+col(h)] += dot(wj, H[h*I:(h+1)*I])
		}
	}
}

// PriceJacobian computes ∂s_j/∂p_l = Σ_i w_i α_i ∂s_ij/∂δ_l (the agent-level
// derivative of Jacobians) with Λ_j = Σ_i w_i α_i s_ij/(1−ρ_g), so that
// ∂s/∂p = diag(Λ) − Γ with Γ symmetric: the split of the ζ fixed point.
func (r *rcNested) PriceJacobian(delta, alpha, dsdp, lambda []float64) {
	J := r.j
	r.shares(delta)
	if !r.ok {
		for k := range dsdp[:J*J] {
			dsdp[k] = math.NaN()
		}
		return
	}
	r.agentShares(alpha)
	r.crossTerms(dsdp, lambda)
	for j := 0; j < J; j++ {
		dsdp[j*J+j] += lambda[j]
	}
}

// LogInclusive writes ln(1 + Σ_g D_ig^(1−ρ_g)) per agent: ln(den_i) + M_i.
func (r *rcNested) LogInclusive(delta, dst []float64) {
	r.shares(delta)
	for i := range dst[:r.i] {
		if !r.ok {
			dst[i] = math.NaN()
			continue
		}
		dst[i] = math.Log(r.den[i]) + r.big[i]
	}
}
