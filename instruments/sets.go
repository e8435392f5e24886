package instruments

import (
	"errors"
	"fmt"
	"slices"
	"strings"

	"rcdemand/contraction"
)

// Design describes the products the builders work on.
type Design struct {
	Markets   []contraction.Span // rows of each market, contiguous and in order from row 0
	Firm      []int              // owner index of each row; nil when the table has no firm column
	Product   []string           // product id of each row
	Market    []string           // market id of each row (for messages)
	Price     []float64          // price of each row
	PriceName string             // the price column's name, for "hausman_<price>"
	Nest      []int              // nest index of each row; nil without nests
}

// Sets lists the instrument sets Build accepts.
var Sets = []string{"rival-sums", "own-sums", "differentiation-local", "differentiation-quadratic", "hausman", "nest-counts", "nest-sums"}

// ErrNoFirm is returned (wrapped) by Build when a set that counts products
// by owner is asked for and the design has no firm column.
var ErrNoFirm = errors.New("built instruments need the firm column")

// ErrNoNest is returned (wrapped) by Build when a set over nests is asked
// for and the design has no nests.
var ErrNoNest = errors.New("built instruments need nests")

// Build builds the named sets from the exogenous characteristics xs (named
// names; the constant excluded), markets in parallel. Column names follow
// the scheme in the package documentation; sets come out in the order
// asked, and within a set characteristic by characteristic.
//
// A differentiation set skips a characteristic with two distinct values or
// fewer over the sample; notes holds one line for each characteristic
// skipped, naming the sets that skipped it.
//
// Errors: an unknown set name; a set that needs the firm column when
// d.Firm is nil (wrapping ErrNoFirm); for "hausman", a product seen in one
// market only (a *SingleMarketError, Row indexing the design's rows); and
// slices whose lengths do not match the design's rows.
func Build(sets []string, d Design, names []string, xs [][]float64) (outNames []string, cols [][]float64, notes []string, err error) {
	n, err := d.check(sets, names, xs)
	if err != nil {
		return nil, nil, nil, err
	}
	b := &builder{d: d, n: n}
	skipped := make([][]string, len(xs)) // sets that skipped each characteristic
	for _, set := range sets {
		switch set {
		case "rival-sums", "own-sums":
			b.sums(set == "rival-sums", names, xs)
		case "differentiation-local", "differentiation-quadratic":
			for k, x := range xs {
				if !continuous(x) {
					if !slices.Contains(skipped[k], set) {
						skipped[k] = append(skipped[k], set)
					}
					continue
				}
				b.differentiation(set == "differentiation-local", names[k], x)
			}
		case "nest-counts", "nest-sums":
			b.nest(set == "nest-sums", names, xs)
		case "hausman":
			h, err := Hausman(d.Product, d.Market, d.Price)
			if err != nil {
				return nil, nil, nil, err
			}
			price := d.PriceName
			if price == "" {
				price = "price"
			}
			b.add("hausman_"+price, h)
		}
	}
	for k, by := range skipped {
		if len(by) > 0 {
			notes = append(notes, fmt.Sprintf("characteristic %q is binary (two distinct values or fewer) and was skipped by %s", names[k], strings.Join(by, " and ")))
		}
	}
	return b.names, b.cols, notes, nil
}

// check validates the set names and the design and returns the number of
// rows.
func (d Design) check(sets, names []string, xs [][]float64) (int, error) {
	needFirm, hausman, nest := "", false, ""
	for _, set := range sets {
		switch {
		case !slices.Contains(Sets, set):
			return 0, fmt.Errorf("unknown instrument set %q (known: %s)", set, strings.Join(Sets, ", "))
		case set == "hausman":
			hausman = true
		case strings.HasPrefix(set, "nest-"):
			nest = set
		case needFirm == "":
			needFirm = set
		}
	}
	if needFirm != "" && d.Firm == nil {
		return 0, fmt.Errorf("instrument set %q counts products by owner: %w", needFirm, ErrNoFirm)
	}
	if nest != "" && d.Nest == nil {
		return 0, fmt.Errorf("instrument set %q works within nests: %w", nest, ErrNoNest)
	}
	n := 0
	for t, m := range d.Markets {
		if m.Start != n || m.End < m.Start {
			return 0, fmt.Errorf("market %d spans rows [%d, %d), want contiguous markets from row 0", t, m.Start, m.End)
		}
		n = m.End
	}
	if len(names) != len(xs) {
		return 0, fmt.Errorf("%d characteristic names for %d characteristics", len(names), len(xs))
	}
	type field struct {
		what     string
		rows     int
		required bool
	}
	fields := []field{{"firm", len(d.Firm), false}, {"nest", len(d.Nest), false}, {"product", len(d.Product), hausman},
		{"market", len(d.Market), hausman}, {"price", len(d.Price), hausman}}
	for k, x := range xs {
		fields = append(fields, field{fmt.Sprintf("characteristic %q", names[k]), len(x), true})
	}
	for _, f := range fields {
		if (f.rows > 0 || f.required) && f.rows != n {
			return 0, fmt.Errorf("%s has %d rows, the markets %d", f.what, f.rows, n)
		}
	}
	return n, nil
}

// builder collects built columns.
type builder struct {
	d     Design
	n     int
	names []string
	cols  [][]float64
}

func (b *builder) add(name string, col []float64) {
	b.names = append(b.names, name)
	b.cols = append(b.cols, col)
}

// perMarket runs fn on every market in parallel, with the market's rows of
// x, of the owners and of the nests (each nil when absent from the design)
// and of the own and rival columns it returns.
func (b *builder) perMarket(x []float64, fn func(x []float64, firm, nest []int, own, rival []float64)) (own, rival []float64) {
	own, rival = make([]float64, b.n), make([]float64, b.n)
	contraction.ForEach(len(b.d.Markets), func(t int) {
		m := b.d.Markets[t]
		fn(rows(x, m), rows(b.d.Firm, m), rows(b.d.Nest, m), own[m.Start:m.End], rival[m.Start:m.End])
	})
	return own, rival
}

// rows returns the rows of market m in s, or nil when s is nil.
func rows[T any](s []T, m contraction.Span) []T {
	if s == nil {
		return nil
	}
	return s[m.Start:m.End]
}

// sums adds own_sum_<x> (and rival_sum_<x> when rival) for each
// characteristic, then n_own (and n_rival).
func (b *builder) sums(rival bool, names []string, xs [][]float64) {
	for k, x := range xs {
		o, r := b.perMarket(x, func(x []float64, f, _ []int, o, r []float64) { Sums(x, f, o, r) })
		b.add("own_sum_"+names[k], o)
		if rival {
			b.add("rival_sum_"+names[k], r)
		}
	}
	o, r := b.perMarket(nil, func(_ []float64, f, _ []int, o, r []float64) { Counts(f, o, r) })
	b.add("n_own", o)
	if rival {
		b.add("n_rival", r)
	}
}

// differentiation adds the local (band = the sample standard deviation of
// x) or the quadratic own and rival columns of one characteristic.
func (b *builder) differentiation(local bool, name string, x []float64) {
	if local {
		band := SD(x)
		o, r := b.perMarket(x, func(x []float64, f, _ []int, o, r []float64) { Local(x, f, band, o, r) })
		b.add("local_own_"+name, o)
		b.add("local_rival_"+name, r)
		return
	}
	o, r := b.perMarket(x, func(x []float64, f, _ []int, o, r []float64) { SquaredDiffs(x, f, o, r) })
	b.add("sqdiff_own_"+name, o)
	b.add("sqdiff_rival_"+name, r)
}

// continuous reports whether x takes more than two distinct values.
func continuous(x []float64) bool {
	seen := map[float64]bool{}
	for _, v := range x {
		seen[v] = true
		if len(seen) > 2 {
			return true
		}
	}
	return false
}

// nest adds, for each characteristic (sums) or once (counts), the column
// over the other products of the same nest and, when the design has owners,
// the column over the rivals' products of the same nest: nest_sum_<x> and
// nest_rival_sum_<x>, or n_nest and n_nest_rival.
func (b *builder) nest(sums bool, names []string, xs [][]float64) {
	if !sums {
		names, xs = []string{""}, [][]float64{nil}
	}
	for k, x := range xs {
		all, rival := b.perMarket(x, func(x []float64, f, g []int, a, r []float64) { NestSums(x, g, f, a, r) })
		if sums {
			b.add("nest_sum_"+names[k], all)
		} else {
			b.add("n_nest", all)
		}
		if b.d.Firm != nil {
			if sums {
				b.add("nest_rival_sum_"+names[k], rival)
			} else {
				b.add("n_nest_rival", rival)
			}
		}
	}
}
