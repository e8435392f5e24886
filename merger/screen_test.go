package merger

import (
	"math"
	"testing"

	"rcdemand/data"
)

// TestScreenHandWorked: UPP, GUPPI (Farrell & Shapiro 2010) and HHI on a
// market worked by hand. Shares 0.2, 0.3, 0.1 (inside total 0.6), prices 10,
// 8, 5, margins 0.4 and 0.5 for the merging products A1 and B1:
// D(A1→B1) = 0.3/0.8 = 0.375, GUPPI(A1) = 0.375·4/10 = 0.15, UPP(A1) = 1.5;
// D(B1→A1) = 0.2/0.7, GUPPI(B1) = (2/7)·4/8 = 1/7, UPP(B1) = 8/7;
// HHI = 33.3² + 50² + 16.7² = 3,888.9, ΔHHI = 2·33.3·50 = 3,333.3.
func TestScreenHandWorked(t *testing.T) {
	tab, err := data.ParseCSV("s.csv", []byte("market,product,firm,share,price,margin\n1,A1,A,0.2,10,0.4\n1,B1,B,0.3,8,0.5\n1,C1,C,0.1,5,0.3\n"))
	if err != nil {
		t.Fatal(err)
	}
	p, err := data.NewProducts(tab, data.Columns{Market: "market", Product: "product", Firm: "firm", Share: "share", Price: "price"}, []string{"margin"})
	if err != nil {
		t.Fatal(err)
	}
	margin, _ := tab.Floats("margin")
	sc, err := RunScreen(p, ScreenOptions{Scenario: Scenario{Combine: []string{"A", "B"}}, Margin: margin})
	if err != nil {
		t.Fatal(err)
	}
	m := sc.Markets[0]
	if math.Abs(m.HHIPre-35000.0/9) > 1e-9 || math.Abs(m.DeltaHHIFixed-30000.0/9) > 1e-9 || !m.FlagHHI || !m.FlagShare {
		t.Fatalf("market %+v", m)
	}
	want := map[string][2]float64{"A1": {1.5, 0.15}, "B1": {8.0 / 7, 1.0 / 7}}
	for _, sp := range sc.Products {
		w := want[sp.Product]
		if math.Abs(sp.UPP-w[0]) > 1e-12 || math.Abs(sp.GUPPI-w[1]) > 1e-12 {
			t.Errorf("%s: UPP %v GUPPI %v, by hand %v", sp.Product, sp.UPP, sp.GUPPI, w)
		}
		if !(sp.LogitPriceChangePct > 0) {
			t.Errorf("%s: calibrated logit price change %v", sp.Product, sp.LogitPriceChangePct)
		}
	}
	if len(sc.Products) != 2 || sc.Caution == "" {
		t.Fatalf("products %d, caution %q", len(sc.Products), sc.Caution)
	}
}
