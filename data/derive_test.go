package data

import (
	"slices"
	"strings"
	"testing"
)

// TestSelectAndReplace: selecting rows (with repeats) and replacing columns
// gives new tables and leaves the original as it was; an error about a
// selected row names its row in the file.
func TestSelectAndReplace(t *testing.T) {
	tab, err := ParseCSV("p.csv", []byte("market,product,share,price\n1,a,0.2,1.5\n1,b,0.3,2\n2,a,0.25,1.4\n"))
	if err != nil {
		t.Fatal(err)
	}
	sel := tab.Select([]int{2, 0, 2})
	got, _ := sel.Strings("product")
	if !slices.Equal(got, []string{"a", "a", "a"}) {
		t.Errorf("products %v", got)
	}
	price, _ := sel.Floats("price")
	if !slices.Equal(price, []float64{1.4, 1.5, 1.4}) {
		t.Errorf("prices %v", price)
	}
	re := sel.WithFloats(map[string][]float64{"price": {9, 8, 7}, "cost": {1, 2, 3}}).WithStrings(map[string][]string{"market": {"x", "y", "z"}})
	if p, _ := re.Floats("price"); !slices.Equal(p, []float64{9, 8, 7}) {
		t.Errorf("replaced prices %v", p)
	}
	if c, err := re.Floats("cost"); err != nil || !slices.Equal(c, []float64{1, 2, 3}) {
		t.Errorf("added column %v %v", c, err)
	}
	if m, _ := re.Strings("market"); !slices.Equal(m, []string{"x", "y", "z"}) {
		t.Errorf("markets %v", m)
	}
	if p, _ := sel.Floats("price"); !slices.Equal(p, []float64{1.4, 1.5, 1.4}) {
		t.Errorf("the selected table changed: %v", p)
	}
	if p, _ := tab.Floats("price"); !slices.Equal(p, []float64{1.5, 2, 1.4}) || tab.Has("cost") {
		t.Errorf("the original table changed: %v", p)
	}
	// More rows than the table, as markets resampled at a scale above 1
	// give (before, the selection kept the table's length and panicked).
	if p, _ := tab.Select([]int{0, 1, 2, 2, 1, 0}).Floats("price"); !slices.Equal(p, []float64{1.5, 2, 1.4, 1.4, 2, 1.5}) {
		t.Errorf("six rows of three: %v", p)
	}
	bad := tab.Select([]int{1}).WithStrings(map[string][]string{"share": {"x"}})
	if _, err := bad.Floats("share"); err == nil || !strings.Contains(err.Error(), "data row 2 (line 3)") {
		t.Errorf("error %v should name data row 2 (line 3)", err)
	}
}

// TestSelectChangesTheRowCount: a selection may have fewer rows than the
// table (markets left out) or more (markets drawn with replacement); every
// column follows. Before, the columns kept the table's length: fewer rows
// read as empty cells past the selection, more rows panicked.
func TestSelectChangesTheRowCount(t *testing.T) {
	tab, err := ParseCSV("p.csv", []byte("market,product,share,price\n1,a,0.2,1.5\n1,b,0.3,2\n2,a,0.25,1.4\n"))
	if err != nil {
		t.Fatal(err)
	}
	for _, rows := range [][]int{{2}, {0, 1, 2, 2, 1, 0}} {
		sel := tab.Select(rows)
		markets, err := sel.Strings("market")
		if err != nil || len(markets) != len(rows) {
			t.Errorf("rows %v: markets %v, %v", rows, markets, err)
		}
		price, err := sel.Floats("price")
		if err != nil || len(price) != len(rows) || price[0] != []float64{1.5, 2, 1.4}[rows[0]] {
			t.Errorf("rows %v: prices %v, %v", rows, price, err)
		}
	}
}
