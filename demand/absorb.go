package demand

import "math"

// demeaner removes fixed effects by alternating projections (exact in one
// pass for a single set of effects).
type demeaner struct {
	groups [][]int
}

func (d *demeaner) apply(v []float64) {
	for iter := 0; iter < 10000; iter++ {
		change := 0.0
		for _, g := range d.groups {
			ng := 0
			for _, k := range g {
				ng = max(ng, k+1)
			}
			sum := make([]float64, ng)
			cnt := make([]float64, ng)
			for i, k := range g {
				sum[k] += v[i]
				cnt[k]++
			}
			for i, k := range g {
				mu := sum[k] / cnt[k]
				v[i] -= mu
				change = math.Max(change, math.Abs(mu))
			}
		}
		if len(d.groups) == 1 || change < 1e-13 {
			return
		}
	}
}
