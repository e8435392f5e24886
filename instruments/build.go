package instruments

import (
	"fmt"
	"math"
)

// Sums writes, for one market, the sum of x over each product's other own
// products into own and over rivals' products into rival.
func Sums(x []float64, firm []int, own, rival []float64) {
	for j := range x {
		o, r := 0.0, 0.0
		for k := range x {
			switch {
			case k == j:
			case firm[k] == firm[j]:
				o += x[k]
			default:
				r += x[k]
			}
		}
		own[j], rival[j] = o, r
	}
}

// Counts writes the number of other own products and of rival products.
func Counts(firm []int, own, rival []float64) {
	for j := range firm {
		o, r := 0, 0
		for k := range firm {
			switch {
			case k == j:
			case firm[k] == firm[j]:
				o++
			default:
				r++
			}
		}
		own[j], rival[j] = float64(o), float64(r)
	}
}

// NestSums writes, for one market, the sum of x over each product's other
// products of the same nest into all and over the products of other owners
// in the same nest into rival (counts when x is nil; rival is left alone
// when firm is nil).
func NestSums(x []float64, nest, firm []int, all, rival []float64) {
	for j := range nest {
		a, r := 0.0, 0.0
		for k := range nest {
			if k == j || nest[k] != nest[j] {
				continue
			}
			v := 1.0
			if x != nil {
				v = x[k]
			}
			a += v
			if firm != nil && firm[k] != firm[j] {
				r += v
			}
		}
		all[j] = a
		if firm != nil {
			rival[j] = r
		}
	}
}

// Local writes the number of own and rival products whose x lies within band
// of each product's x (strictly).
func Local(x []float64, firm []int, band float64, own, rival []float64) {
	for j := range x {
		o, r := 0, 0
		for k := range x {
			if k == j || math.Abs(x[k]-x[j]) >= band {
				continue
			}
			if firm[k] == firm[j] {
				o++
			} else {
				r++
			}
		}
		own[j], rival[j] = float64(o), float64(r)
	}
}

// SquaredDiffs writes the sums of squared differences in x to own and rival
// products.
func SquaredDiffs(x []float64, firm []int, own, rival []float64) {
	for j := range x {
		o, r := 0.0, 0.0
		for k := range x {
			if k == j {
				continue
			}
			d := x[k] - x[j]
			if firm[k] == firm[j] {
				o += d * d
			} else {
				r += d * d
			}
		}
		own[j], rival[j] = o, r
	}
}

// SD returns the population standard deviation of x.
func SD(x []float64) float64 {
	m := 0.0
	for _, v := range x {
		m += v
	}
	m /= float64(len(x))
	s := 0.0
	for _, v := range x {
		s += (v - m) * (v - m)
	}
	return math.Sqrt(s / float64(len(x)))
}

// Hausman returns, for every row, the mean of price over the rows of the same
// product in other markets. It fails when a product is seen in one market
// only, naming the product and its row (0-based index in the rows given).
func Hausman(product, market []string, price []float64) ([]float64, error) {
	sum := map[string]float64{}
	cnt := map[string]int{}
	for i, p := range product {
		sum[p] += price[i]
		cnt[p]++
	}
	out := make([]float64, len(product))
	for i, p := range product {
		if cnt[p] < 2 {
			return nil, &SingleMarketError{Product: p, Market: market[i], Row: i}
		}
		out[i] = (sum[p] - price[i]) / float64(cnt[p]-1)
	}
	return out, nil
}

// SingleMarketError reports a product that a Hausman instrument cannot use.
type SingleMarketError struct {
	Product, Market string
	Row             int
}

func (e *SingleMarketError) Error() string {
	return fmt.Sprintf("product %q appears only in market %q, so it has no price in other markets for a Hausman instrument", e.Product, e.Market)
}
