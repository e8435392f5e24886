package instruments

import (
	"fmt"
	"math"
	"strings"

	"gonum.org/v1/gonum/mat"
)

const (
	// residualTol is the norm below which a unit column's remainder after
	// two Gram–Schmidt passes counts as zero: the column is a linear
	// combination of the ones before it.
	residualTol = 1e-9
	// negligible is the relative size below which a least-squares
	// coefficient does not name its column as involved.
	negligible = 1e-6
	// zeroTol is the largest |value| of a column Admit treats as all zero.
	zeroTol = 1e-10
)

// basis is an orthonormal basis grown by two-pass Gram–Schmidt on unit
// columns.
type basis struct {
	q [][]float64
	v []float64 // remainder of the last column given to residual
}

// residual scales col to unit length, removes its projection on the basis
// in two passes and returns col's norm and the norm of the remainder, which
// stays in b.v for push. A zero column returns (0, 0).
func (b *basis) residual(col []float64) (norm, res float64) {
	b.v = append(b.v[:0], col...)
	for _, x := range b.v {
		norm += x * x
	}
	norm = math.Sqrt(norm)
	if norm == 0 {
		return 0, 0
	}
	for i := range b.v {
		b.v[i] /= norm
	}
	for pass := 0; pass < 2; pass++ {
		for _, q := range b.q {
			dot := 0.0
			for i, x := range q {
				dot += x * b.v[i]
			}
			for i, x := range q {
				b.v[i] -= dot * x
			}
		}
	}
	for _, x := range b.v {
		res += x * x
	}
	return norm, math.Sqrt(res)
}

// push adds the remainder left by the last call to residual, whose norm was
// res, to the basis.
func (b *basis) push(res float64) {
	q := make([]float64, len(b.v))
	for i, x := range b.v {
		q[i] = x / res
	}
	b.q = append(b.q, q)
}

// Collinear returns "" when A has full column rank, else a one-line
// description of the first column that is zero or (nearly) a linear
// combination of the columns before it. A column counts as such when, scaled
// to unit length, its remainder after two Gram–Schmidt passes against the
// earlier columns has norm below 1e-9. The description names only the
// earlier columns involved: those whose coefficient in the least-squares
// fit of the offending column on the earlier ones (all scaled to unit
// length) is at least 1e-6 times the largest in absolute value.
func Collinear(A mat.Matrix, names []string) string {
	_, c := A.Dims()
	var b basis
	for j := 0; j < c; j++ {
		norm, res := b.residual(mat.Col(nil, j, A))
		if norm == 0 {
			return fmt.Sprintf("column %q is identically zero", names[j])
		}
		if res < residualTol {
			deps := involved(A, j, names)
			if len(deps) == 0 {
				return fmt.Sprintf("column %q is collinear with earlier columns", names[j])
			}
			return fmt.Sprintf("column %q is a linear combination of %s", names[j], strings.Join(deps, ", "))
		}
		b.push(res)
	}
	return ""
}

// involved returns the quoted names of the columns before j with a
// non-negligible coefficient in the least-squares fit of column j on them,
// all columns scaled to unit length. The earlier columns have full rank, so
// there are at most as many as rows.
func involved(A mat.Matrix, j int, names []string) []string {
	r, _ := A.Dims()
	X := mat.NewDense(r, j, nil)
	for k := 0; k < j; k++ {
		col := mat.Col(nil, k, A)
		X.SetCol(k, unit(col))
	}
	y := mat.NewVecDense(r, unit(mat.Col(nil, j, A)))
	var qr mat.QR
	qr.Factorize(X)
	var coef mat.VecDense
	if err := qr.SolveVecTo(&coef, false, y); err != nil {
		// A finite condition number still leaves the solution in coef.
		if c, ok := err.(mat.Condition); !ok || math.IsInf(float64(c), 0) {
			return nil
		}
	}
	largest := 0.0
	for k := 0; k < j; k++ {
		largest = math.Max(largest, math.Abs(coef.AtVec(k)))
	}
	var deps []string
	for k := 0; k < j; k++ {
		if largest > 0 && math.Abs(coef.AtVec(k)) >= negligible*largest {
			deps = append(deps, fmt.Sprintf("%q", names[k]))
		}
	}
	return deps
}

// unit scales x to unit Euclidean length in place and returns it.
func unit(x []float64) []float64 {
	s := 0.0
	for _, v := range x {
		s += v * v
	}
	s = math.Sqrt(s)
	for i := range x {
		x[i] /= s
	}
	return x
}

// Admit returns the built columns (names, cols) worth adding to the
// instruments already in use (keepNames, keep; every column of length n),
// in the order given: a built column is dropped, with a note, when it is
// constant (or all zero, max |value| < 1e-10, as a column constant within
// absorbed fixed-effect groups arrives once the effects are removed), when it
// equals an earlier column exactly, or when it is a linear combination of
// the columns before it (the test of Collinear). Columns of keep that are
// themselves collinear are passed over in that test rather than condemning
// every built column.
func Admit(names []string, cols [][]float64, keepNames []string, keep [][]float64) (outNames []string, out [][]float64, notes []string) {
	seen := append([][]float64(nil), keep...)
	seenNames := append([]string(nil), keepNames...)
	var b basis
	for _, k := range keep {
		if norm, res := b.residual(k); norm > 0 && res >= residualTol {
			b.push(res)
		}
	}
	for c, col := range cols {
		if isConstant(col) {
			notes = append(notes, fmt.Sprintf("built instrument %q is constant and was dropped", names[c]))
			continue
		}
		if dup := duplicateOf(col, seen, seenNames); dup != "" {
			notes = append(notes, fmt.Sprintf("built instrument %q duplicates %q and was dropped", names[c], dup))
			continue
		}
		_, res := b.residual(col)
		if res < residualTol {
			notes = append(notes, fmt.Sprintf("built instrument %q is collinear with the instruments before it and was dropped", names[c]))
			continue
		}
		b.push(res)
		outNames = append(outNames, names[c])
		out = append(out, col)
		seen = append(seen, col)
		seenNames = append(seenNames, names[c])
	}
	return outNames, out, notes
}

// isConstant reports whether x takes one value, or is zero to within 1e-10.
func isConstant(x []float64) bool {
	same, small := true, true
	for _, v := range x {
		same = same && v == x[0]
		small = small && math.Abs(v) < zeroTol
	}
	return same || small
}

// duplicateOf returns the name of the first column of seen equal to col,
// or "".
func duplicateOf(col []float64, seen [][]float64, seenNames []string) string {
	for s, prev := range seen {
		if equalCols(prev, col) {
			return seenNames[s]
		}
	}
	return ""
}

func equalCols(a, b []float64) bool {
	for i := range a {
		if a[i] != b[i] {
			return false
		}
	}
	return true
}
