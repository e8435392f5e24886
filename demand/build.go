package demand

import (
	"fmt"
	"strings"

	"rcdemand/contraction"
	"rcdemand/data"
	"rcdemand/instruments"
)

// Generators are the instrument sets [instruments] generate accepts.
var Generators = []string{"rival-sums", "own-sums", "differentiation-local", "differentiation-quadratic", "hausman", "optimal"}

// BuildInstruments builds the instrument sets named in generate (except
// "optimal", which needs a first estimate) from the exogenous characteristics
// xs (named xNames, the constant excluded), markets in parallel. Names follow
// the scheme of package instruments.
func BuildInstruments(generate []string, prod *data.Products, xNames []string, xs [][]float64) ([]string, [][]float64, error) {
	var names []string
	var cols [][]float64
	n := prod.Len()
	var firm []int
	needFirm := false
	for _, g := range generate {
		if !contains(Generators, g) {
			return nil, nil, fmt.Errorf("[instruments] generate: unknown set %q (known: %s)", g, strings.Join(Generators, ", "))
		}
		if g != "hausman" && g != "optimal" {
			needFirm = true
		}
	}
	if needFirm {
		if prod.Firm == nil {
			return nil, nil, fmt.Errorf("%s: built instruments need the firm column %q", prod.File, prod.Cols.Firm)
		}
		firm = indexOf(prod.Firm)
	}
	perMarket := func(fn func(x, own, rival []float64, f []int), x []float64) (own, rival []float64) {
		own, rival = make([]float64, n), make([]float64, n)
		contraction.ForEach(len(prod.Markets), func(_, t int) {
			m := prod.Markets[t]
			var xm []float64
			if x != nil {
				xm = x[m.Start:m.End]
			}
			fn(xm, own[m.Start:m.End], rival[m.Start:m.End], firm[m.Start:m.End])
		})
		return own, rival
	}
	add := func(name string, col []float64) {
		names = append(names, name)
		cols = append(cols, col)
	}
	continuous := func(x []float64) bool {
		seen := map[float64]bool{}
		for _, v := range x {
			seen[v] = true
			if len(seen) > 2 {
				return true
			}
		}
		return false
	}
	for _, g := range generate {
		switch g {
		case "rival-sums", "own-sums":
			for k, x := range xs {
				own, rival := perMarket(func(x, o, r []float64, f []int) { instruments.Sums(x, f, o, r) }, x)
				add("own_sum_"+xNames[k], own)
				if g == "rival-sums" {
					add("rival_sum_"+xNames[k], rival)
				}
			}
			own, rival := perMarket(func(_, o, r []float64, f []int) { instruments.Counts(f, o, r) }, nil)
			add("n_own", own)
			if g == "rival-sums" {
				add("n_rival", rival)
			}
		case "differentiation-local", "differentiation-quadratic":
			for k, x := range xs {
				if !continuous(x) {
					continue
				}
				if g == "differentiation-local" {
					band := instruments.SD(x)
					own, rival := perMarket(func(x, o, r []float64, f []int) { instruments.Local(x, f, band, o, r) }, x)
					add("local_own_"+xNames[k], own)
					add("local_rival_"+xNames[k], rival)
				} else {
					own, rival := perMarket(func(x, o, r []float64, f []int) { instruments.SquaredDiffs(x, f, o, r) }, x)
					add("sqdiff_own_"+xNames[k], own)
					add("sqdiff_rival_"+xNames[k], rival)
				}
			}
		case "hausman":
			h, err := instruments.Hausman(prod.Product, prod.Market, prod.Price)
			if err != nil {
				if se, ok := err.(*instruments.SingleMarketError); ok {
					return nil, nil, &data.InputError{File: prod.File, Row: prod.Row(se.Row), Column: prod.Cols.Product, Msg: se.Error()}
				}
				return nil, nil, err
			}
			add("hausman_"+prod.Cols.Price, h)
		}
	}
	return names, cols, nil
}
