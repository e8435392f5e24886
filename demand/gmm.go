package demand

import (
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"

	"rcdemand/instruments"
)

// IV is the linear part of the GMM problem with moments z_n ξ_n, ξ = δ − X1β.
// For a given δ it concentrates β out:
//
//	β̂ = (X1'Z W Z'X1)⁻¹ X1'Z W Z'δ,  ξ = δ − X1β̂,  ḡ = Z'ξ/N,  Q = N ḡ'Wḡ.
//
// The same engine serves the plain logit (δ fixed) and the random-coefficients
// estimator (δ = δ(θ2) from the share inversion).
type IV struct {
	X, Z   *mat.Dense
	XNames []string
	ZNames []string
	N      int

	zx   *mat.Dense    // Z'X1 (M×K)
	w    *mat.SymDense // current weighting matrix
	proj *mat.Dense    // (X'ZWZ'X)⁻¹X'ZW (K×M)
}

// NewIV checks that Z has full column rank and Z'X1 has rank K, naming the
// offending columns otherwise.
func NewIV(X, Z *mat.Dense, xNames, zNames []string) (*IV, error) {
	n, k := X.Dims()
	nz, m := Z.Dims()
	if nz != n {
		return nil, fmt.Errorf("demand: X has %d rows, Z %d", n, nz)
	}
	if m < k {
		return nil, fmt.Errorf("%d instruments (%s) for %d linear parameters (%s): add excluded instruments",
			m, strings.Join(zNames, ", "), k, strings.Join(xNames, ", "))
	}
	if bad := instruments.Collinear(Z, zNames); bad != "" {
		return nil, fmt.Errorf("the instrument matrix Z is rank deficient: %s", bad)
	}
	e := &IV{X: X, Z: Z, XNames: xNames, ZNames: zNames, N: n}
	e.zx = mat.NewDense(m, k, nil)
	e.zx.Mul(Z.T(), X)
	if bad := instruments.Collinear(e.zx, xNames); bad != "" {
		return nil, fmt.Errorf("Z'X1 is rank deficient, so the linear parameters are not identified by these instruments: %s", bad)
	}
	return e, nil
}

// M returns the number of moments.
func (e *IV) M() int { _, m := e.Z.Dims(); return m }

// K returns the number of linear parameters.
func (e *IV) K() int { _, k := e.X.Dims(); return k }

// W returns the current weighting matrix.
func (e *IV) W() *mat.SymDense { return e.w }

// InitialWeight returns W1 = (Z'Z/N)⁻¹.
func (e *IV) InitialWeight() (*mat.SymDense, error) {
	m := e.M()
	zz := mat.NewSymDense(m, nil)
	zz.SymOuterK(1/float64(e.N), e.Z.T())
	return invertSym(zz, "Z'Z/N")
}

// SetWeight sets W and the projection (X'ZWZ'X)⁻¹X'ZW.
func (e *IV) SetWeight(W *mat.SymDense) error {
	k := e.K()
	m := e.M()
	var xzw mat.Dense // K×M
	xzw.Mul(e.zx.T(), W)
	a := mat.NewSymDense(k, nil)
	var tmp mat.Dense
	tmp.Mul(&xzw, e.zx)
	for i := 0; i < k; i++ {
		for j := i; j < k; j++ {
			a.SetSym(i, j, (tmp.At(i, j)+tmp.At(j, i))/2)
		}
	}
	ainv, err := invertSym(a, "X1'ZWZ'X1")
	if err != nil {
		return err
	}
	e.proj = mat.NewDense(k, m, nil)
	e.proj.Mul(ainv, &xzw)
	e.w = W
	return nil
}

// Fit is the concentrated linear part at one δ.
type Fit struct {
	Beta []float64
	Xi   []float64
	GBar []float64     // ḡ = Z'ξ/N
	Q    float64       // N ḡ'Wḡ
	W    *mat.SymDense // the weighting matrix it was computed under
}

// Solve concentrates β out at delta under the current weighting matrix.
func (e *IV) Solve(delta []float64) Fit {
	k, m := e.K(), e.M()
	n := e.N
	dv := mat.NewVecDense(n, delta)
	zd := mat.NewVecDense(m, nil)
	zd.MulVec(e.Z.T(), dv)
	b := mat.NewVecDense(k, nil)
	b.MulVec(e.proj, zd)
	xi := mat.NewVecDense(n, nil)
	xi.MulVec(e.X, b)
	xi.SubVec(dv, xi)
	g := mat.NewVecDense(m, nil)
	g.MulVec(e.Z.T(), xi)
	g.ScaleVec(1/float64(n), g)
	wg := mat.NewVecDense(m, nil)
	wg.MulVec(e.w, g)
	return Fit{
		Beta: b.RawVector().Data,
		Xi:   xi.RawVector().Data,
		GBar: g.RawVector().Data,
		Q:    float64(n) * mat.Dot(g, wg),
		W:    e.w,
	}
}

// Gradient returns dQ/dθ2 = 2N (Z'J/N)'Wḡ = 2 J'Z W ḡ for J = ∂δ/∂θ2 (N×P,
// row-major). By the first-order condition of β̂ the dependence of β̂ on θ2
// drops out.
func (e *IV) Gradient(jac []float64, p int, gbar []float64) []float64 {
	m := e.M()
	wg := mat.NewVecDense(m, nil)
	wg.MulVec(e.w, mat.NewVecDense(m, gbar))
	zwg := mat.NewVecDense(e.N, nil)
	zwg.MulVec(e.Z, wg)
	out := make([]float64, p)
	if p == 0 {
		return out
	}
	J := mat.NewDense(e.N, p, jac)
	g := mat.NewVecDense(p, out)
	g.MulVec(J.T(), zwg)
	g.ScaleVec(2, g)
	return out
}

// ConcentratedJacobian returns dḡ/dθ2 with β concentrated out, for J =
// ∂δ/∂θ2 (N×P, row-major): ḡ = Z'(δ − X1β̂)/N with β̂ = Pδ, P =
// (X1'ZWZ'X1)⁻¹X1'ZWZ', so dḡ/dθ2 = (Z'J − Z'X1·P·J)/N = (Z'J − Z'X1·proj·Z'J)/N.
// Its Gauss–Newton product 2N·G'WG approximates the Hessian of Q.
func (e *IV) ConcentratedJacobian(jac []float64, p int) *mat.Dense {
	m := e.M()
	var zj mat.Dense
	zj.Mul(e.Z.T(), mat.NewDense(e.N, p, jac)) // M×P
	var pj mat.Dense
	pj.Mul(e.proj, &zj) // K×P
	var xpj mat.Dense
	xpj.Mul(e.zx, &pj) // M×P
	G := mat.NewDense(m, p, nil)
	G.Sub(&zj, &xpj)
	G.Scale(1/float64(e.N), G)
	return G
}

// Covariance kinds.
const (
	Robust     = "robust"
	Unadjusted = "unadjusted"
)

// MomentCovariance returns S, the covariance of the moments at residuals xi:
// robust S = (1/N)Σ ξ_n² z_n z_n' (uncentered); unadjusted S = σ̂² Z'Z/N with
// σ̂² = ξ'ξ/N; clustered S = (1/N)Σ_c (Σ_{n∈c} z_n ξ_n)(Σ_{n∈c} z_n ξ_n)'
// when clusters (a cluster index per row) is not nil.
func (e *IV) MomentCovariance(xi []float64, kind string, clusters []int) *mat.SymDense {
	m := e.M()
	n := e.N
	S := mat.NewSymDense(m, nil)
	switch {
	case clusters != nil:
		nc := 0
		for _, c := range clusters {
			nc = max(nc, c+1)
		}
		sums := mat.NewDense(nc, m, nil)
		for r := 0; r < n; r++ {
			row := sums.RawRowView(clusters[r])
			for j := 0; j < m; j++ {
				row[j] += e.Z.At(r, j) * xi[r]
			}
		}
		S.SymOuterK(1/float64(n), sums.T())
	case kind == Unadjusted:
		s2 := 0.0
		for _, x := range xi {
			s2 += x * x
		}
		s2 /= float64(n)
		S.SymOuterK(s2/float64(n), e.Z.T())
	default:
		zx := mat.NewDense(n, m, nil)
		for r := 0; r < n; r++ {
			for j := 0; j < m; j++ {
				zx.Set(r, j, e.Z.At(r, j)*xi[r])
			}
		}
		S.SymOuterK(1/float64(n), zx.T())
	}
	return S
}

// Jacobian returns G = Z'[−X1, J]/N (M×(K+P)).
func (e *IV) Jacobian(jac []float64, p int) *mat.Dense {
	k, m := e.K(), e.M()
	G := mat.NewDense(m, k+p, nil)
	var zx mat.Dense
	zx.Scale(-1/float64(e.N), e.zx)
	G.Slice(0, m, 0, k).(*mat.Dense).Copy(&zx)
	if p > 0 {
		var zj mat.Dense
		zj.Mul(e.Z.T(), mat.NewDense(e.N, p, jac))
		zj.Scale(1/float64(e.N), &zj)
		G.Slice(0, m, k, k+p).(*mat.Dense).Copy(&zj)
	}
	return G
}

// Sandwich returns V = (G'WG)⁻¹ G'WSWG (G'WG)⁻¹ / N.
func Sandwich(G *mat.Dense, W, S *mat.SymDense, n int) (*mat.SymDense, error) {
	var wg mat.Dense
	wg.Mul(W, G)
	var gwg mat.Dense
	gwg.Mul(G.T(), &wg)
	bread := symOf(&gwg)
	binv, err := invertSym(bread, "G'WG")
	if err != nil {
		return nil, err
	}
	var swg mat.Dense
	swg.Mul(S, &wg)
	var meat mat.Dense
	meat.Mul(wg.T(), &swg)
	var v mat.Dense
	v.Mul(binv, &meat)
	v.Mul(&v, binv)
	v.Scale(1/float64(n), &v)
	return symOf(&v), nil
}

func symOf(a *mat.Dense) *mat.SymDense {
	n, _ := a.Dims()
	s := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			s.SetSym(i, j, (a.At(i, j)+a.At(j, i))/2)
		}
	}
	return s
}

// invertSym inverts a symmetric positive definite matrix by Cholesky, with an
// error naming it when it is not.
func invertSym(a *mat.SymDense, name string) (*mat.SymDense, error) {
	var ch mat.Cholesky
	if !ch.Factorize(a) {
		return nil, fmt.Errorf("%s is not positive definite (singular or nearly so)", name)
	}
	inv := mat.NewSymDense(a.SymmetricDim(), nil)
	if err := ch.InverseTo(inv); err != nil {
		return nil, fmt.Errorf("%s cannot be inverted: %v", name, err)
	}
	return inv, nil
}

// chiSquareSurvival returns P(χ²(df) > x), or NaN when df < 1.
func chiSquareSurvival(x float64, df int) float64 {
	if df < 1 {
		return math.NaN()
	}
	return distuv.ChiSquared{K: float64(df)}.Survival(x)
}
