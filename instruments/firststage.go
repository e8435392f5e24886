package instruments

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// Strength is the verdict of a first-stage regression.
type Strength int

const (
	StrengthUnknown Strength = iota // not judged
	Strong                          // F above the critical value
	Weak                            // F at or below the critical value
)

var strengthNames = [...]string{StrengthUnknown: "unknown", Strong: "strong", Weak: "weak"}

// String returns "unknown", "strong" or "weak".
func (s Strength) String() string {
	if s < 0 || int(s) >= len(strengthNames) {
		return fmt.Sprintf("Strength(%d)", int(s))
	}
	return strengthNames[s]
}

// MarshalText writes the strength as its String.
func (s Strength) MarshalText() ([]byte, error) {
	if s < 0 || int(s) >= len(strengthNames) {
		return nil, fmt.Errorf("invalid instrument strength %d", int(s))
	}
	return []byte(s.String()), nil
}

// UnmarshalText reads "unknown", "strong" or "weak".
func (s *Strength) UnmarshalText(text []byte) error {
	for k, name := range strengthNames {
		if string(text) == name {
			*s = Strength(k)
			return nil
		}
	}
	return fmt.Errorf("instrument strength %q is not one of unknown, strong, weak", text)
}

// FirstStage is the regression of an endogenous column on the instruments.
type FirstStage struct {
	Endogenous  string   `json:"endogenous"`
	Excluded    []string `json:"excluded"`
	F           float64  `json:"f"`
	DF1         int      `json:"df1"`
	DF2         int      `json:"df2"`
	PartialR2   float64  `json:"partial_r2"`
	RobustF     float64  `json:"robust_f"`
	StockYogo10 float64  `json:"stock_yogo_10pct_size"`
	Verdict     string   `json:"verdict"` // the reason for Strength, in words
	Strength    Strength `json:"strength"`
}

// stockYogo10 holds the Stock & Yogo (2005, table 5.2) critical values of the
// first-stage F for 10% maximal size of a nominal 5% 2SLS Wald test, one
// endogenous regressor, by number of excluded instruments. The values are
// from memory of that table and should be checked against it before being
// cited.
var stockYogo10 = map[int]float64{1: 16.38, 2: 19.93, 3: 22.30, 4: 24.58, 5: 26.87,
	6: 29.18, 7: 31.50, 8: 33.84, 9: 36.19, 10: 38.54}

// ruleOfThumb is the first-stage F below which instruments are called weak
// when no Stock–Yogo value is held (Staiger & Stock 1997).
const ruleOfThumb = 10

// FirstStageOf regresses y (the endogenous column called name) on all of Z
// and on the exogenous columns alone (the first exo columns of Z) and
// returns the homoskedastic F of the excluded instruments with df (q, N−M),
// its partial R², a heteroskedasticity-robust (HC0) Wald F, and a verdict.
func FirstStageOf(y []float64, Z *mat.Dense, exo int, zNames []string, name string) (*FirstStage, error) {
	n, m := Z.Dims()
	q := m - exo
	switch {
	case q < 1:
		return nil, fmt.Errorf("no excluded instruments")
	case exo < 0:
		return nil, fmt.Errorf("%d exogenous columns", exo)
	case len(y) != n || len(zNames) != m:
		return nil, fmt.Errorf("%d observations and %d names for a %d×%d instrument matrix", len(y), len(zNames), n, m)
	case n <= m:
		return nil, fmt.Errorf("%d observations for %d instruments leave no degrees of freedom", n, m)
	}
	yv := mat.NewVecDense(n, y)
	rssU, bU, err := OLS(Z, yv)
	if err != nil {
		return nil, err
	}
	var rssR float64
	if exo > 0 {
		rssR, _, err = OLS(Z.Slice(0, n, 0, exo).(*mat.Dense), yv)
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
	if fs.RobustF, err = robustF(Z, yv, bU, exo); err != nil {
		return nil, err
	}
	fs.judge()
	return fs, nil
}

// robustF returns the Wald statistic over q of the excluded coefficients
// b[exo:] with the HC0 covariance (Z'Z)⁻¹(Σ e_n² z_n z_n')(Z'Z)⁻¹, or 0 when
// that covariance block cannot be inverted.
func robustF(Z *mat.Dense, y, b *mat.VecDense, exo int) (float64, error) {
	n, m := Z.Dims()
	q := m - exo
	var ztz mat.SymDense
	ztz.SymOuterK(1, Z.T())
	var ch mat.Cholesky
	if !ch.Factorize(&ztz) {
		return 0, fmt.Errorf("Z'Z is singular")
	}
	var inv mat.SymDense
	ch.InverseTo(&inv)
	var e mat.VecDense
	e.MulVec(Z, b)
	e.SubVec(y, &e)
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
	// The excluded block; Cholesky reads its upper triangle only.
	vq := mat.NewSymDense(q, mat.DenseCopyOf(v.Slice(exo, m, exo, m)).RawMatrix().Data)
	bq := mat.NewVecDense(q, nil)
	for i := 0; i < q; i++ {
		bq.SetVec(i, b.AtVec(exo+i))
	}
	var chq mat.Cholesky
	if chq.Factorize(vq) {
		var s mat.VecDense
		if err := chq.SolveVecTo(&s, bq); err == nil {
			return mat.Dot(bq, &s) / float64(q), nil
		}
	}
	return 0, nil
}

// judge sets the strength from the homoskedastic F, and the verdict to its
// reason in words: against the Stock–Yogo value for DF1 instruments where
// one is held, else against the rule of thumb 10.
func (fs *FirstStage) judge() {
	q := fs.DF1
	if cv, ok := stockYogo10[q]; ok {
		fs.StockYogo10 = cv
		if fs.F > cv {
			fs.Strength = Strong
			fs.Verdict = fmt.Sprintf("F = %.1f exceeds the Stock–Yogo 10%% maximal-size critical value %.2f for %d instruments", fs.F, cv, q)
		} else {
			fs.Strength = Weak
			fs.Verdict = fmt.Sprintf("F = %.1f is below the Stock–Yogo 10%% maximal-size critical value %.2f for %d instruments; 2SLS-type inference may be unreliable", fs.F, cv, q)
		}
		return
	}
	if fs.F > ruleOfThumb {
		fs.Strength = Strong
		fs.Verdict = fmt.Sprintf("F = %.1f exceeds the rule-of-thumb 10 (Staiger & Stock 1997); no Stock–Yogo value is tabulated here for %d instruments", fs.F, q)
	} else {
		fs.Strength = Weak
		fs.Verdict = fmt.Sprintf("F = %.1f is below the rule-of-thumb 10 (Staiger & Stock 1997)", fs.F)
	}
}

// OLS returns the residual sum of squares and the coefficients of the
// least-squares regression of y on X, by QR.
func OLS(X *mat.Dense, y *mat.VecDense) (float64, *mat.VecDense, error) {
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
