package demand

import (
	"math"
	"testing"

	"rcdemand/data"
)

// TestElasticitiesAndDiversionReference compares market 0 at the true
// parameters (truth.json) with the matrices of the independent numpy/scipy
// program (testdata/synthetic-small/elasticities_market0.csv,
// diversion_market0.csv).
func TestElasticitiesAndDiversionReference(t *testing.T) {
	m := syntheticSmall(t)
	beta, theta := syntheticSmallTruth(t, m)
	f, err := NewFitted(m, beta, theta)
	if err != nil {
		t.Fatal(err)
	}
	E := f.Elasticities(0)
	D := f.Diversion(0)
	worst := 0.0
	defer func() { t.Logf("largest difference %.2g (measured 9e-16; held to 1e-12)", worst) }()
	for _, c := range []struct {
		file string
		cols int
	}{{"elasticities_market0.csv", 8}, {"diversion_market0.csv", 9}} {
		tab, err := data.ReadTable("../testdata/synthetic-small/" + c.file)
		if err != nil {
			t.Fatal(err)
		}
		for k := 0; k < c.cols; k++ {
			name := tab.Names[k+1]
			col, err := tab.Floats(name)
			if err != nil {
				t.Fatal(err)
			}
			for j, want := range col {
				got := E.At(j, min(k, 7))
				if c.cols == 9 {
					got = D.At(j, k)
				}
				worst = math.Max(worst, math.Abs(got-want)/math.Max(1, math.Abs(want)))
				if math.Abs(got-want) > 1e-12*math.Max(1, math.Abs(want)) {
					t.Errorf("%s row %d column %s: %.12g, reference %.12g", c.file, j, name, got, want)
				}
			}
		}
	}
	if a := f.AggregateElasticity(0); !(a < 0) {
		t.Errorf("aggregate elasticity %v", a)
	}
}
