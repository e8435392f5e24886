package merger

import (
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"

	"rcdemand/demand"
)

// Solution is a counterfactual equilibrium of one market.
type Solution struct {
	Price      []float64
	Shares     []float64
	Iterations int
	Residual   float64 // largest first-order-condition residual
	Converged  bool
	Method     string
}

// Equilibrium finds the Bertrand–Nash prices p = c + Δ(p)⁻¹s(p) of the
// market mk is bound to, under ownership owner (a firm index per product)
// and costs c, from start, to max|Δp| < tol. mk is left at the solution.
func Equilibrium(mk *demand.Market, c []float64, owner []int, start []float64, tol float64) Solution {
	p := slices.Clone(start)
	sol := zeta(mk, c, owner, p, tol)
	if !sol.Converged {
		copy(p, start)
		sol = newton(mk, c, owner, p, tol)
	}
	mk.SetPrices(p)
	sol.Price = p
	sol.Shares = slices.Clone(mk.Shares())
	sol.Residual = mk.FOCResidual(p, c, owner)
	return sol
}

// zeta iterates the ζ fixed point of Morrow & Skerlos (2011): with ∂s/∂p =
// diag(Λ) − Γ, ζ(p) = Λ⁻¹(Ω∘Γ)(p − c) − Λ⁻¹s and p ← c + ζ(p), at most 5000
// times. p is updated in place.
func zeta(mk *demand.Market, c []float64, owner []int, p []float64, tol float64) Solution {
	J := len(p)
	pn := make([]float64, J)
	sol := Solution{Method: "zeta"}
	for it := 1; it <= 5000; it++ {
		if !mk.SetPrices(p) {
			break
		}
		D, lam, s := mk.PriceJacobian(), mk.Lambda(), mk.Shares()
		diff := 0.0
		for j := 0; j < J; j++ {
			acc := 0.0
			for l := 0; l < J; l++ {
				if owner[j] == owner[l] {
					gam := -D[j*J+l]
					if j == l {
						gam += lam[j]
					}
					acc += gam * (p[l] - c[l])
				}
			}
			pn[j] = c[j] + (acc-s[j])/lam[j]
			diff = math.Max(diff, math.Abs(pn[j]-p[j]))
		}
		copy(p, pn)
		sol.Iterations = it
		if math.IsNaN(diff) {
			break
		}
		if diff < tol {
			sol.Converged = true
			break
		}
	}
	return sol
}

// newton solves the first-order conditions by damped Newton steps with a
// forward-difference Jacobian, from p (updated in place).
func newton(mk *demand.Market, c []float64, owner []int, p []float64, tol float64) Solution {
	J := len(p)
	sol := Solution{Method: "newton"}
	foc := func(p []float64) []float64 {
		mk.SetPrices(p)
		r := make([]float64, J)
		demand.FOC(r, mk.PriceJacobian(), mk.Shares(), p, c, owner)
		return r
	}
	norm := func(r []float64) float64 {
		n := 0.0
		for _, x := range r {
			n = math.Max(n, math.Abs(x))
		}
		return n
	}
	r := foc(p)
	for it := 1; it <= 100; it++ {
		sol.Iterations = it
		jac := mat.NewDense(J, J, nil)
		for l := 0; l < J; l++ {
			h := 1e-7 * math.Max(1, math.Abs(p[l]))
			q := slices.Clone(p)
			q[l] += h
			rq := foc(q)
			for j := 0; j < J; j++ {
				jac.Set(j, l, (rq[j]-r[j])/h)
			}
		}
		var step mat.VecDense
		if err := step.SolveVec(jac, mat.NewVecDense(J, r)); err != nil {
			return sol
		}
		improved := false
		for lam := 1.0; lam > 1e-4; lam /= 2 {
			q := make([]float64, J)
			for j := range q {
				q[j] = p[j] - lam*step.AtVec(j)
			}
			rq := foc(q)
			if norm(rq) < norm(r) {
				maxStep := lam * norm(step.RawVector().Data)
				copy(p, q)
				r = rq
				improved = true
				if maxStep < tol {
					sol.Converged = true
					return sol
				}
				break
			}
		}
		if !improved {
			sol.Converged = norm(r) < 1e-10
			return sol
		}
	}
	return sol
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
