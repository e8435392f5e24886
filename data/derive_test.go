package data

import (
	"slices"
	"strings"
	"testing"
)

// TestSelectAndReplace: a selection may repeat rows, have fewer rows than
// the table (markets left out) or more (markets drawn with replacement, as
// a markets scale above 1 gives), and every column follows; replacing
// columns gives new tables and leaves the original as it was; an error
// about a selected row names its row in the file. Before, the columns kept
// the table's length: fewer rows read as empty cells past the selection,
// more rows panicked.
func TestSelectAndReplace(t *testing.T) {
	tab, err := ParseCSV("p.csv", []byte("market,product,share,price\n1,a,0.2,1.5\n1,b,0.3,2\n2,a,0.25,1.4\n"))
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []struct {
		name     string
		rows     []int
		markets  []string
		products []string
		prices   []float64
	}{
		{"repeats", []int{2, 0, 2}, []string{"2", "1", "2"}, []string{"a", "a", "a"}, []float64{1.4, 1.5, 1.4}},
		{"fewer rows", []int{2}, []string{"2"}, []string{"a"}, []float64{1.4}},
		{"six rows of three", []int{0, 1, 2, 2, 1, 0}, []string{"1", "1", "2", "2", "1", "1"}, []string{"a", "b", "a", "a", "b", "a"},
			[]float64{1.5, 2, 1.4, 1.4, 2, 1.5}},
	} {
		t.Run(c.name, func(t *testing.T) {
			sel := tab.Select(c.rows)
			if sel.Len() != len(c.rows) {
				t.Errorf("%d rows, want %d", sel.Len(), len(c.rows))
			}
			if m, err := sel.Strings("market"); err != nil || !slices.Equal(m, c.markets) {
				t.Errorf("markets %v, %v", m, err)
			}
			if p, err := sel.Strings("product"); err != nil || !slices.Equal(p, c.products) {
				t.Errorf("products %v, %v", p, err)
			}
			if p, err := sel.Floats("price"); err != nil || !slices.Equal(p, c.prices) {
				t.Errorf("prices %v, %v", p, err)
			}
		})
	}
	sel := tab.Select([]int{2, 0, 2})
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
	bad := tab.Select([]int{1}).WithStrings(map[string][]string{"share": {"x"}})
	if _, err := bad.Floats("share"); err == nil || !strings.Contains(err.Error(), "data row 2 (line 3)") {
		t.Errorf("error %v should name data row 2 (line 3)", err)
	}
}

// TestNewLeavesTheTableAlone: NewProducts and NewAgents group rows by
// market in a copy; the caller's table keeps its order (before, both
// reordered it in place, so a caller that reused it saw other rows).
func TestNewLeavesTheTableAlone(t *testing.T) {
	tab, err := ParseCSV("p.csv", []byte("market,product,firm,share,price\n2,a,F,0.2,1\n1,a,F,0.1,2\n2,b,G,0.3,3\n"))
	if err != nil {
		t.Fatal(err)
	}
	p, err := NewProducts(tab, cols, nil)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(p.Price, []float64{1, 3, 2}) || p.Row(1) != 3 {
		t.Errorf("grouped prices %v, row of the second %d", p.Price, p.Row(1))
	}
	if m, _ := tab.Strings("market"); !slices.Equal(m, []string{"2", "1", "2"}) || tab.Row(1) != 2 {
		t.Errorf("NewProducts reordered its input: markets %v", m)
	}
	ag, err := ParseCSV("a.csv", []byte("market,weight,nu\n1,1,0.5\n2,0.5,-1\n1,0,0\n2,0.5,1\n"))
	if err != nil {
		t.Fatal(err)
	}
	a, err := NewAgents(ag, "market", "weight", []string{"nu"}, p)
	if err != nil {
		t.Fatal(err)
	}
	if !slices.Equal(a.Values["nu"], []float64{-1, 1, 0.5, 0}) || a.Row(0) != 2 {
		t.Errorf("grouped agents %v, row of the first %d", a.Values["nu"], a.Row(0))
	}
	if nu, _ := ag.Floats("nu"); !slices.Equal(nu, []float64{0.5, -1, 0, 1}) || ag.Row(0) != 1 {
		t.Errorf("NewAgents reordered its input: %v", nu)
	}
}
