package instruments

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// Optimal returns the approximate optimal instruments of Chamberlain (1987)
// as used by Reynaert & Verboven (2014):
//
//	Z* = [exogenous columns exo, p̂, ∂δ/∂θ2 at p̂],
//
// where p̂ is the fitted value of the least-squares regression of price on
// all of Z, and jacobian(p̂) returns the N×P matrix ∂δ/∂θ2 (row-major, P =
// len(paramNames)) that the caller's share model gives at δ̂ = X1(p̂)β with
// ξ = 0 and prices p̂. jacobian is not called when P = 0. The names are
// exoNames, then "opt_"+priceName, then "opt_"+paramNames[q]; the columns
// are fresh slices.
func Optimal(Z *mat.Dense, price []float64, priceName string, exo [][]float64, exoNames []string, paramNames []string, jacobian func(phat []float64) ([]float64, error)) (names []string, cols [][]float64, err error) {
	n, _ := Z.Dims()
	if len(price) != n {
		return nil, nil, fmt.Errorf("optimal instruments: %d prices for %d rows of Z", len(price), n)
	}
	if len(exo) != len(exoNames) {
		return nil, nil, fmt.Errorf("optimal instruments: %d names for %d exogenous columns", len(exoNames), len(exo))
	}
	for k, x := range exo {
		if len(x) != n {
			return nil, nil, fmt.Errorf("optimal instruments: exogenous column %q has %d rows, Z %d", exoNames[k], len(x), n)
		}
		names = append(names, exoNames[k])
		cols = append(cols, append([]float64(nil), x...))
	}
	_, b, err := OLS(Z, mat.NewVecDense(n, append([]float64(nil), price...)))
	if err != nil {
		return nil, nil, fmt.Errorf("optimal instruments: regression of %s on the instruments: %w", priceName, err)
	}
	phat := make([]float64, n)
	mat.NewVecDense(n, phat).MulVec(Z, b)
	names = append(names, "opt_"+priceName)
	cols = append(cols, append([]float64(nil), phat...))
	P := len(paramNames)
	if P == 0 {
		return names, cols, nil
	}
	jac, err := jacobian(phat)
	if err != nil {
		return nil, nil, fmt.Errorf("optimal instruments: ∂δ/∂θ2 at the predicted prices: %w", err)
	}
	if len(jac) != n*P {
		return nil, nil, fmt.Errorf("optimal instruments: ∂δ/∂θ2 has %d entries, want %d×%d", len(jac), n, P)
	}
	for q, par := range paramNames {
		col := make([]float64, n)
		for i := range col {
			col[i] = jac[i*P+q]
		}
		names = append(names, "opt_"+par)
		cols = append(cols, col)
	}
	return names, cols, nil
}
