package main

import (
	"bytes"
	"strings"
	"testing"

	"rcdemand/merger/study"
)

// TestStudyTablesFitThePage: the study's tables go through textTable and,
// with four markets scales, the RMSE table wraps into blocks of scales
// rather than running past pageWidth (before, each scale took 23
// characters after a 26-character name column).
func TestStudyTablesFitThePage(t *testing.T) {
	f := func(x float64) *float64 { return &x }
	p := study.ParameterStats{Kind: "beta", Name: longName, Truth: -2.5, Bias: f(0.01), RMSE: f(1234.5678), SD: f(0.2), MedianSE: f(0.19), Coverage95: f(0.94)}
	q := study.ParameterStats{Kind: "sigma", Name: "price", Truth: 0.5}
	st := &study.Study{Replications: 20, Parameters: []study.ParameterStats{p, q}, Caution: study.Caution,
		Verdicts: []string{strings.Repeat("A verdict long enough to need more than one line of the page. ", 3)}}
	for k, m := range []int{50, 100, 200, 4000} {
		st.Scales = append(st.Scales, study.Scale{Scale: 1 << k, Markets: m, Parameters: []study.ParameterStats{p, q},
			RMSESqrtN: []*float64{f(123456.7), nil}})
	}
	var b bytes.Buffer
	printStudy(&b, st)
	out := b.String()
	for _, l := range strings.Split(out, "\n") {
		if runeLen(l) > pageWidth {
			t.Errorf("line of %d characters: %q", runeLen(l), l)
		}
	}
	for _, w := range []string{"50 markets", "4000 markets", "1234.5678 [1.23e+05]", "median se", "beta caffeine_milligram…"} {
		if !strings.Contains(out, w) {
			t.Errorf("the study's tables lack %q:\n%s", w, out)
		}
	}
	if strings.Count(out, "parameter") != 3 { // the main table, and the scales in two blocks
		t.Errorf("want the scales in two blocks:\n%s", out)
	}
}
