package synth

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"

	"rcdemand/demand"
)

// TestCholeskyDiagonalFromSigma: with random_covariance = "full" and a
// [cholesky] that gives only the entry below the diagonal, the diagonal of
// L comes from [sigma] (the spec's start_cholesky convention). The shares
// synth writes are those of the known L = [[1, 0], [0.5, 0.8]], computed
// here by hand from the agents' draws (before, the diagonal was silently 0),
// and truth.json records every entry of L and σ = √diag(LLᵀ).
func TestCholeskyDiagonalFromSigma(t *testing.T) {
	spec, err := demand.ParseSpec(filepath.Join(t.TempDir(), "in.toml"), []byte(familySpec(`["x1", "x2"]`, `random_covariance = "full"`, `["rival-sums"]`)))
	if err != nil {
		t.Fatal(err)
	}
	tr := familyTruth(3, 5, 40, func(tr *Truth) {
		tr.Sigma = map[string]float64{"x1": 1, "x2": 0.8}
		tr.Cholesky = map[string]map[string]float64{"x2": {"x1": 0.5}}
	})
	syn, err := Synthesize(spec, tr, 4, nil)
	if err != nil {
		t.Fatal(err)
	}
	const l11, l21, l22 = 1.0, 0.5, 0.8
	x1, x2 := column[float64](t, syn.Products, "x1"), column[float64](t, syn.Products, "x2")
	share, delta := column[float64](t, syn.Products, "share"), column[float64](t, syn.Truth, "delta")
	nu1, nu2 := column[float64](t, syn.Agents, "nu_x1"), column[float64](t, syn.Agents, "nu_x2")
	w := column[float64](t, syn.Agents, "weight")
	const J, I = 5, 40
	for m := range 3 {
		want := make([]float64, J)
		for i := m * I; i < (m+1)*I; i++ {
			e1, e2 := l11*nu1[i], l21*nu1[i]+l22*nu2[i] // (Lν_i)
			den, num := 1.0, make([]float64, J)
			for j := range J {
				n := m*J + j
				num[j] = math.Exp(delta[n] + x1[n]*e1 + x2[n]*e2)
				den += num[j]
			}
			for j := range J {
				want[j] += w[i] * num[j] / den
			}
		}
		for j := range J {
			if got := share[m*J+j]; math.Abs(got-want[j]) > 1e-13 {
				t.Errorf("market %d product %d: share %.15g, with the known L %.15g", m+1, j+1, got, want[j])
			}
		}
	}
	dir := t.TempDir()
	if err := syn.Write(dir, "csv", spec, tr, 4, nil); err != nil {
		t.Fatal(err)
	}
	var rec struct {
		Truth struct {
			Sigma    map[string]float64
			Cholesky map[string]map[string]float64
		}
	}
	raw, _ := os.ReadFile(filepath.Join(dir, "truth.json"))
	if err := json.Unmarshal(raw, &rec); err != nil {
		t.Fatal(err)
	}
	// The spec written beside the data sets no key to nothing.
	if sp, _ := os.ReadFile(filepath.Join(dir, "spec.toml")); strings.Contains(string(sp), `= ""`) || strings.Contains(string(sp), "[supply]") {
		t.Errorf("spec.toml has empty keys:\n%s", sp)
	}
	// The process is recorded under the truth file's own keys.
	var keys struct {
		Schema string                     `json:"schema"`
		Truth  map[string]json.RawMessage `json:"truth"`
	}
	if err := json.Unmarshal(raw, &keys); err != nil || keys.Schema != "rcdemand.truth.v2" {
		t.Fatalf("truth.json schema %q, %v", keys.Schema, err)
	}
	for k := range keys.Truth {
		if !slices.Contains(truthKeys(), k) {
			t.Errorf("truth.json records %q, which is not a key of a truth file", k)
		}
	}
	L := rec.Truth.Cholesky
	if len(L) != 2 || len(L["x1"]) != 1 || L["x1"]["x1"] != l11 || len(L["x2"]) != 2 || L["x2"]["x1"] != l21 || L["x2"]["x2"] != l22 {
		t.Errorf("truth.json records L %v, want every entry of [[1, 0], [0.5, 0.8]]", L)
	}
	if s := rec.Truth.Sigma; s["x1"] != 1 || math.Abs(s["x2"]-math.Hypot(l21, l22)) > 1e-15 {
		t.Errorf("truth.json records sigma %v, want √diag(LLᵀ) = {x1: 1, x2: %v}", s, math.Hypot(l21, l22))
	}
	if tr.Cholesky["x2"]["x2"] != 0 || len(tr.Cholesky) != 1 {
		t.Errorf("Synthesize changed the caller's truth: %v", tr.Cholesky)
	}
}

// TestTruthErrors: every mistake in a truth file is an error that names the
// file; a key the truth file does not have, at any depth, is an unknown key
// (with the closest name), whether the key is the truth file's own
// ([shocks] xi_sdd) or a column of the spec ([beta] cafeine).
func TestTruthErrors(t *testing.T) {
	const base = `markets = 4
products = 5
firms = 2
agents = 30
[beta]
"1" = 0.5
price = -2.0
x1 = 1.0
x2 = 0.5
[sigma]
price = 0.2
x1 = 1.0
[characteristics]
x1 = [0.0, 1.0]
x2 = [0.0, 1.0]
[cost]
constant = 0.5
shifters = { z_cost = 0.3 }
[shocks]
xi_sd = 0.3
omega_sd = 0.15
correlation = 0.5
`
	diag := familySpec(`["price", "x1"]`, "", `["rival-sums"]`)
	full := familySpec(`["price", "x1"]`, `random_covariance = "full"`, `["rival-sums"]`)
	tests := []struct {
		name, spec, from, to string
		want                 []string
	}{
		{"negative xi_sd", diag, "xi_sd = 0.3", "xi_sd = -0.3", []string{"[shocks] xi_sd = -0.3", "0 or more"}},
		{"negative omega_sd", diag, "omega_sd = 0.15", "omega_sd = -1", []string{"[shocks] omega_sd = -1", "0 or more"}},
		{"correlation above 1", diag, "correlation = 0.5", "correlation = 1.5", []string{"[shocks] correlation = 1.5", "[−1, 1]"}},
		{"negative sd of a characteristic", diag, "x2 = [0.0, 1.0]", "x2 = [0.0, -1.0]", []string{"[characteristics] x2", "sd 0 or more"}},
		{"typo in a table of the truth file", diag, "xi_sd =", "xi_sdd =", []string{`unknown key "shocks.xi_sdd"`, `did you mean "shocks.xi_sd"`}},
		{"typo at the top", diag, "agents =", "agnets =", []string{`unknown key "agnets"`, `did you mean "agents"`}},
		{"typo in [beta]", diag, "x1 = 1.0\nx2", "x11 = 1.0\nx2", []string{`unknown key "beta.x11"`, `did you mean "x1"`, "linear column"}},
		{"typo in [sigma]", diag, "x1 = 1.0\n[char", "xl = 1.0\n[char", []string{`unknown key "sigma.xl"`, `did you mean "x1"`}},
		{"typo in [characteristics]", diag, "x2 = [0.0, 1.0]", "x22 = [0.0, 1.0]", []string{`unknown key "characteristics.x22"`, `did you mean "x2"`}},
		{"typo in [pi]", diag, "[cost]", "[pi]\nprice = { incme = 0.1 }\n[cost]", []string{`unknown key "pi.price.incme"`}},
		{"typo in [cost] characteristics", diag, "constant = 0.5", "constant = 0.5\ncharacteristics = { x_1 = 0.1 }", []string{`unknown key "cost.characteristics.x_1"`, `did you mean "x1"`}},
		{"a missing value", diag, "x2 = 0.5\n", "", []string{`[beta] has no value for linear column "x2"`}},
		{"diagonal of L twice", full, "[cost]", "[cholesky]\nx1 = { price = 0.1, x1 = 0.9 }\n[cost]", []string{`diagonal entry of L for "x1" is given twice`}},
		{"diagonal of L missing", full, "x1 = 1.0\n[char", "[char", []string{`L has no diagonal entry for "x1"`}},
		{"negative diagonal of L", full, "price = 0.2\n", "price = -0.2\n", []string{`diagonal entry of L for "price" is -0.2`}},
		{"[cholesky] row not random", full, "[cost]", "[cholesky]\nx2 = { price = 0.1 }\n[cost]", []string{`unknown key "cholesky.x2"`}},
		// A spec given as the truth file: its [agents] table does not decode
		// into the number of agents, and the message still says what it is.
		{"a spec file", diag, base, diag, []string{"this is a spec file (it has [data])"}},
		{"not TOML", diag, "markets = 4", "markets = = 4", []string{"line 1"}},
		// Not a table where one is expected: the TOML decoder would drop it.
		{"[pi] row not a table", diag, "[cost]", "[pi]\nprice = 0.1\n[cost]", []string{`"pi.price" takes a table, not a number`}},
		{"shifters not a table", diag, "shifters = { z_cost = 0.3 }", "shifters = 0.3", []string{`"cost.shifters" takes a table, not a number`}},
		// A table made by a header inside it is a table: the error is the
		// next one in line (price × incme is no interaction of the spec).
		{"[pi.price] header", diag, "[cost]", "[pi.price]\nincme = 0.1\n[cost]", []string{`unknown key "pi.price.incme"`}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			dir := t.TempDir()
			text := strings.Replace(base, tc.from, tc.to, 1)
			if text == base && tc.from != "" {
				t.Fatalf("%q is not in the truth file", tc.from)
			}
			path := filepath.Join(dir, "truth.toml")
			os.WriteFile(path, []byte(text), 0o644)
			spec, err := demand.ParseSpec(filepath.Join(dir, "spec.toml"), []byte(tc.spec))
			if err != nil {
				t.Fatal(err)
			}
			tr, err := ReadTruth(path)
			if err == nil {
				_, err = Synthesize(spec, tr, 1, nil)
			}
			if err == nil {
				t.Fatal("no error")
			}
			for _, w := range append([]string{path + ": "}, tc.want...) {
				if !strings.Contains(err.Error(), w) {
					t.Errorf("%q lacks %q", err, w)
				}
			}
		})
	}
}
