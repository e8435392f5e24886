package demand

import (
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"

	"rcdemand/instruments"
)

// Diagnostics are the identification and specification checks of an
// estimate, each with a verdict in words.
type Diagnostics struct {
	RankZ      int                     `json:"rank_z"`
	RankZX1    int                     `json:"rank_zx1"`
	FirstStage *instruments.FirstStage `json:"first_stage,omitempty"`
	// FirstStageNest is the first stage of ln s_{j|g}, the regressor whose
	// coefficient is ρ in the nested logit's linear form.
	FirstStageNest *instruments.FirstStage `json:"first_stage_within_nest_share,omitempty"`
	Weighting      Weighting               `json:"weighting"`
	Jacobian       JacobianSV              `json:"moment_jacobian"`
	Overid         string                  `json:"overidentification"`
	OveridRejects  bool                    `json:"overidentification_rejected"` // Hansen J rejects at 5%
	Warnings       []string                `json:"warnings,omitempty"`
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
	NearFlat       bool      `json:"near_flat"` // the smallest/largest ratio is below 1e-8
	Verdict        string    `json:"verdict"`
}

// diagnose assembles the diagnostics of a finished estimate.
func diagnose(m *Model, iv *IV, G *mat.Dense, W *mat.SymDense, res *Results) *Diagnostics {
	d := &Diagnostics{RankZ: rank(m.Z), RankZX1: rank(iv.zx)}
	// First stages for price and, in a nested logit, ln s_{j|g}: the
	// endogenous regressors on Z, the exogenous linear columns first.
	exo := len(m.X1Names) // Z starts with the exogenous columns of X1
	if m.PriceX1 >= 0 {
		exo--
	}
	if price := m.endogenousPrice(); price != nil {
		if fs, err := instruments.FirstStageOf(price, m.Z, exo, m.ZNames, m.Spec.Columns.Price); err == nil {
			d.FirstStage = fs
			if fs.Strength == instruments.Weak {
				d.Warnings = append(d.Warnings, "weak instruments for price: "+fs.Verdict)
			}
		}
	}
	if y := m.withinNestShare(); y != nil {
		if fs, err := instruments.FirstStageOf(y, m.Z, exo, m.ZNames, "ln s_j|g"); err == nil {
			d.FirstStageNest = fs
			// With two endogenous regressors the one-regressor critical
			// values (Stock & Yogo 2005 tabulate others) are a rough guide.
			const two = " (critical values for one endogenous regressor: with price and ln s_j|g both endogenous, a rough guide only)"
			fs.Verdict += two
			if d.FirstStage != nil {
				d.FirstStage.Verdict += two
			}
			if fs.Strength == instruments.Weak {
				d.Warnings = append(d.Warnings, "weak instruments for the within-nest share ln s_j|g (which identifies ρ): "+fs.Verdict)
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
			d.Jacobian.NearFlat = true
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
		d.OveridRejects = true
		d.Overid = fmt.Sprintf("Hansen J = %.3f with %d df (%s) rejects the over-identifying restrictions at 5%%: some instruments may be invalid or the model misspecified", *res.GMM.J, res.GMM.JDF, PText(*res.GMM.JPValue))
		d.Warnings = append(d.Warnings, d.Overid)
	default:
		d.Overid = fmt.Sprintf("Hansen J = %.3f with %d df (%s) does not reject the over-identifying restrictions at 5%%", *res.GMM.J, res.GMM.JDF, PText(*res.GMM.JPValue))
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

// endogenousPrice returns price as the first stage sees it (fixed effects
// removed): the X1 column, or under a log-normal price sensitivity the
// products-table column; nil when price is not in the model.
func (m *Model) endogenousPrice() []float64 {
	switch {
	case m.PriceX1 >= 0:
		return mat.Col(nil, m.PriceX1, m.X1)
	case m.Spec.LogNormalPrice():
		p := append([]float64(nil), m.Products.Price...)
		if m.absorb != nil {
			m.absorb.apply(p)
		}
		return p
	}
	return nil
}

// withinNestShare returns ln s_{j|g} = ln s_j − ln Σ_{k∈g} s_k (the sum over
// the products of j's nest in j's market) with fixed effects removed, or
// nil without nests.
func (m *Model) withinNestShare() []float64 {
	if m.NestOf == nil {
		return nil
	}
	p := m.Products
	y := make([]float64, p.Len())
	for _, mk := range p.Markets {
		sum := map[int]float64{}
		for n := mk.Start; n < mk.End; n++ {
			sum[m.NestOf[n]] += p.Share[n]
		}
		for n := mk.Start; n < mk.End; n++ {
			y[n] = math.Log(p.Share[n]) - math.Log(sum[m.NestOf[n]])
		}
	}
	if m.absorb != nil {
		m.absorb.apply(y)
	}
	return y
}

// PText writes a p-value as a reader expects: "p = 0.093", and "p < 0.001"
// below a thousandth (never "p = 0.000").
func PText(p float64) string {
	if p < 0.001 {
		return "p < 0.001"
	}
	return fmt.Sprintf("p = %.3f", p)
}
