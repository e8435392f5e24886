package demand

import (
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// specIn writes a spec into a copy of the synthetic-small folder and reads
// it, so tests can vary the model on that data.
func specIn(t *testing.T, spec string, edit func(dir string)) *Spec {
	t.Helper()
	dir := t.TempDir()
	for _, f := range []string{"products.csv", "agents.csv"} {
		raw, err := os.ReadFile(filepath.Join("../testdata/synthetic-small", f))
		if err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(filepath.Join(dir, f), raw, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	if edit != nil {
		edit(dir)
	}
	path := filepath.Join(dir, "spec.toml")
	if err := os.WriteFile(path, []byte(spec), 0o644); err != nil {
		t.Fatal(err)
	}
	s, err := ReadSpec(path)
	if err != nil {
		t.Fatal(err)
	}
	return s
}

// TestBuiltInstrumentsWithMarketEffects: with market fixed effects the counts
// n_own + n_rival = J − 1 are constant within each market, so after the
// effects are removed they carry nothing. They must be dropped with a note.
// Before the pruning ran after demeaning, this model failed in the IV engine
// with a rank error that also named columns not involved.
func TestBuiltInstrumentsWithMarketEffects(t *testing.T) {
	spec := specIn(t, `[data]
products = "products.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
absorb = ["market"]
[instruments]
excluded = ["z_cost"]
generate = ["rival-sums"]
`, nil)
	m, err := Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	if _, err := NewIV(m.X1, m.Z, m.X1Names, m.ZNames); err != nil {
		t.Fatalf("the IV engine refuses the admitted instruments: %v", err)
	}
	notes := strings.Join(m.Notes, "\n")
	if !strings.Contains(notes, `"n_rival"`) && !strings.Contains(notes, `"n_own"`) {
		t.Errorf("no note on the dropped counts; notes:\n%s", notes)
	}
	for _, z := range m.ZNames {
		if z == "1" {
			t.Errorf("the absorbed constant is still an instrument")
		}
	}
}

// TestDiversionUsesTheRightEntry: D_jl = −(∂s_l/∂p_j)/(∂s_j/∂p_j) needs the
// (l, j) entry of ∂s/∂p. In the random-coefficients logit ∂s/∂p is
// symmetric, so only a matrix that is not (as with income effects) tells the
// right entry from the wrong one.
func TestDiversionUsesTheRightEntry(t *testing.T) {
	D := mat.NewDense(2, 2, []float64{
		-2.0, 0.3, // ∂s_0/∂p_0, ∂s_0/∂p_1
		0.5, -1.0, // ∂s_1/∂p_0, ∂s_1/∂p_1
	})
	div := DiversionRatios(D)
	// From product 0: −(∂s_1/∂p_0)/(∂s_0/∂p_0) = 0.5/2.
	if got := div.At(0, 1); math.Abs(got-0.25) > 1e-15 {
		t.Errorf("D_01 = %v, want 0.25", got)
	}
	if got := div.At(1, 0); math.Abs(got-0.3) > 1e-15 {
		t.Errorf("D_10 = %v, want 0.3", got)
	}
	if got := div.At(0, 2); math.Abs(got-0.75) > 1e-15 {
		t.Errorf("diversion to the outside good %v, want 0.75", got)
	}
}

// TestNegativeVarianceHasNoStandardError: a negative diagonal entry of the
// covariance gives no standard error (null in the file) and a note, where it
// used to be clamped to a standard error of 0 without a word.
func TestNegativeVarianceHasNoStandardError(t *testing.T) {
	m := syntheticSmall(t)
	n := len(m.X1Names) + len(m.Params)
	V := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		V.SetSym(i, i, 0.04)
	}
	V.SetSym(n-1, n-1, -1e-9)
	var r Results
	r.setEstimates(m, make([]float64, n), V)
	last := r.Sigma[len(r.Sigma)-1]
	if last.SE != nil {
		t.Errorf("standard error %v from a negative variance", *last.SE)
	}
	if se := r.Beta[0].SE; se == nil || math.Abs(*se-0.2) > 1e-15 {
		t.Errorf("β standard error %v, want 0.2", se)
	}
	if len(r.Notes) != 1 || !strings.Contains(r.Notes[0], "sigma[x1]") {
		t.Errorf("notes %q", r.Notes)
	}
}

// TestRankIsComputed: rank_z reports the numerical rank, not the number of
// columns.
func TestRankIsComputed(t *testing.T) {
	A := mat.NewDense(4, 3, []float64{1, 2, 3, 1, 0, 1, 1, 5, 6, 1, 1, 2})
	if r := rank(A); r != 2 {
		t.Errorf("rank %d of a matrix whose third column is the sum of the first two, want 2", r)
	}
	if r := rank(mat.NewDense(3, 2, []float64{1, 0, 0, 1, 1, 1})); r != 2 {
		t.Errorf("rank %d, want 2", r)
	}
}

// TestResultsMatchedByName: results read back into a model whose spec lists
// the random columns in another order are refused, where θ2 used to be
// assigned by position.
func TestResultsMatchedByName(t *testing.T) {
	m := syntheticSmall(t)
	r := &Results{Sigma: []Coef{{Name: "1", Value: 1}, {Name: "price", Value: 2}, {Name: "x1", Value: 3}}, Pi: []Coef{}}
	theta, err := m.ThetaOf(r)
	if err != nil || theta[1] != 2 {
		t.Fatalf("θ2 %v, %v", theta, err)
	}
	r.Sigma[0], r.Sigma[1] = r.Sigma[1], r.Sigma[0]
	if _, err := m.ThetaOf(r); err == nil || !strings.Contains(err.Error(), "sigma[price]") {
		t.Errorf("reordered σ accepted or badly named: %v", err)
	}
	r.Sigma = r.Sigma[:2]
	if _, err := m.ThetaOf(r); err == nil {
		t.Errorf("a missing σ accepted")
	}
}

// TestPiGradient checks the analytic gradient of Q with respect to Π (and
// σ) against central differences, on the synthetic-small data with an
// invented demographic added to its agents (the data were not drawn with
// it; a gradient check needs no true model).
func TestPiGradient(t *testing.T) {
	spec := specIn(t, `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
random = ["price", "x1"]
demographics = ["income"]
interactions = { price = ["income"], x2 = ["income"] }
[instruments]
excluded = ["z_cost", "z_own_x1", "z_own_x2", "z_rival_x1", "z_rival_x2", "z_diff_x1", "z_diff_x2", "z_rival_cost"]
[agents]
tastes = { price = "nu_price", x1 = "nu_x1" }
`, addIncome(t))
	m, err := Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	if len(m.Params) != 4 || m.Params[2].Kind != Pi || m.Params[3].Column != "x2" {
		t.Fatalf("parameters %v", m.ParamNames())
	}
	iv, err := NewIV(m.X1, m.Z, m.X1Names, m.ZNames)
	if err != nil {
		t.Fatal(err)
	}
	W, _ := iv.InitialWeight()
	iv.SetWeight(W)
	o, err := newObjective(m, iv, SettingsOf(spec), Monitor{}, nil)
	if err != nil {
		t.Fatal(err)
	}
	x := []float64{0.4, 1.5, 0.3, -0.2}
	g := o.at(x, true).grad
	for i := range x {
		h := 1e-5
		up, dn := append([]float64(nil), x...), append([]float64(nil), x...)
		up[i] += h
		dn[i] -= h
		fd := (o.at(up, false).q - o.at(dn, false).q) / (2 * h)
		t.Logf("%s: analytic %.12g, central difference %.12g", m.Params[i].Name(), g[i], fd)
		// O(h²) truncation, as in TestObjectiveAtStart.
		if math.Abs(fd-g[i]) > 1e-8*math.Max(1, math.Abs(fd)) {
			t.Errorf("%s: analytic %.12g, central difference %.12g", m.Params[i].Name(), g[i], fd)
		}
	}
}

// addIncome appends a deterministic "income" column to agents.csv.
func addIncome(t *testing.T) func(dir string) {
	return func(dir string) {
		addColumn(t, filepath.Join(dir, "agents.csv"), "income", func(i int) string {
			return strconv.FormatFloat(math.Sin(float64(i)*0.37), 'g', -1, 64)
		})
	}
}
