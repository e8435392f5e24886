package demand

import (
	"fmt"

	"gonum.org/v1/gonum/mat"

	"rcdemand/instruments"
)

// Diagnostics are the identification and specification checks of an
// estimate, each with a verdict in words.
type Diagnostics struct {
	RankZ      int                     `json:"rank_z"`
	RankZX1    int                     `json:"rank_zx1"`
	FirstStage *instruments.FirstStage `json:"first_stage,omitempty"`
	Weighting  Weighting               `json:"weighting"`
	Jacobian   JacobianSV              `json:"moment_jacobian"`
	Overid     string                  `json:"overidentification"`
	Warnings   []string                `json:"warnings,omitempty"`
	// Unidentified is set when G'WG cannot be inverted: the parameter
	// combination the moments do not pin down.
	Unidentified *Unidentified `json:"unidentified,omitempty"`
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

// diagnose assembles the diagnostics of a finished estimate.
func diagnose(m *Model, iv *IV, G *mat.Dense, W *mat.SymDense, res *Results) *Diagnostics {
	d := &Diagnostics{RankZ: rank(m.Z), RankZX1: rank(iv.zx)}
	// First stage for price, when price is in X1.
	if m.PriceX1 >= 0 {
		exo := iv.K() - 1
		price := mat.Col(nil, m.PriceX1, m.X1)
		fs, err := instruments.FirstStageOf(price, m.Z, exo, m.ZNames, m.Spec.Columns.Price)
		if err == nil {
			d.FirstStage = fs
			if fs.Strength == instruments.Weak {
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

// rank returns the numerical rank of A: the number of singular values above
// max(r, c)·ε·σ_max (the usual tolerance, as in LAPACK's and numpy's rank).
func rank(A *mat.Dense) int {
	var svd mat.SVD
	if !svd.Factorize(A, mat.SVDNone) {
		return 0
	}
	sv := svd.Values(nil)
	r, c := A.Dims()
	tol := float64(max(r, c)) * 2.220446049250313e-16 * sv[0]
	n := 0
	for _, v := range sv {
		if v > tol {
			n++
		}
	}
	return n
}
