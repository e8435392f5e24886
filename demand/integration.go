package demand

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"

	"gonum.org/v1/gonum/mat"
	"gonum.org/v1/gonum/stat/distuv"
)

// Rule is an integration rule over K independent standard normal tastes: the
// nodes (one row of K values per node) and their weights, summing to 1.
type Rule struct {
	Nodes   [][]float64
	Weights []float64
}

// GaussHermite returns the n-point Gauss–Hermite rule for ∫ f(x) e^{−x²} dx
// (the physicists' convention of Abramowitz & Stegun table 25.10): nodes in
// increasing order and weights summing to √π. It uses the Golub–Welsch
// eigenvalue method on the Jacobi matrix of the Hermite polynomials.
func GaussHermite(n int) (nodes, weights []float64) {
	if n == 1 {
		return []float64{0}, []float64{math.SqrtPi}
	}
	J := mat.NewSymDense(n, nil)
	for i := 1; i < n; i++ {
		J.SetSym(i-1, i, math.Sqrt(float64(i)/2))
	}
	var eig mat.EigenSym
	if !eig.Factorize(J, true) {
		panic("demand: Gauss–Hermite eigen decomposition failed")
	}
	vals := eig.Values(nil)
	var vecs mat.Dense
	eig.VectorsTo(&vecs)
	type nw struct{ x, w float64 }
	out := make([]nw, n)
	for i := range vals {
		v := vecs.At(0, i)
		out[i] = nw{vals[i], math.SqrtPi * v * v}
	}
	sort.Slice(out, func(a, b int) bool { return out[a].x < out[b].x })
	// Symmetrise: the rule is exactly symmetric about 0.
	for i := 0; i < n/2; i++ {
		j := n - 1 - i
		x := (out[j].x - out[i].x) / 2
		w := (out[i].w + out[j].w) / 2
		out[i], out[j] = nw{-x, w}, nw{x, w}
	}
	if n%2 == 1 {
		out[n/2].x = 0
	}
	for _, o := range out {
		nodes = append(nodes, o.x)
		weights = append(weights, o.w)
	}
	return nodes, weights
}

// normalGH returns the n-point Gauss–Hermite rule for a standard normal:
// nodes √2·x and weights w/√π.
func normalGH(n int) ([]float64, []float64) {
	x, w := GaussHermite(n)
	for i := range x {
		x[i] *= math.Sqrt2
		w[i] /= math.SqrtPi
	}
	return x, w
}

// ProductRule is the tensor product of n-point normal Gauss–Hermite rules in
// k dimensions (n^k nodes).
func ProductRule(k, n int) Rule {
	sizes := make([]int, k)
	for d := range sizes {
		sizes[d] = n
	}
	return tensor(sizes, 1)
}

// tensor returns the product of normal Gauss–Hermite rules with sizes[d]
// nodes in dimension d, all weights multiplied by scale.
func tensor(sizes []int, scale float64) Rule {
	r := Rule{Nodes: [][]float64{{}}, Weights: []float64{scale}}
	for _, n := range sizes {
		x, w := normalGH(n)
		var nodes [][]float64
		var weights []float64
		for a, node := range r.Nodes {
			for i := range x {
				nodes = append(nodes, append(append([]float64(nil), node...), x[i]))
				weights = append(weights, r.Weights[a]*w[i])
			}
		}
		r.Nodes, r.Weights = nodes, weights
	}
	return r
}

// SparseGrid is the Smolyak sparse grid of Heiss & Winschel (2008) built on
// normal Gauss–Hermite rules with i nodes at level i (exact to degree 2i−1):
//
//	A(k, d) = Σ_{k ≤ |i| ≤ k+d−1} (−1)^{k+d−1−|i|} C(d−1, k+d−1−|i|) ⊗_m U_{i_m},
//
// with i_m ≥ 1. It integrates every polynomial of total degree ≤ 2k−1
// exactly. Coincident nodes are merged; some weights are negative.
func SparseGrid(d, k int) Rule {
	acc := map[string]int{}
	var r Rule
	q := k + d - 1
	idx := make([]int, d)
	var rec func(m, sum int)
	rec = func(m, sum int) {
		if m == d {
			if sum < k || sum > q {
				return
			}
			c := float64(binom(d-1, q-sum))
			if (q-sum)%2 == 1 {
				c = -c
			}
			tp := tensor(idx, c)
			for a, node := range tp.Nodes {
				key := fmt.Sprintf("%.12f", node)
				if at, ok := acc[key]; ok {
					r.Weights[at] += tp.Weights[a]
					continue
				}
				acc[key] = len(r.Nodes)
				r.Nodes = append(r.Nodes, node)
				r.Weights = append(r.Weights, tp.Weights[a])
			}
			return
		}
		for i := 1; sum+i+(d-m-1) <= q; i++ {
			idx[m] = i
			rec(m+1, sum+i)
		}
	}
	rec(0, 0)
	// Drop nodes whose weights cancelled.
	out := Rule{}
	for a, w := range r.Weights {
		if math.Abs(w) > 1e-15 {
			out.Nodes = append(out.Nodes, r.Nodes[a])
			out.Weights = append(out.Weights, w)
		}
	}
	return out
}

func binom(n, k int) int {
	if k < 0 || k > n {
		return 0
	}
	c := 1
	for i := 1; i <= k; i++ {
		c = c * (n - k + i) / i
	}
	return c
}

// primes are the Halton bases, one per dimension in order.
var primes = []int{2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47, 53, 59, 61, 67, 71}

// haltonSkip is the number of leading Halton points discarded.
const haltonSkip = 1000

// radicalInverse returns the base-b radical inverse of n.
func radicalInverse(n, b int) float64 {
	inv := 1 / float64(b)
	f, x := inv, 0.0
	for n > 0 {
		x += f * float64(n%b)
		n /= b
		f *= inv
	}
	return x
}

// marketDraws returns the tastes for market t (of T) under a generated rule:
// a draws×k slice of standard normal values and the weights.
func marketDraws(spec IntegrationSpec, k, t int) (Rule, error) {
	switch spec.Rule {
	case "monte-carlo":
		rng := rand.New(rand.NewPCG(spec.Seed, uint64(t)))
		r := Rule{}
		for i := 0; i < spec.Draws; i++ {
			node := make([]float64, k)
			for d := range node {
				node[d] = rng.NormFloat64()
			}
			r.Nodes = append(r.Nodes, node)
			r.Weights = append(r.Weights, 1/float64(spec.Draws))
		}
		return r, nil
	case "halton":
		if k > len(primes) {
			return Rule{}, fmt.Errorf("halton draws support at most %d random coefficients", len(primes))
		}
		r := Rule{}
		for i := 0; i < spec.Draws; i++ {
			n := haltonSkip + t*spec.Draws + i + 1
			node := make([]float64, k)
			for d := range node {
				node[d] = distuv.UnitNormal.Quantile(radicalInverse(n, primes[d]))
			}
			r.Nodes = append(r.Nodes, node)
			r.Weights = append(r.Weights, 1/float64(spec.Draws))
		}
		return r, nil
	case "gauss-hermite":
		return ProductRule(k, spec.Nodes), nil
	case "sparse-grid":
		return SparseGrid(k, spec.Level), nil
	}
	return Rule{}, fmt.Errorf("unknown integration rule %q", spec.Rule)
}
