package main

import (
	"bytes"
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
