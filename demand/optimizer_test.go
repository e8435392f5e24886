package demand

import (
	"encoding/json"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"testing"
)

// TestAutomobileLogitMatchesR estimates the plain logit of Berry,
// Levinsohn & Pakes (1995) on their US automobile data (as shipped in the R
// package hdm 0.3.2; testdata/automobiles) and compares with R gmm 1.7
// two-step GMM (testdata/automobiles/reference-logit.json: coefficients, J
// and the sandwich standard errors of the project's convention,
// se_sandwich). The reference prints 12 significant digits.
func TestAutomobileLogitMatchesR(t *testing.T) {
	raw, err := os.ReadFile("../testdata/automobiles/reference-logit.json")
	if err != nil {
		t.Fatal(err)
	}
	var ref struct {
		Names      []string  `json:"names"`
		Coef       []float64 `json:"coef"`
		SESandwich []float64 `json:"se_sandwich"`
		J          float64   `json:"j"`
		JDF        int       `json:"j_df"`
	}
	if err := json.Unmarshal(raw, &ref); err != nil {
		t.Fatal(err)
	}
	_, res := estimateFile(t, "../testdata/automobiles/spec-logit.toml")
	worst := 0.0
	check := func(what string, got, want float64) {
		t.Helper()
		d := math.Abs(got-want) / math.Abs(want)
		worst = math.Max(worst, d)
		// Measured: 4.6e-11 at most (coefficients), 7e-12 (J, standard
		// errors); 1e-9 is the reference's printed precision with room.
		if d > 1e-9 {
			t.Errorf("%s: %.12g, R %.12g (relative difference %.2g)", what, got, want, d)
		}
	}
	for k, c := range res.Beta {
		if c.Name != ref.Names[k] {
			t.Fatalf("coefficient %d is %q, the reference's %q", k, c.Name, ref.Names[k])
		}
		check("β "+c.Name, c.Value, ref.Coef[k])
		check("se "+c.Name, c.StdErr(), ref.SESandwich[k])
	}
	check("J", *res.GMM.J, ref.J)
	if res.GMM.JDF != ref.JDF {
		t.Errorf("J df %d, R %d", res.GMM.JDF, ref.JDF)
	}
	t.Logf("largest relative difference %.2g", worst)
}

// TestAutomobileRandomCoefficients estimates random coefficients on the
// constant, hpwt and space of the automobile data with the plain draws of
// testdata/automobiles/agents.csv, from five starts, for two seeds of the
// random starts. The objective has several local minima there (the data's
// README); both searches must converge and find the same lowest minimum.
// Hansen J is far above its critical value on these data: the model and
// instruments are rejected, which is not the optimiser's concern.
func TestAutomobileRandomCoefficients(t *testing.T) {
	if testing.Short() {
		t.Skip("ten estimations on real data (a few seconds; slow under the race detector)")
	}
	m := loadFile(t, "../testdata/automobiles/spec-rc.toml")
	var objectives []float64
	for _, seed := range []uint64{1, 2} {
		set := SettingsOf(m.Spec)
		set.Starts, set.Seed = 5, seed
		res, err := Estimate(m, set, Monitor{})
		if err != nil {
			t.Fatal(err)
		}
		if !res.Convergence.Converged {
			t.Errorf("seed %d: not converged: %s", seed, res.Convergence.Message)
		}
		var sigma []float64
		for _, c := range res.Sigma {
			sigma = append(sigma, c.Value)
		}
		t.Logf("seed %d: J %.10g, σ %.6f, %d objective calls, %s", seed, *res.GMM.J, sigma, res.Convergence.ObjectiveCalls, res.MultiStart.Note)
		objectives = append(objectives, *res.GMM.J)
	}
	if math.Abs(objectives[0]-objectives[1]) > 1e-8*objectives[0] {
		t.Errorf("the two searches found different minima: J %.12g and %.12g", objectives[0], objectives[1])
	}
}

// estimateZeroTastes estimates on synthetic-small, with supply (a [supply]
// table, or "") added to the spec, a model whose random coefficient on price
// has taste draws that are all zero, so σ_price is not identified.
func estimateZeroTastes(t *testing.T, supply string) *Results {
	t.Helper()
	spec := specIn(t, `[data]
products = "products.csv"
agents = "agents.csv"
[demand]
linear = ["1", "price", "x1", "x2"]
random = ["price", "x1"]
[instruments]
excluded = ["z_cost", "z_own_x1", "z_own_x2", "z_rival_x1", "z_rival_x2", "z_diff_x1", "z_diff_x2", "z_rival_cost"]
`+supply+`[agents]
tastes = { price = "nu_zero", x1 = "nu_x1" }
`, func(dir string) {
		addColumn(t, filepath.Join(dir, "agents.csv"), "nu_zero", func(int) string { return "0" })
	})
	m, err := Load(spec)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Estimate(m, SettingsOf(spec), Monitor{})
	if err != nil {
		t.Fatal(err)
	}
	return res
}

// TestUnidentifiedWritesEstimates: a random coefficient whose taste draws
// are all zero cannot be identified. The estimate is still returned, with
// no standard errors, and the direction the moments miss names that σ.
func TestUnidentifiedWritesEstimates(t *testing.T) {
	res := estimateZeroTastes(t, "")
	for _, c := range append(append([]Coef(nil), res.Beta...), res.Sigma...) {
		if c.SE != nil {
			t.Errorf("%s has a standard error %v", c.Name, *c.SE)
		}
	}
	u := res.Diagnostics.Unidentified
	if u == nil {
		t.Fatal("no unidentified direction")
	}
	t.Logf("%s (eigenvalue %.3g of G'WG, largest %.3g)", u.Describe(), u.Eigenvalue, u.Largest)
	for i, name := range u.Names {
		if name == "sigma[price]" && math.Abs(math.Abs(u.Direction[i])-1) > 1e-6 {
			t.Errorf("σ_price's share of the direction is %v, want ±1", u.Direction[i])
		}
	}
	if !strings.Contains(u.Describe(), "sigma[price]") {
		t.Errorf("description %q does not name sigma[price]", u.Describe())
	}
}

// TestUnidentifiedWithSupply: with a supply side the estimates are the
// demand β without price, γ and θ (price coefficient first); the direction
// the moments miss names each of them (it used to take the names of X1 and
// θ, two short with three cost columns, and Describe indexed past them).
func TestUnidentifiedWithSupply(t *testing.T) {
	res := estimateZeroTastes(t, `[supply]
cost = ["1", "z_cost", "x1"]
form = "linear"
excluded = ["z_own_x1", "z_rival_x1"]
`)
	u := res.Diagnostics.Unidentified
	if u == nil {
		t.Fatal("no unidentified direction")
	}
	want := []string{"1", "x1", "x2", "gamma[1]", "gamma[z_cost]", "gamma[x1]", "beta[price]", "sigma[price]", "sigma[x1]"}
	if !slices.Equal(u.Names, want) {
		t.Errorf("names %q, want %q", u.Names, want)
	}
	if len(u.Direction) != len(u.Names) {
		t.Fatalf("%d names for a direction of %d", len(u.Names), len(u.Direction))
	}
	t.Logf("%s", u.Describe())
	if !strings.Contains(u.Describe(), "sigma[price]") {
		t.Errorf("description %q does not name sigma[price]", u.Describe())
	}
}

// addColumn appends a column to a CSV file, value(i) for data row i (1-based).
func addColumn(t *testing.T, path, name string, value func(i int) string) {
	t.Helper()
	raw, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	lines := strings.Split(strings.TrimRight(string(raw), "\n"), "\n")
	for i := range lines {
		if i == 0 {
			lines[i] += "," + name
		} else {
			lines[i] += "," + value(i)
		}
	}
	if err := os.WriteFile(path, []byte(strings.Join(lines, "\n")+"\n"), 0o644); err != nil {
		t.Fatal(err)
	}
}

// TestPriceLevelsRequired: the automobile data's price is demeaned (1,558
// of 2,217 prices are negative). Demand can be estimated on it, but the
// effects that need price levels — elasticities, markups, costs, merger
// simulation — are refused, naming the first row, where they used to come
// out with the wrong sign.
func TestPriceLevelsRequired(t *testing.T) {
	m, res := estimateFile(t, "../testdata/automobiles/spec-logit.toml")
	err := m.PriceLevels()
	if err == nil || !strings.Contains(err.Error(), "is not positive") || !strings.Contains(err.Error(), `column "price"`) {
		t.Fatalf("PriceLevels: %v", err)
	}
	abs, _ := filepath.Abs(m.Spec.File)
	res.SpecFile = abs
	path := filepath.Join(t.TempDir(), "results.json")
	raw, _ := json.Marshal(res)
	os.WriteFile(path, raw, 0o644)
	if _, _, err := LoadFitted(path); err == nil || !strings.Contains(err.Error(), "price levels") {
		t.Errorf("LoadFitted: %v", err)
	}
}
