package instruments

import (
	"errors"
	"math"
	"math/rand/v2"
	"slices"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// TestOptimal checks the layout of the optimal instruments, p̂ against the
// normal equations Z'Z b = Z'p solved directly (Cholesky), and that the
// jacobian receives p̂ and its columns come out in order.
func TestOptimal(t *testing.T) {
	const n, m = 30, 4
	rng := rand.New(rand.NewPCG(3, 4))
	Z := mat.NewDense(n, m, nil)
	x := make([]float64, n)
	price := make([]float64, n)
	for i := 0; i < n; i++ {
		x[i] = rng.NormFloat64()
		Z.Set(i, 0, 1)
		Z.Set(i, 1, x[i])
		Z.Set(i, 2, rng.NormFloat64())
		Z.Set(i, 3, rng.NormFloat64())
		price[i] = 2 + 0.5*Z.At(i, 2) - 0.3*Z.At(i, 3) + 0.1*rng.NormFloat64()
	}
	one := slices.Repeat([]float64{1}, n)
	// Normal equations.
	var ztz mat.SymDense
	ztz.SymOuterK(1, Z.T())
	var ch mat.Cholesky
	if !ch.Factorize(&ztz) {
		t.Fatal("Z'Z")
	}
	var ztp, b, want mat.VecDense
	ztp.MulVec(Z.T(), mat.NewVecDense(n, price))
	if err := ch.SolveVecTo(&b, &ztp); err != nil {
		t.Fatal(err)
	}
	want.MulVec(Z, &b)
	params := []string{"sigma_1", "sigma_price"}
	var seen []float64
	jac := func(phat []float64) ([]float64, error) {
		seen = slices.Clone(phat)
		out := make([]float64, n*len(params))
		for i := range phat {
			out[i*2] = float64(i)
			out[i*2+1] = -phat[i]
		}
		return out, nil
	}
	priceCopy := slices.Clone(price)
	names, cols, err := Optimal(Z, price, "price", [][]float64{one, x}, []string{"1", "x"}, params, jac)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(names, []string{"1", "x", "opt_price", "opt_sigma_1", "opt_sigma_price"}) || len(cols) != 5 {
		t.Fatalf("names %v, %d columns", names, len(cols))
	}
	if !slices.Equal(cols[0], one) || !slices.Equal(cols[1], x) || !slices.Equal(price, priceCopy) {
		t.Error("exogenous columns or prices changed")
	}
	worst := 0.0
	for i := 0; i < n; i++ {
		worst = math.Max(worst, math.Abs(cols[2][i]-want.AtVec(i))/math.Abs(want.AtVec(i)))
		if seen[i] != cols[2][i] || cols[3][i] != float64(i) || cols[4][i] != -cols[2][i] {
			t.Fatalf("row %d: p̂ %v, jacobian saw %v, columns %v %v", i, cols[2][i], seen[i], cols[3][i], cols[4][i])
		}
	}
	// QR and the normal equations differ by rounding; measured 2e-16. The
	// normal equations square the condition number of Z, hence 1e-14.
	t.Logf("p̂ against the normal equations: largest relative difference %.2g", worst)
	if worst > 1e-14 {
		t.Errorf("p̂ differs from the normal-equations fit by %.3g", worst)
	}
}

// TestOptimalErrors: an error from the jacobian is returned wrapped, a
// jacobian of the wrong size is refused, and no parameters means no call.
func TestOptimalErrors(t *testing.T) {
	Z := mat.NewDense(4, 2, []float64{1, 0, 1, 1, 1, 2, 1, 4})
	price := []float64{1, 2, 2, 3}
	exo := [][]float64{{1, 1, 1, 1}}
	boom := errors.New("∂s/∂δ is singular in market 3")
	_, _, err := Optimal(Z, price, "p", exo, []string{"1"}, []string{"s"}, func([]float64) ([]float64, error) { return nil, boom })
	if !errors.Is(err, boom) {
		t.Errorf("got %v, want it to wrap %v", err, boom)
	}
	_, _, err = Optimal(Z, price, "p", exo, []string{"1"}, []string{"s"}, func([]float64) ([]float64, error) { return make([]float64, 3), nil })
	if err == nil {
		t.Error("accepted a jacobian with 3 entries for 4 rows")
	}
	names, _, err := Optimal(Z, price, "p", exo, []string{"1"}, nil, func([]float64) ([]float64, error) {
		t.Error("jacobian called with no parameters")
		return nil, nil
	})
	if err != nil || !slices.Equal(names, []string{"1", "opt_p"}) {
		t.Errorf("names %v, error %v", names, err)
	}
	// A singular Z: the regression of price fails.
	_, _, err = Optimal(mat.NewDense(4, 2, []float64{1, 2, 1, 2, 1, 2, 1, 2}), price, "p", exo, []string{"1"}, nil, nil)
	if err == nil {
		t.Error("accepted a singular Z")
	}
}
