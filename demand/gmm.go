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
// estimator (δ = δ(θ2) from the share inversion). With a supply side it is
// stacked: two equations of N rows each (demand, then cost), X and Z block
// diagonal, so the moments of observation n are g_n = [ξ_n z_d,n ; ω_n
// z_s,n] and ḡ = Σ_n g_n / N.
type IV struct {
	X, Z      *mat.Dense
	XNames    []string
	ZNames    []string
	N         int // observations (rows = Equations·N)
	Equations int // 1, or 2 with a supply side

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
	e := &IV{X: X, Z: Z, XNames: xNames, ZNames: zNames, N: n, Equations: 1}
	e.zx = mat.NewDense(m, k, nil)
	e.zx.Mul(Z.T(), X)
	if bad := instruments.Collinear(e.zx, xNames); bad != "" {
		return nil, fmt.Errorf("Z'X1 is rank deficient, so the linear parameters are not identified by these instruments: %s", bad)
	}
	return e, nil
}

// NewStackedIV returns the stacked engine of demand (Xd, Zd) and supply
// (Xs, Zs), each with N rows: X = blockdiag(Xd, Xs), Z = blockdiag(Zd, Zs).
func NewStackedIV(Xd, Zd, Xs, Zs *mat.Dense, xNames, zNames []string) (*IV, error) {
	n, md := Zd.Dims()
	kd := 0
	if Xd != nil {
		_, kd = Xd.Dims()
	}
	_, ks := Xs.Dims()
	_, ms := Zs.Dims()
	X := mat.NewDense(2*n, kd+ks, nil)
	if kd > 0 {
		X.Slice(0, n, 0, kd).(*mat.Dense).Copy(Xd)
	}
	X.Slice(n, 2*n, kd, kd+ks).(*mat.Dense).Copy(Xs)
	Z := mat.NewDense(2*n, md+ms, nil)
	Z.Slice(0, n, 0, md).(*mat.Dense).Copy(Zd)
	Z.Slice(n, 2*n, md, md+ms).(*mat.Dense).Copy(Zs)
	e, err := NewIV(X, Z, xNames, zNames)
	if err != nil {
		return nil, err
	}
	e.N, e.Equations = n, 2
	return e, nil
}

// rows returns the number of rows of X and Z: Equations·N.
func (e *IV) rows() int { return e.N * e.Equations }

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
	dv := mat.NewVecDense(e.rows(), delta)
	zd := mat.NewVecDense(m, nil)
	zd.MulVec(e.Z.T(), dv)
	b := mat.NewVecDense(k, nil)
	b.MulVec(e.proj, zd)
	xi := mat.NewVecDense(e.rows(), nil)
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
	zwg := mat.NewVecDense(e.rows(), nil)
	zwg.MulVec(e.Z, wg)
	out := make([]float64, p)
	if p == 0 {
		return out
	}
	J := mat.NewDense(e.rows(), p, jac)
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
	zj.Mul(e.Z.T(), mat.NewDense(e.rows(), p, jac)) // M×P
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

// MomentCovariance returns S, the covariance of the moments at residuals xi
// (one per row): robust S = (1/N)Σ_n g_n g_n' (uncentered) with g_n the
// moments of observation n (summed over the equations); clustered S =
// (1/N)Σ_c (Σ_{n∈c} g_n)(Σ_{n∈c} g_n)' when clusters (a cluster index per
// observation) is not nil; unadjusted S = (1/N)Σ_n Σ_ef σ_ef z_en z_fn' with
// σ_ef = (1/N)Σ_n ξ_en ξ_fn the residual covariance of the equations (σ̂²
// Z'Z/N for one equation).
func (e *IV) MomentCovariance(xi []float64, kind string, clusters []int) *mat.SymDense {
	m := e.M()
	n := e.N
	S := mat.NewSymDense(m, nil)
	if kind == Unadjusted && clusters == nil {
		return e.unadjusted(xi)
	}
	// U_n = g_n, the moments of observation n.
	U := mat.NewDense(n, m, nil)
	for r := 0; r < n*e.Equations; r++ {
		row := U.RawRowView(r % n)
		zr := e.Z.RawRowView(r)
		for j, z := range zr {
			if z != 0 {
				row[j] += z * xi[r]
			}
		}
	}
	if clusters != nil {
		nc := 0
		for _, c := range clusters {
			nc = max(nc, c+1)
		}
		sums := mat.NewDense(nc, m, nil)
		for o := 0; o < n; o++ {
			row := sums.RawRowView(clusters[o])
			for j, v := range U.RawRowView(o) {
				row[j] += v
			}
		}
		U = sums
	}
	S.SymOuterK(1/float64(n), U.T())
	return S
}

// unadjusted returns the homoskedastic S of MomentCovariance.
func (e *IV) unadjusted(xi []float64) *mat.SymDense {
	m, n, q := e.M(), e.N, e.Equations
	sig := make([]float64, q*q)
	for a := 0; a < q; a++ {
		for b := 0; b < q; b++ {
			for o := 0; o < n; o++ {
				sig[a*q+b] += xi[a*n+o] * xi[b*n+o] / float64(n)
			}
		}
	}
	S := mat.NewSymDense(m, nil)
	for a := 0; a < q; a++ {
		for b := 0; b < q; b++ {
			var zz mat.Dense
			zz.Mul(e.Z.Slice(a*n, (a+1)*n, 0, m).T(), e.Z.Slice(b*n, (b+1)*n, 0, m))
			for i := 0; i < m; i++ {
				for j := i; j < m; j++ {
					S.SetSym(i, j, S.At(i, j)+sig[a*q+b]*zz.At(i, j)/float64(n))
				}
			}
		}
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
		zj.Mul(e.Z.T(), mat.NewDense(e.rows(), p, jac))
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
