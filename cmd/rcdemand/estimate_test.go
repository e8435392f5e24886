package main

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"rcdemand/demand"
)

// TestLatexGroupsAsTerminal: the LaTeX table has the groups and titles of
// the terminal's table; under a Cholesky factor the σ are derived from L
// and both say so (before, the LaTeX title did not).
func TestLatexGroupsAsTerminal(t *testing.T) {
	se := 0.1
	res := &demand.Results{
		Beta:        []demand.Coef{{Name: "1", Value: 2}, {Name: "price", Value: -3, SE: &se}},
		Sigma:       []demand.Coef{{Name: "1", Value: 0.5}, {Name: "x_1", Value: 0.9}},
		Pi:          []demand.Coef{{Name: "price", Demographic: "income", Value: 0.3}},
		Cholesky:    []demand.Entry{{Row: "1", Column: "1", Value: 0.5}, {Row: "x_1", Column: "1", Value: 0.3}},
		Correlation: []demand.Entry{{Row: "x_1", Column: "1", Value: 0.33}},
	}
	var b bytes.Buffer
	if err := writeLatex(&b, res); err != nil {
		t.Fatal(err)
	}
	tex := b.String()
	for _, want := range []string{`Mean utility ($\beta$)`, "constant & 2.0000", "price & -3.0000 \\\\\n & (0.1000)",
		`Taste standard deviations ($\sigma$, from $L$)`, `x\_1 & 0.9000`, "price × income & 0.3000",
		`Cholesky factor of the taste covariance ($L$)`, "x\\_1, 1 & 0.3000", "Implied taste correlations"} {
		if !strings.Contains(tex, want) {
			t.Errorf("LaTeX lacks %q:\n%s", want, tex)
		}
	}
	var term bytes.Buffer
	estimatesTable(res).write(&term)
	for _, g := range coefGroups(res) {
		if n := len(g.cs); n > 0 && (!strings.Contains(tex, g.latex) || !strings.Contains(term.String(), g.title)) {
			t.Errorf("group %q (%d parameters) missing from the LaTeX or the terminal table", g.title, n)
		}
	}
}

// TestCheckWarnsWithoutPriceLevels: check passes data whose prices are not
// levels (one is negative, as after demeaning) but warns, as estimate does,
// that elasticities, markups and mergers need levels.
func TestCheckWarnsWithoutPriceLevels(t *testing.T) {
	dir := t.TempDir()
	os.WriteFile(filepath.Join(dir, "p.csv"), []byte("market,product,firm,share,price,x,z\n"+
		"1,a,F,0.2,-0.5,0.1,0.3\n1,b,G,0.3,0.5,0.7,0.1\n2,a,F,0.25,-0.4,0.1,0.2\n2,b,G,0.2,0.4,0.7,0.8\n3,a,F,0.22,-0.45,0.2,0.5\n3,b,G,0.3,0.45,0.6,0.9\n"), 0o644)
	spec := filepath.Join(dir, "s.toml")
	os.WriteFile(spec, []byte("[data]\nproducts = \"p.csv\"\n[demand]\nlinear = [\"1\", \"price\", \"x\"]\n[instruments]\nexcluded = [\"z\"]\n"), 0o644)
	code, out, errs := runCLI(t, "check", spec)
	if code != 0 || !strings.Contains(out, "spec and data are valid") {
		t.Fatalf("check: exit %d\n%s%s", code, out, errs)
	}
	if !strings.Contains(errs, `column "price": price -0.5 is not positive (3 of 6 prices are not)`) || !strings.Contains(errs, "demand can still be estimated") {
		t.Errorf("stderr %q", errs)
	}
}
