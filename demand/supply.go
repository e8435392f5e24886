package demand

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// The supply side: firms set prices in a static Bertrand–Nash equilibrium
// with constant marginal costs. With ∂s/∂p from the share model and the
// ownership matrix Ω (Ω_jl = 1 when j and l share an owner),
//
//	Δ_jl = −Ω_jl ∂s_l/∂p_j,   markup η = Δ⁻¹s,   cost c = p − η,
//
// and the first-order conditions read s − Δ(p − c) = 0.

// Markups solves Δη = s for the Bertrand–Nash markups η, given ∂s/∂p (J×J
// row-major, row j column l = ∂s_j/∂p_l), the shares and the owners (a firm
// index per product).
func Markups(dsdp, shares []float64, owner []int) ([]float64, error) {
	J := len(shares)
	delta := supplyMatrix(dsdp, owner)
	var eta mat.VecDense
	if err := eta.SolveVec(delta, mat.NewVecDense(J, append([]float64(nil), shares...))); err != nil {
		return nil, fmt.Errorf("the markup equations are singular: %v", err)
	}
	return eta.RawVector().Data, nil
}

// FOC writes the first-order conditions r_j = s_j + Σ_l Ω_jl ∂s_l/∂p_j
// (p_l − c_l) into dst.
func FOC(dst, dsdp, shares, p, c []float64, owner []int) {
	J := len(shares)
	for j := 0; j < J; j++ {
		r := shares[j]
		for l := 0; l < J; l++ {
			if owner[j] == owner[l] {
				r += dsdp[l*J+j] * (p[l] - c[l])
			}
		}
		dst[j] = r
	}
}

// Firms numbers the owners of each market from 0 (the firm column of the
// products table as indices, market by market).
func (m *Model) Firms() ([]int, error) {
	p := m.Products
	if p.Firm == nil {
		return nil, fmt.Errorf("%s: the products table has no firm column %q: ownership is needed for the supply side", p.File, p.Cols.Firm)
	}
	return indexOf(p.Firm), nil
}

// Costs returns the marginal costs c = p − η recovered from the
// Bertrand–Nash first-order conditions of every market at the estimates,
// under the firm column's ownership, and the markups η.
func (f *Fitted) Costs() (cost, markup []float64, err error) {
	owner, err := f.Model.Firms()
	if err != nil {
		return nil, nil, err
	}
	n := f.Model.N()
	cost, markup = make([]float64, n), make([]float64, n)
	errs := make([]error, len(f.Model.Products.Markets))
	f.pool.Run(len(errs), func(mk *Market, t int) {
		span := f.Model.Products.Markets[t]
		mk.Bind(t)
		eta, err := mk.Markups(owner[span.Start:span.End])
		if err != nil {
			errs[t] = fmt.Errorf("market %q: %v", span.ID, err)
			return
		}
		for j, e := range eta {
			markup[span.Start+j] = e
			cost[span.Start+j] = f.Model.Products.Price[span.Start+j] - e
		}
	})
	for _, err := range errs {
		if err != nil {
			return nil, nil, err
		}
	}
	return cost, markup, nil
}
