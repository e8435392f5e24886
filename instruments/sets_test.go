package instruments

import (
	"encoding/csv"
	"errors"
	"math"
	"os"
	"slices"
	"strconv"
	"strings"
	"testing"

	"rcdemand/contraction"
)

// handDesign is a two-market table: market 1 has a, b (firm F) and c (firm
// G); market 2 has a (F) and c (G). Prices 1, 2, 3 | 5, 7.
func handDesign() Design {
	return Design{
		Markets:   []contraction.Span{{Start: 0, End: 3}, {Start: 3, End: 5}},
		Firm:      []int{0, 0, 1, 0, 1},
		Product:   []string{"a", "b", "c", "a", "c"},
		Market:    []string{"1", "1", "1", "2", "2"},
		Price:     []float64{1, 2, 3, 5, 7},
		PriceName: "price",
	}
}

// TestBuildByHand checks the built sets against values worked out by hand.
func TestBuildByHand(t *testing.T) {
	// x = 1, 2, 4 | 0, 3; its population sd over the sample is √2 ≈ 1.414.
	x := []float64{1, 2, 4, 0, 3}
	binary := []float64{0, 1, 1, 0, 1}
	noFirm := handDesign()
	noFirm.Firm = nil
	// Hausman table: a, b | a, b | a with prices 1, 2 | 5, 6 | 9.
	haus := Design{
		Markets: []contraction.Span{{Start: 0, End: 2}, {Start: 2, End: 4}, {Start: 4, End: 5}},
		Product: []string{"a", "b", "a", "b", "a"},
		Market:  []string{"1", "1", "2", "2", "3"},
		Price:   []float64{1, 2, 5, 6, 9},
	}
	hausPrice := haus
	hausPrice.PriceName = "p_usd"
	type col struct {
		name string
		want []float64
	}
	tests := []struct {
		name      string
		sets      []string
		d         Design
		names     []string
		xs        [][]float64
		want      []col
		wantNotes []string
	}{
		{"rival-sums and differentiation", []string{"rival-sums", "differentiation-local", "differentiation-quadratic"}, handDesign(), []string{"x"}, [][]float64{x}, []col{
			{"own_sum_x", []float64{2, 1, 0, 0, 0}},
			{"rival_sum_x", []float64{4, 4, 3, 3, 0}},
			{"n_own", []float64{1, 1, 0, 0, 0}},
			{"n_rival", []float64{1, 1, 2, 1, 1}},
			{"local_own_x", []float64{1, 1, 0, 0, 0}},   // |1−2| = 1 < 1.414
			{"local_rival_x", []float64{0, 0, 0, 0, 0}}, // |1−4|, |2−4| = 2, |0−3| = 3
			{"sqdiff_own_x", []float64{1, 1, 0, 0, 0}},
			{"sqdiff_rival_x", []float64{9, 4, 13, 9, 9}},
		}, nil},
		{"own-sums", []string{"own-sums"}, handDesign(), []string{"x"}, [][]float64{x}, []col{
			{"own_sum_x", []float64{2, 1, 0, 0, 0}},
			{"n_own", []float64{1, 1, 0, 0, 0}},
		}, nil},
		{"binary characteristic skipped with a note", []string{"differentiation-local", "differentiation-quadratic"}, handDesign(), []string{"d", "x"}, [][]float64{binary, x}, []col{
			{"local_own_x", []float64{1, 1, 0, 0, 0}},
			{"local_rival_x", []float64{0, 0, 0, 0, 0}},
			{"sqdiff_own_x", []float64{1, 1, 0, 0, 0}},
			{"sqdiff_rival_x", []float64{9, 4, 13, 9, 9}},
		}, []string{`characteristic "d" is binary (two distinct values or fewer) and was skipped by differentiation-local and differentiation-quadratic`}},
		// Leave-one-out mean prices of the same product in other markets:
		// a: (5+9)/2, (1+9)/2, (1+5)/2; b: 6, 2.
		{"hausman without a firm column", []string{"hausman"}, haus, nil, nil, []col{
			{"hausman_price", []float64{7, 6, 5, 2, 3}},
		}, nil},
		{"hausman named after the price column", []string{"hausman"}, hausPrice, nil, nil, []col{
			{"hausman_p_usd", []float64{7, 6, 5, 2, 3}},
		}, nil},
		{"no sets", nil, noFirm, []string{"x"}, [][]float64{x}, nil, nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			names, cols, notes, err := Build(tc.sets, tc.d, tc.names, tc.xs)
			if err != nil {
				t.Fatal(err)
			}
			if len(names) != len(tc.want) || len(cols) != len(tc.want) {
				t.Fatalf("built %v", names)
			}
			for c, w := range tc.want {
				if names[c] != w.name {
					t.Errorf("column %d is %q, want %q", c, names[c], w.name)
				}
				if !slices.Equal(cols[c], w.want) {
					t.Errorf("%s: %v, by hand %v", w.name, cols[c], w.want)
				}
			}
			if !slices.Equal(notes, tc.wantNotes) {
				t.Errorf("notes %q, want %q", notes, tc.wantNotes)
			}
		})
	}
	if sd := SD(x); math.Abs(sd-math.Sqrt(2)) > 1e-15 {
		t.Errorf("sd %v, by hand √2", sd)
	}
}

// TestNestSetsByHand checks the nest-counts and nest-sums sets against
// values worked out by hand.
func TestNestSetsByHand(t *testing.T) {
	// Nests: market 1 has a, b (firm F, nest 0), c (G, nest 0) and d (G,
	// nest 1); market 2 has a (F, nest 0) and c (G, nest 1). x = 1, 2, 4, 8 | 0, 3.
	nested := Design{
		Markets: []contraction.Span{{Start: 0, End: 4}, {Start: 4, End: 6}},
		Firm:    []int{0, 0, 1, 1, 0, 1},
		Nest:    []int{0, 0, 0, 1, 0, 1},
	}
	nestedNoFirm := nested
	nestedNoFirm.Firm = nil
	xn := []float64{1, 2, 4, 8, 0, 3}
	type col struct {
		name string
		want []float64
	}
	tests := []struct {
		name  string
		sets  []string
		d     Design
		names []string
		xs    [][]float64
		want  []col
		notes []string
	}{
		{"nest counts and sums", []string{"nest-counts", "nest-sums"}, nested, []string{"x"}, [][]float64{xn}, []col{
			{"n_nest", []float64{2, 2, 2, 0, 0, 0}},       // others in the nest
			{"n_nest_rival", []float64{1, 1, 2, 0, 0, 0}}, // of those, other firms'
			{"nest_sum_x", []float64{6, 5, 3, 0, 0, 0}},   // a: 2+4, b: 1+4, c: 1+2
			{"nest_rival_sum_x", []float64{4, 4, 3, 0, 0, 0}},
		}, nil},
		{"nest counts and sums without firms", []string{"nest-sums", "nest-counts"}, nestedNoFirm, []string{"x"}, [][]float64{xn}, []col{
			{"nest_sum_x", []float64{6, 5, 3, 0, 0, 0}},
			{"n_nest", []float64{2, 2, 2, 0, 0, 0}},
		}, nil},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			names, cols, _, err := Build(tc.sets, tc.d, tc.names, tc.xs)
			if err != nil {
				t.Fatal(err)
			}
			if len(names) != len(tc.want) {
				t.Fatalf("built %v", names)
			}
			for c, w := range tc.want {
				if names[c] != w.name || !slices.Equal(cols[c], w.want) {
					t.Errorf("column %d: %s = %v, by hand %s = %v", c, names[c], cols[c], w.name, w.want)
				}
			}
		})
	}
}

// TestBuildErrors checks the errors of Build.
func TestBuildErrors(t *testing.T) {
	x := [][]float64{{1, 2, 4, 0, 3}}
	noFirm := handDesign()
	noFirm.Firm = nil
	// b is seen in market 1 only, at row 1 (0-based).
	single := Design{
		Markets: []contraction.Span{{Start: 0, End: 2}, {Start: 2, End: 3}},
		Product: []string{"a", "b", "a"},
		Market:  []string{"1", "1", "2"},
		Price:   []float64{1, 2, 3},
	}
	gap := handDesign()
	gap.Markets = []contraction.Span{{Start: 0, End: 2}, {Start: 3, End: 5}}
	tests := []struct {
		name  string
		sets  []string
		d     Design
		xs    [][]float64
		check func(error) bool
	}{
		{"unknown set lists the known ones", []string{"rival-sums", "blp"}, handDesign(), x, func(err error) bool {
			return strings.Contains(err.Error(), `"blp"`) && strings.Contains(err.Error(), strings.Join(Sets, ", "))
		}},
		{"own sums need the firm column", []string{"hausman", "own-sums"}, noFirm, x, func(err error) bool {
			return errors.Is(err, ErrNoFirm) && strings.Contains(err.Error(), `"own-sums"`)
		}},
		{"differentiation needs the firm column", []string{"differentiation-quadratic"}, noFirm, x, func(err error) bool {
			return errors.Is(err, ErrNoFirm)
		}},
		{"nest sets need nests", []string{"nest-counts"}, handDesign(), x, func(err error) bool {
			return errors.Is(err, ErrNoNest) && strings.Contains(err.Error(), `"nest-counts"`)
		}},
		{"hausman with a product in one market", []string{"hausman"}, single, nil, func(err error) bool {
			var s *SingleMarketError
			return errors.As(err, &s) && s.Row == 1 && s.Product == "b" && s.Market == "1"
		}},
		{"characteristic of the wrong length", []string{"own-sums"}, handDesign(), [][]float64{{1, 2}}, func(err error) bool {
			return strings.Contains(err.Error(), `characteristic "x" has 2 rows`)
		}},
		{"markets not contiguous", []string{"own-sums"}, gap, x, func(err error) bool {
			return strings.Contains(err.Error(), "contiguous")
		}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, _, _, err := Build(tc.sets, tc.d, []string{"x"}[:len(tc.xs)], tc.xs)
			if err == nil || !tc.check(err) {
				t.Errorf("got error %v", err)
			}
		})
	}
}

// readCSV reads a CSV file with a header into columns by name.
func readCSV(t *testing.T, path string) map[string][]string {
	t.Helper()
	f, err := os.Open(path)
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	rows, err := csv.NewReader(f).ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	cols := map[string][]string{}
	for _, row := range rows[1:] {
		for j, h := range rows[0] {
			cols[h] = append(cols[h], row[j])
		}
	}
	return cols
}

func floats(t *testing.T, s []string) []float64 {
	t.Helper()
	out := make([]float64, len(s))
	for i, v := range s {
		var err error
		if out[i], err = strconv.ParseFloat(v, 64); err != nil {
			t.Fatal(err)
		}
	}
	return out
}

// syntheticSmall reads the products of testdata/synthetic-small as a design
// (rows are sorted by market there).
func syntheticSmall(t *testing.T) (Design, map[string][]string) {
	t.Helper()
	cols := readCSV(t, "../testdata/synthetic-small/products.csv")
	d := Design{Product: cols["product"], Market: cols["market"], Price: floats(t, cols["price"]), PriceName: "price"}
	owner := map[string]int{}
	for i, f := range cols["firm"] {
		if _, ok := owner[f]; !ok {
			owner[f] = len(owner)
		}
		d.Firm = append(d.Firm, owner[f])
		if i == 0 || d.Market[i] != d.Market[i-1] {
			if i > 0 {
				d.Markets[len(d.Markets)-1].End = i
			}
			d.Markets = append(d.Markets, contraction.Span{Start: i})
		}
	}
	d.Markets[len(d.Markets)-1].End = len(d.Market)
	return d, cols
}

// TestSumsMatchSyntheticSmall: the built rival sums and squared differences
// for x1 and x2 agree with the instrument columns shipped in
// testdata/synthetic-small/products.csv, computed there by an independent
// numpy program (see its README): z_own_* and z_rival_* are the own and
// rival sums, z_diff_* the sum of squared differences to all of the market's
// other products, sqdiff_own + sqdiff_rival here.
func TestSumsMatchSyntheticSmall(t *testing.T) {
	d, raw := syntheticSmall(t)
	if len(d.Markets) != 40 {
		t.Fatalf("%d markets, the README says 40", len(d.Markets))
	}
	xs := [][]float64{floats(t, raw["x1"]), floats(t, raw["x2"])}
	names, cols, _, err := Build([]string{"rival-sums", "differentiation-quadratic"}, d, []string{"x1", "x2"}, xs)
	if err != nil {
		t.Fatal(err)
	}
	built := map[string][]float64{}
	for c, name := range names {
		built[name] = cols[c]
	}
	// Measured: the own sums agree exactly, the rival sums and squared
	// differences to within 3.9e-16 relative to max(1, |value|), a rounding
	// or two from adding in a different order. Tolerance 1e-15.
	const tol = 1e-15
	tests := []struct {
		ref   string
		parts []string
	}{
		{"z_own_x1", []string{"own_sum_x1"}},
		{"z_rival_x1", []string{"rival_sum_x1"}},
		{"z_own_x2", []string{"own_sum_x2"}},
		{"z_rival_x2", []string{"rival_sum_x2"}},
		{"z_diff_x1", []string{"sqdiff_own_x1", "sqdiff_rival_x1"}},
		{"z_diff_x2", []string{"sqdiff_own_x2", "sqdiff_rival_x2"}},
	}
	for _, tc := range tests {
		t.Run(tc.ref, func(t *testing.T) {
			want := floats(t, raw[tc.ref])
			worst := 0.0
			for i, w := range want {
				got := 0.0
				for _, p := range tc.parts {
					c, ok := built[p]
					if !ok {
						t.Fatalf("no column %q in %v", p, names)
					}
					got += c[i]
				}
				worst = math.Max(worst, math.Abs(got-w)/math.Max(1, math.Abs(w)))
			}
			t.Logf("%s: largest difference %.2g", tc.ref, worst)
			if worst > tol {
				t.Errorf("largest difference %.3g exceeds %g", worst, tol)
			}
		})
	}
}
