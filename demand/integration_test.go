package demand

import (
	"math"
	"testing"
)

// TestGaussHermiteTable compares with Abramowitz & Stegun, Handbook of
// Mathematical Functions, table 25.10 (abscissas and weights for
// ∫ e^{−x²} f(x) dx). The 5- and 10-point values were typed from that table
// (from memory, 15 digits); the 2- and 3-point values are also closed forms
// (±1/√2 with weights √π/2; 0 and ±√(3/2) with weights 2√π/3 and √π/6).
func TestGaussHermiteTable(t *testing.T) {
	tests := []struct {
		n       int
		nodes   []float64 // non-negative nodes
		weights []float64
	}{
		{2, []float64{0.707106781186548}, []float64{0.886226925452758}},
		{3, []float64{0, 1.224744871391589}, []float64{1.181635900603677, 0.295408975150919}},
		{5, []float64{0, 0.958572464613819, 2.020182870456086}, []float64{0.945308720482942, 0.393619323152241, 0.019953242059046}},
		{10, []float64{0.342901327223705, 1.036610829789514, 1.756683649299882, 2.532731674232790, 3.436159118837738},
			[]float64{0.610862633735326, 0.240138611082315, 0.033874394455481, 0.001343645746781, 0.000007640432855}},
	}
	for _, tc := range tests {
		x, w := GaussHermite(tc.n)
		// Non-negative half, in increasing order.
		var xs, ws []float64
		for i := range x {
			if x[i] >= -1e-15 {
				xs = append(xs, math.Abs(x[i]))
				ws = append(ws, w[i])
			}
		}
		if len(xs) != len(tc.nodes) {
			t.Fatalf("n=%d: %d non-negative nodes", tc.n, len(xs))
		}
		for i := range xs {
			if math.Abs(xs[i]-tc.nodes[i]) > 1e-14 || math.Abs(ws[i]-tc.weights[i]) > 1e-14*math.Max(1, tc.weights[i]) {
				t.Errorf("n=%d node %d: (%.15f, %.15g), A&S (%.15f, %.15g)", tc.n, i, xs[i], ws[i], tc.nodes[i], tc.weights[i])
			}
		}
	}
}

// normalMoment is E[x^a] for a standard normal: (a−1)!! for even a, 0 for odd.
func normalMoment(a int) float64 {
	if a%2 == 1 {
		return 0
	}
	m := 1.0
	for k := a - 1; k > 1; k -= 2 {
		m *= float64(k)
	}
	return m
}

// TestSparseGridExactness: the Heiss & Winschel (2008) grid of level k in d
// dimensions integrates every monomial of total degree ≤ 2k−1 exactly against
// the standard normal.
func TestSparseGridExactness(t *testing.T) {
	for _, tc := range []struct{ d, k int }{{1, 3}, {2, 3}, {3, 4}, {4, 3}} {
		r := SparseGrid(tc.d, tc.k)
		deg := 2*tc.k - 1
		exps := make([]int, tc.d)
		var rec func(m, left int)
		checked := 0
		rec = func(m, left int) {
			if m == tc.d {
				got, want := 0.0, 1.0
				for a, node := range r.Nodes {
					v := r.Weights[a]
					for dd, e := range exps {
						v *= math.Pow(node[dd], float64(e))
					}
					got += v
				}
				for _, e := range exps {
					want *= normalMoment(e)
				}
				if math.Abs(got-want) > 1e-10*math.Max(1, want) {
					t.Errorf("d=%d k=%d monomial %v: %.12g, exact %.12g", tc.d, tc.k, exps, got, want)
				}
				checked++
				return
			}
			for e := 0; e <= left; e++ {
				exps[m] = e
				rec(m+1, left-e)
			}
		}
		rec(0, deg)
		t.Logf("d=%d level %d: %d nodes, %d monomials of degree ≤ %d exact", tc.d, tc.k, len(r.Nodes), checked, deg)
	}
}

// TestGeneratedRules checks weights sum to 1 and the product rule's moments.
func TestGeneratedRules(t *testing.T) {
	for _, rule := range Rules {
		r, err := marketDraws(IntegrationSpec{Rule: rule, Draws: 100, Nodes: 4, Level: 3, Seed: 9}, 2, 3)
		if err != nil {
			t.Fatal(err)
		}
		sum, m2 := 0.0, 0.0
		for a, w := range r.Weights {
			sum += w
			m2 += w * r.Nodes[a][0] * r.Nodes[a][0]
		}
		if math.Abs(sum-1) > 1e-12 {
			t.Errorf("%s: weights sum to %v", rule, sum)
		}
		if (rule == "gauss-hermite" || rule == "sparse-grid") && math.Abs(m2-1) > 1e-12 {
			t.Errorf("%s: E[x²] = %v", rule, m2)
		}
		if rule == "halton" && math.Abs(m2-1) > 0.2 {
			t.Errorf("halton: E[x²] = %v with 100 draws", m2)
		}
	}
	if got := radicalInverse(6, 2); got != 0.375 { // 6 = 110₂ → 0.011₂ (by hand)
		t.Errorf("radical inverse of 6 in base 2: %v", got)
	}
}
