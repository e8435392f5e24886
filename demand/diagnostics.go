package demand

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// Diagnostics are the identification and specification checks of an
// estimate, each with a verdict in words.
type Diagnostics struct {
	RankZ      int         `json:"rank_z"`
	RankZX1    int         `json:"rank_zx1"`
	FirstStage *FirstStage `json:"first_stage,omitempty"`
	Weighting  Weighting   `json:"weighting"`
	Jacobian   JacobianSV  `json:"moment_jacobian"`
	Overid     string      `json:"overidentification"`
	Warnings   []string    `json:"warnings,omitempty"`
}

// FirstStage is the regression of price on the instruments.
type FirstStage struct {
	Endogenous  string   `json:"endogenous"`
	Excluded    []string `json:"excluded"`
	F           float64  `json:"f"`
	DF1         int      `json:"df1"`
	DF2         int      `json:"df2"`
	PartialR2   float64  `json:"partial_r2"`
	RobustF     float64  `json:"robust_f"`
	StockYogo10 float64  `json:"stock_yogo_10pct_size"`
	Verdict     string   `json:"verdict"`
}

// Weighting describes the final weighting matrix.
type Weighting struct {
	PositiveDefinite bool    `json:"positive_definite"`
	Condition        float64 `json:"condition_number"`
}

// JacobianSV holds the singular values of G = ∂ḡ/∂θ at the estimate.
type JacobianSV struct {
	SingularValues []float64 `json:"singular_values"`
	Ratio          float64   `json:"smallest_over_largest"`
	Verdict        string    `json:"verdict"`
}

// stockYogo10 holds the Stock & Yogo (2005, table 5.2) critical values of the
// first-stage F for 10% maximal size of a nominal 5% 2SLS Wald test, one
// endogenous regressor, by number of excluded instruments. The values are
// from memory of that table and should be checked against it before being
// cited.
var stockYogo10 = map[int]float64{1: 16.38, 2: 19.93, 3: 22.30, 4: 24.58, 5: 26.87,
	6: 29.18, 7: 31.50, 8: 33.84, 9: 36.19, 10: 38.54}

// FirstStageOf regresses endogenous on all of Z and on the exogenous
// columns alone (the first exo columns of Z) and returns the homoskedastic F of
// the excluded instruments, its partial R², and a heteroskedasticity-robust
// (HC0) Wald F.
func FirstStageOf(y []float64, Z *mat.Dense, exo int, zNames []string, name string) (*FirstStage, error) {
	n, m := Z.Dims()
	q := m - exo
	if q < 1 {
		return nil, fmt.Errorf("no excluded instruments")
	}
	yv := mat.NewVecDense(n, y)
	rssU, bU, err := ols(Z, yv)
	if err != nil {
		return nil, err
	}
	var rssR float64
	if exo > 0 {
		rssR, _, err = ols(Z.Slice(0, n, 0, exo).(*mat.Dense), yv)
		if err != nil {
			return nil, err
		}
	} else {
		for _, v := range y {
			rssR += v * v
		}
	}
	fs := &FirstStage{Endogenous: name, Excluded: zNames[exo:], DF1: q, DF2: n - m}
	fs.F = ((rssR - rssU) / float64(q)) / (rssU / float64(n-m))
	fs.PartialR2 = (rssR - rssU) / rssR
	// HC0 covariance of the unrestricted coefficients.
	var ztz mat.SymDense
	ztz.SymOuterK(1, Z.T())
	var ch mat.Cholesky
	if !ch.Factorize(&ztz) {
		return nil, fmt.Errorf("Z'Z is singular")
	}
	var inv mat.SymDense
	ch.InverseTo(&inv)
	var e mat.VecDense
	e.MulVec(Z, bU)
	e.SubVec(yv, &e)
	ze := mat.NewDense(n, m, nil)
	for i := 0; i < n; i++ {
		for j := 0; j < m; j++ {
			ze.Set(i, j, Z.At(i, j)*e.AtVec(i))
		}
	}
	var meat mat.SymDense
	meat.SymOuterK(1, ze.T())
	var v mat.Dense
	v.Mul(&inv, &meat)
	v.Mul(&v, &inv)
	vq := symOf(mat.DenseCopyOf(v.Slice(exo, m, exo, m)))
	bq := mat.NewVecDense(q, nil)
	for i := 0; i < q; i++ {
		bq.SetVec(i, bU.AtVec(exo+i))
	}
	var chq mat.Cholesky
	if chq.Factorize(vq) {
		var s mat.VecDense
		if err := chq.SolveVecTo(&s, bq); err == nil {
			fs.RobustF = mat.Dot(bq, &s) / float64(q)
		}
	}
	if cv, ok := stockYogo10[q]; ok {
		fs.StockYogo10 = cv
		if fs.F > cv {
			fs.Verdict = fmt.Sprintf("strong: F = %.1f exceeds the Stock–Yogo 10%% maximal-size critical value %.2f for %d instruments", fs.F, cv, q)
		} else {
			fs.Verdict = fmt.Sprintf("weak: F = %.1f is below the Stock–Yogo 10%% maximal-size critical value %.2f for %d instruments; 2SLS-type inference may be unreliable", fs.F, cv, q)
		}
	} else {
		if fs.F > 10 {
			fs.Verdict = fmt.Sprintf("F = %.1f exceeds the rule-of-thumb 10 (Staiger & Stock 1997); no Stock–Yogo value is tabulated here for %d instruments", fs.F, q)
		} else {
			fs.Verdict = fmt.Sprintf("weak: F = %.1f is below the rule-of-thumb 10 (Staiger & Stock 1997)", fs.F)
		}
	}
	return fs, nil
}

func ols(X *mat.Dense, y *mat.VecDense) (float64, *mat.VecDense, error) {
	_, k := X.Dims()
	var qr mat.QR
	qr.Factorize(X)
	b := mat.NewVecDense(k, nil)
	if err := qr.SolveVecTo(b, false, y); err != nil {
		return 0, nil, err
	}
	var e mat.VecDense
	e.MulVec(X, b)
	e.SubVec(y, &e)
	return mat.Dot(&e, &e), b, nil
}

// diagnose assembles the diagnostics of a finished estimate.
func diagnose(m *Model, iv *IV, G *mat.Dense, W *mat.SymDense, res *Results) *Diagnostics {
	d := &Diagnostics{RankZ: iv.M(), RankZX1: iv.K()}
	// First stage for price, when price is in X1.
	if m.PriceX1 >= 0 {
		exo := iv.K() - 1
		price := mat.Col(nil, m.PriceX1, m.X1)
		fs, err := FirstStageOf(price, m.Z, exo, m.ZNames, m.Spec.Columns.Price)
		if err == nil {
			d.FirstStage = fs
			if len(fs.Verdict) >= 4 && fs.Verdict[:4] == "weak" {
				d.Warnings = append(d.Warnings, "weak instruments for price: "+fs.Verdict)
			}
		}
	}
	var ch mat.Cholesky
	d.Weighting.PositiveDefinite = ch.Factorize(W)
	d.Weighting.Condition = mat.Cond(W, 2)
	if !d.Weighting.PositiveDefinite {
		d.Warnings = append(d.Warnings, "the weighting matrix is not positive definite")
	} else if d.Weighting.Condition > 1e12 {
		d.Warnings = append(d.Warnings, fmt.Sprintf("the weighting matrix is ill-conditioned (condition number %.2g): rescale instruments or drop near-collinear ones", d.Weighting.Condition))
	}
	var svd mat.SVD
	if svd.Factorize(G, mat.SVDNone) {
		sv := svd.Values(nil)
		d.Jacobian.SingularValues = sv
		d.Jacobian.Ratio = sv[len(sv)-1] / sv[0]
		if d.Jacobian.Ratio < 1e-8 {
			d.Jacobian.Verdict = fmt.Sprintf("near-flat direction: the smallest singular value of G is %.2g of the largest, so these moments barely identify some parameter combination", d.Jacobian.Ratio)
			d.Warnings = append(d.Warnings, d.Jacobian.Verdict)
		} else {
			d.Jacobian.Verdict = fmt.Sprintf("full rank: smallest/largest singular value %.2g", d.Jacobian.Ratio)
		}
	}
	switch {
	case res.GMM.JDF == 0:
		d.Overid = "exactly identified: no over-identification test"
	case res.GMM.J == nil:
		d.Overid = "Hansen J needs the two-step efficient weighting matrix (steps = 2)"
	case *res.GMM.JPValue < 0.05:
		d.Overid = fmt.Sprintf("Hansen J = %.3f with %d df (p = %.3f) rejects the over-identifying restrictions at 5%%: some instruments may be invalid or the model misspecified", *res.GMM.J, res.GMM.JDF, *res.GMM.JPValue)
		d.Warnings = append(d.Warnings, d.Overid)
	default:
		d.Overid = fmt.Sprintf("Hansen J = %.3f with %d df (p = %.3f) does not reject the over-identifying restrictions at 5%%", *res.GMM.J, res.GMM.JDF, *res.GMM.JPValue)
	}
	return d
}
