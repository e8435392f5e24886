package synth

import (
	"fmt"
	"math"
	"slices"

	"rcdemand/contraction"
)

// checkFamily checks the truth's family parameters against the spec's
// model family.
func (g *generator) checkFamily() error {
	spec, tr := g.spec, g.tr
	d := spec.Demand
	if tr.PriceDistribution != "" && tr.PriceDistribution != d.PriceDistribution {
		return tr.errorf("price_distribution %q, but the spec has %q", tr.PriceDistribution, d.PriceDistribution)
	}
	switch {
	case spec.Nested() && tr.Nests < 1:
		return tr.errorf("the spec has [demand] nests = %q: give nests (the number of nests; product j is in nest j mod nests) and rho", d.Nests)
	case !spec.Nested() && (tr.Nests != 0 || tr.Rho != nil):
		return tr.errorf("nests and rho need a spec with [demand] nests")
	case spec.Nested() && tr.Nests > tr.Products:
		return tr.errorf("%d nests for %d products per market", tr.Nests, tr.Products)
	case len(tr.NestNames) > 0 && len(tr.NestNames) != tr.Nests:
		return tr.errorf("%d nest_names for %d nests", len(tr.NestNames), tr.Nests)
	case !spec.FullCovariance() && len(tr.Cholesky) > 0:
		return tr.errorf(`[cholesky] needs random_covariance = "full" in the spec`)
	}
	if spec.Nested() {
		for g2 := range tr.Nests {
			if _, err := g.rhoOf(g2); err != nil {
				return err
			}
		}
	}
	for _, row := range sortedKeys(tr.Cholesky) {
		r := slices.Index(d.Random, row)
		for _, col := range sortedKeys(tr.Cholesky[row]) {
			if c := slices.Index(d.Random, col); r < 0 || c < 0 || c > r {
				return tr.errorf("[cholesky] %s × %s is not in the lower triangle of the random columns %v", row, col, d.Random)
			}
		}
	}
	if spec.FullCovariance() {
		var err error
		g.chol, err = g.cholesky()
		return err
	}
	return nil
}

// cholesky returns the true L of a full taste covariance, every entry of
// its lower triangle by row and column of [demand] random. It follows the
// convention of the spec's start_cholesky (whose diagonal comes from
// start): [cholesky] gives entries by row and column, a diagonal entry it
// leaves out comes from [sigma], and an entry below the diagonal it leaves
// out is 0. A diagonal entry given in both places, or in neither, is an
// error, as is one below 0 (L_kk ≥ 0).
func (g *generator) cholesky() (map[string]map[string]float64, error) {
	tr, random := g.tr, g.spec.Demand.Random
	L := map[string]map[string]float64{}
	for r, row := range random {
		L[row] = map[string]float64{}
		for _, col := range random[:r+1] {
			v, inL := tr.Cholesky[row][col]
			if col == row {
				s, inSigma := tr.Sigma[row]
				switch {
				case inL && inSigma:
					return nil, tr.errorf("the diagonal entry of L for %q is given twice, [cholesky] %s = { %s = %v } and [sigma] %s = %v: give it in one place", row, row, row, v, row, s)
				case !inL && !inSigma:
					return nil, tr.errorf("L has no diagonal entry for %q: give [sigma] %s (the diagonal of L) or [cholesky] %s = { %s = … }", row, row, row, row)
				case inSigma:
					v = s
				}
				if !(v >= 0) || math.IsInf(v, 0) {
					return nil, tr.errorf("the diagonal entry of L for %q is %v: it must be 0 or more", row, v)
				}
			}
			L[row][col] = v
		}
	}
	return L, nil
}

// process returns the truth with the values the data were drawn with: under
// a full covariance every entry of L and, in Sigma, the taste standard
// deviations √diag(LLᵀ) (as the results file's sigma).
func (g *generator) process() *Truth {
	out := *g.tr
	if g.chol == nil {
		return &out
	}
	out.Cholesky, out.Sigma = g.chol, map[string]float64{}
	random := g.spec.Demand.Random
	for r, row := range random {
		ss := 0.0
		for _, col := range random[:r+1] { // in order: the same bits every run
			ss += g.chol[row][col] * g.chol[row][col]
		}
		out.Sigma[row] = math.Sqrt(ss)
	}
	return &out
}

// nestName returns the name of nest k.
func (g *generator) nestName(k int) string {
	if k < len(g.tr.NestNames) {
		return g.tr.NestNames[k]
	}
	return fmt.Sprintf("N%d", k+1)
}

// nestNames returns the nest of every row: product j is in nest j mod nests.
func (g *generator) nestNames() []string {
	out := make([]string, g.N)
	for n := range out {
		out[n] = g.nestName((n % g.J) % g.tr.Nests)
	}
	return out
}

// rhoOf returns the true ρ of nest k.
func (g *generator) rhoOf(k int) (float64, error) {
	tr := g.tr
	v := tr.Rho
	if t, ok := v.(map[string]any); ok {
		if !g.spec.ByNest() {
			return 0, tr.errorf(`rho is a table by nest, but the spec's nesting is not "by-nest"`)
		}
		v, ok = t[g.nestName(k)]
		if !ok {
			return 0, tr.errorf("rho has no value for nest %q", g.nestName(k))
		}
	}
	var x float64
	switch r := v.(type) {
	case float64:
		x = r
	case int64:
		x = float64(r)
	default:
		return 0, tr.errorf("rho must be a number in [0, 1) (or a table of them by nest), not %v", v)
	}
	if !(x >= 0 && x < 1) || math.IsNaN(x) {
		return 0, tr.errorf("rho %v is not in [0, 1)", x)
	}
	return x, nil
}

// tasteParams places the random tastes on p (σν, or Lν under a full
// covariance; the log-normal price location on a variable of ones) and
// returns their true values.
func (g *generator) tasteParams(p *contraction.Problem) []float64 {
	tr, d := g.tr, g.spec.Demand
	var theta []float64
	nu := map[string]int{}
	for _, c := range d.Random {
		nu[c] = len(p.Vars)
		p.Vars = append(p.Vars, g.agNu[c])
	}
	for r, c := range d.Random {
		col := slices.Index(g.x2Names, c)
		if !g.spec.FullCovariance() {
			p.Params = append(p.Params, contraction.Param{Col: col, Var: nu[c]})
			theta = append(theta, tr.Sigma[c])
			continue
		}
		for _, o := range d.Random[:r+1] {
			p.Params = append(p.Params, contraction.Param{Col: col, Var: nu[o]})
			theta = append(theta, g.chol[c][o])
		}
	}
	if g.spec.LogNormalPrice() {
		ones := make([]float64, len(g.agW))
		for i := range ones {
			ones[i] = 1
		}
		p.Params = append(p.Params, contraction.Param{Col: g.priceX2, Var: len(p.Vars)})
		p.Vars = append(p.Vars, ones)
		theta = append(theta, tr.Beta[g.spec.Columns.Price])
		p.LogNormal = make([]bool, len(g.x2Names))
		p.LogNormal[g.priceX2] = true
	}
	return theta
}

// nesting makes p a nested logit when the spec has nests and returns the
// true ρ (one, or one per nest).
func (g *generator) nesting(p *contraction.Problem) []float64 {
	if !g.spec.Nested() {
		return nil
	}
	fam := &contraction.Nested{Nest: make([]int, g.N), Nests: g.tr.Nests, ByNest: g.spec.ByNest()}
	for n := range fam.Nest {
		fam.Nest[n] = (n % g.J) % g.tr.Nests
	}
	p.Family = fam
	var rho []float64
	for k := range fam.Params() {
		r, _ := g.rhoOf(k) // checked by checkFamily
		rho = append(rho, r)
	}
	return rho
}
