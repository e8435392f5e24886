package demand

import (
	"math"
	"testing"

	"rcdemand/data"
	"rcdemand/instruments"
)

// TestBuiltInstrumentsByHand checks the built sets on a two-market table
// against values worked out by hand.
func TestBuiltInstrumentsByHand(t *testing.T) {
	csv := "market,product,firm,share,price,x\n" +
		"1,a,F,0.1,1,1\n1,b,F,0.1,2,2\n1,c,G,0.1,3,4\n" +
		"2,a,F,0.1,5,0\n2,c,G,0.1,7,3\n"
	tab, err := data.ParseCSV("hand.csv", []byte(csv))
	if err != nil {
		t.Fatal(err)
	}
	prod, err := data.NewProducts(tab, data.Columns{Market: "market", Product: "product", Firm: "firm", Share: "share", Price: "price"}, []string{"x"})
	if err != nil {
		t.Fatal(err)
	}
	x, _ := tab.Floats("x")
	names, cols, err := BuildInstruments([]string{"rival-sums", "differentiation-local", "differentiation-quadratic"}, prod, []string{"x"}, [][]float64{x})
	if err != nil {
		t.Fatal(err)
	}
	// x = 1, 2, 4 | 0, 3; sd over the sample (population) = sqrt(2) ≈ 1.414.
	if sd := instruments.SD(x); math.Abs(sd-math.Sqrt(2)) > 1e-15 {
		t.Fatalf("sd %v", sd)
	}
	want := map[string][]float64{
		"own_sum_x":      {2, 1, 0, 0, 0},
		"rival_sum_x":    {4, 4, 3, 3, 0},
		"n_own":          {1, 1, 0, 0, 0},
		"n_rival":        {1, 1, 2, 1, 1},
		"local_own_x":    {1, 1, 0, 0, 0}, // |1−2| = 1 < 1.414
		"local_rival_x":  {0, 0, 0, 0, 0}, // |1−4|, |2−4| = 2, |0−3| = 3
		"sqdiff_own_x":   {1, 1, 0, 0, 0},
		"sqdiff_rival_x": {9, 4, 13, 9, 9},
	}
	if len(names) != len(want) {
		t.Fatalf("built %v", names)
	}
	for c, name := range names {
		for i, v := range want[name] {
			if cols[c][i] != v {
				t.Errorf("%s row %d: %v, by hand %v", name, i+1, cols[c][i], v)
			}
		}
	}
	// Prune drops the constant and the duplicate.
	_, kept, notes := instruments.Prune([]string{"k", "dup"}, [][]float64{{1, 1, 1, 1, 1}, cols[0]}, names[:1], cols[:1])
	if len(kept) != 0 || len(notes) != 2 {
		t.Errorf("prune kept %d, notes %v", len(kept), notes)
	}
	// Leave-one-out mean prices of the same product in other markets.
	hp := mustProducts(t, "market,product,firm,share,price\n1,a,F,0.1,1\n1,b,F,0.1,2\n2,a,F,0.1,5\n2,b,F,0.1,6\n3,a,F,0.1,9\n")
	_, hc, err := BuildInstruments([]string{"hausman"}, hp, nil, nil)
	if err != nil {
		t.Fatal(err)
	}
	for i, v := range []float64{7, 6, 5, 2, 3} {
		if hc[0][i] != v {
			t.Errorf("hausman_price row %d: %v, by hand %v", i+1, hc[0][i], v)
		}
	}
	// A product in one market only has no Hausman instrument.
	_, _, err = BuildInstruments([]string{"hausman"}, mustProducts(t, "market,product,firm,share,price\n1,a,F,0.1,1\n1,b,F,0.1,2\n2,a,F,0.1,3\n"), nil, nil)
	if err == nil || !containsAll(err.Error(), `row 2`, `"b"`) {
		t.Errorf("want an error naming product b at row 2, got %v", err)
	}
}

func mustProducts(t *testing.T, csv string) *data.Products {
	t.Helper()
	tab, err := data.ParseCSV("p.csv", []byte(csv))
	if err != nil {
		t.Fatal(err)
	}
	p, err := data.NewProducts(tab, data.Columns{Market: "market", Product: "product", Firm: "firm", Share: "share", Price: "price"}, nil)
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// TestRivalSumsMatchSyntheticSmall: the built rival-sums for x1 and x2 equal
// the z_own_* and z_rival_* columns shipped with the synthetic-small data
// (built there by the independent reference program).
func TestRivalSumsMatchSyntheticSmall(t *testing.T) {
	m := syntheticSmall(t)
	p := m.Products
	x1, _ := p.Floats("x1")
	x2, _ := p.Floats("x2")
	names, cols, err := BuildInstruments([]string{"rival-sums"}, p, []string{"x1", "x2"}, [][]float64{x1, x2})
	if err != nil {
		t.Fatal(err)
	}
	ref := map[string]string{"own_sum_x1": "z_own_x1", "rival_sum_x1": "z_rival_x1", "own_sum_x2": "z_own_x2", "rival_sum_x2": "z_rival_x2"}
	found := 0
	for c, name := range names {
		r, ok := ref[name]
		if !ok {
			continue
		}
		found++
		want, _ := p.Floats(r)
		for i := range want {
			if math.Abs(cols[c][i]-want[i]) > 1e-12 {
				t.Fatalf("%s row %d: %v, shipped %s %v", name, i+1, cols[c][i], r, want[i])
			}
		}
	}
	if found != 4 {
		t.Fatalf("built %v", names)
	}
}
