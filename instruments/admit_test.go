package instruments

import (
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// dense lays columns side by side.
func dense(cols ...[]float64) *mat.Dense {
	m := mat.NewDense(len(cols[0]), len(cols), nil)
	for j, c := range cols {
		m.SetCol(j, c)
	}
	return m
}

// TestCollinear checks which column Collinear reports and whom it names.
func TestCollinear(t *testing.T) {
	a := []float64{1, 0, 0, 0, 0}
	u := []float64{1, 1, 0, 0, 0}
	b := []float64{0, 1, 1, 0, 0}
	e := []float64{0, 0, 0, 1, 0}
	lin := func(ca, cb float64, extra []float64, ce float64) []float64 {
		out := make([]float64, len(a))
		for i := range out {
			out[i] = ca*a[i] + cb*b[i] + ce*extra[i]
		}
		return out
	}
	tests := []struct {
		name  string
		cols  [][]float64
		names []string
		want  string
	}{
		{"full rank", [][]float64{a, u, b, e}, []string{"a", "u", "b", "e"}, ""},
		{"zero column", [][]float64{a, {0, 0, 0, 0, 0}, b}, []string{"a", "z", "b"}, `column "z" is identically zero`},
		// c = a + b = (1, 1, 1, 0, 0). After a is removed in the first
		// Gram–Schmidt pass, c still has a component 1/√3 ≈ 0.58 along the
		// part of u orthogonal to a, so the former rule (every column with a
		// first-pass |dot| > 1e-8) named "u" too, though c involves a and b
		// only.
		{"names only the columns involved", [][]float64{a, u, b, lin(1, 1, e, 0)}, []string{"a", "u", "b", "c"}, `column "c" is a linear combination of "a", "b"`},
		{"scale does not hide a column", [][]float64{a, u, b, lin(1000, 1, e, 0)}, []string{"a", "u", "b", "c"}, `column "c" is a linear combination of "a", "b"`},
		// Coefficients on unit columns 1000 and 1e-4·√2: b's is below 1e-6
		// of a's, so b is not named.
		{"negligible coefficient", [][]float64{a, u, b, lin(1000, 1e-4, e, 0)}, []string{"a", "u", "b", "c"}, `column "c" is a linear combination of "a"`},
		{"within 1e-9 is collinear", [][]float64{a, u, b, lin(1, 1, e, 1e-12)}, []string{"a", "u", "b", "c"}, `column "c" is a linear combination of "a", "b"`},
		{"beyond 1e-9 is not", [][]float64{a, u, b, lin(1, 1, e, 1e-6)}, []string{"a", "u", "b", "c"}, ""},
		{"duplicate", [][]float64{a, u, u}, []string{"a", "u", "u2"}, `column "u2" is a linear combination of "u"`},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			if got := Collinear(dense(tc.cols...), tc.names); got != tc.want {
				t.Errorf("got %q, want %q", got, tc.want)
			}
		})
	}
}

// formerCollinearColumn is the detection rule Collinear replaced (two-pass
// Gram–Schmidt on unit columns, residual norm < 1e-9), returning the index of
// the column it flags or −1; Collinear must flag the same column.
func formerCollinearColumn(A *mat.Dense) int {
	r, c := A.Dims()
	var kept [][]float64
	for j := 0; j < c; j++ {
		v := mat.Col(nil, j, A)
		norm := math.Sqrt(mat.Dot(mat.NewVecDense(r, v), mat.NewVecDense(r, v)))
		if norm == 0 {
			return j
		}
		for i := range v {
			v[i] /= norm
		}
		for pass := 0; pass < 2; pass++ {
			for _, q := range kept {
				dot := 0.0
				for i := range v {
					dot += q[i] * v[i]
				}
				for i := range v {
					v[i] -= dot * q[i]
				}
			}
		}
		res := math.Sqrt(mat.Dot(mat.NewVecDense(r, v), mat.NewVecDense(r, v)))
		if res < 1e-9 {
			return j
		}
		for i := range v {
			v[i] /= res
		}
		kept = append(kept, v)
	}
	return -1
}

// TestCollinearDetectionUnchanged: on random matrices with a planted,
// slightly perturbed linear combination, Collinear flags the same column as
// the former rule.
func TestCollinearDetectionUnchanged(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	flagged := 0
	const trials = 200
	for trial := 0; trial < trials; trial++ {
		r, c := 6+rng.IntN(20), 2+rng.IntN(5)
		A := mat.NewDense(r, c+1, nil)
		names := make([]string, c+1)
		for j := 0; j <= c; j++ {
			names[j] = fmt.Sprintf("c%d", j)
			for i := 0; i < r; i++ {
				A.Set(i, j, rng.NormFloat64()*math.Pow(10, float64(rng.IntN(7)-3)))
			}
		}
		// Plant column c as a combination of the others plus noise of a
		// random size around the threshold.
		coef := make([]float64, c)
		for j := range coef {
			coef[j] = rng.NormFloat64()
		}
		comb := make([]float64, r)
		for i := range comb {
			for j := 0; j < c; j++ {
				comb[i] += coef[j] * A.At(i, j)
			}
		}
		// Noise of norm 1e-12 to 1e-6 of the combination's.
		noise := math.Pow(10, -6-6*rng.Float64()) * mat.Norm(mat.NewVecDense(r, comb), 2) / math.Sqrt(float64(r))
		for i := range comb {
			A.Set(i, c, comb[i]+noise*rng.NormFloat64())
		}
		want := formerCollinearColumn(A)
		got := Collinear(A, names)
		if (want < 0) != (got == "") || (want >= 0 && !strings.HasPrefix(got, fmt.Sprintf("column %q", names[want]))) {
			t.Fatalf("trial %d: former rule flags column %d, Collinear says %q", trial, want, got)
		}
		if want >= 0 {
			flagged++
		}
	}
	t.Logf("%d of %d matrices flagged", flagged, trials)
	if flagged < trials/10 || flagged > trials-trials/10 {
		t.Errorf("%d of %d flagged: the planted noise does not straddle the threshold", flagged, trials)
	}
}

// TestAdmit checks the columns Admit keeps and the notes for the ones it
// drops.
func TestAdmit(t *testing.T) {
	one := []float64{1, 1, 1, 1, 1, 1}
	x := []float64{1, 2, 4, 0, 3, 5}
	// Two markets of three products: n_own + n_rival = 2 = 2·"1".
	nOwn := []float64{1, 1, 0, 0, 1, 1}
	nRival := []float64{1, 1, 2, 2, 1, 1}
	// Constant within the groups {0,1,2} and {3,4,5}, then demeaned by
	// group: what arrives when those groups are absorbed.
	g := []float64{0.1, 0.1, 0.1, 0.7, 0.7, 0.7}
	demeaned := slices.Clone(g)
	for _, s := range [][2]int{{0, 3}, {3, 6}} {
		m := 0.0
		for i := s[0]; i < s[1]; i++ {
			m += g[i]
		}
		m /= 3
		for i := s[0]; i < s[1]; i++ {
			demeaned[i] -= m
		}
	}
	tests := []struct {
		name      string
		names     []string
		cols      [][]float64
		keepNames []string
		keep      [][]float64
		want      []string // admitted
		notes     []string
	}{
		{"constant", []string{"k", "x2"}, [][]float64{{3, 3, 3, 3, 3, 3}, {0, 1, 0, 1, 1, 0}}, []string{"1", "x"}, [][]float64{one, x},
			[]string{"x2"}, []string{`built instrument "k" is constant and was dropped`}},
		{"duplicate of a column in use", []string{"own_sum_x"}, [][]float64{slices.Clone(x)}, []string{"1", "x"}, [][]float64{one, x},
			nil, []string{`built instrument "own_sum_x" duplicates "x" and was dropped`}},
		{"duplicate of an earlier built column", []string{"n_own", "n_own_again"}, [][]float64{nOwn, slices.Clone(nOwn)}, []string{"1"}, [][]float64{one},
			[]string{"n_own"}, []string{`built instrument "n_own_again" duplicates "n_own" and was dropped`}},
		{"collinear with the constant and n_own", []string{"n_own", "n_rival"}, [][]float64{nOwn, nRival}, []string{"1", "x"}, [][]float64{one, x},
			[]string{"n_own"}, []string{`built instrument "n_rival" is collinear with the instruments before it and was dropped`}},
		{"all zero after demeaning", []string{"g"}, [][]float64{demeaned}, []string{"x"}, [][]float64{x},
			nil, []string{`built instrument "g" is constant and was dropped`}},
		{"collinear columns in use do not condemn the rest", []string{"n_own"}, [][]float64{nOwn}, []string{"x", "2x"}, [][]float64{x, {2, 4, 8, 0, 6, 10}},
			[]string{"n_own"}, nil},
		{"independent", []string{"n_own"}, [][]float64{nOwn}, []string{"1", "x"}, [][]float64{one, x},
			[]string{"n_own"}, nil},
	}
	if !slices.ContainsFunc(demeaned, func(v float64) bool { return v != 0 }) {
		t.Fatal("the demeaned column is exactly zero; the test needs rounding noise")
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			names, cols, notes := Admit(tc.names, tc.cols, tc.keepNames, tc.keep)
			if !slices.Equal(names, tc.want) || len(cols) != len(names) || !slices.Equal(notes, tc.notes) {
				t.Errorf("admitted %v with notes %q; want %v, %q", names, notes, tc.want, tc.notes)
			}
			for c, name := range names {
				if k := slices.Index(tc.names, name); !slices.Equal(cols[c], tc.cols[k]) {
					t.Errorf("column %q changed", name)
				}
			}
		})
	}
}
