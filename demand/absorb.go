package demand

import (
	"fmt"
	"math"
	"strings"
)

// demeaner removes fixed effects by alternating projections (exact in one
// pass for a single set of effects).
type demeaner struct {
	groups [][]int     // per set of effects, the group of each row
	counts [][]float64 // per set, the rows in each group
	size   int         // the most groups of a set: the length of applyWith's scratch
}

func newDemeaner(groups [][]int) *demeaner {
	d := &demeaner{groups: groups}
	for _, g := range groups {
		ng := 0
		for _, k := range g {
			ng = max(ng, k+1)
		}
		cnt := make([]float64, ng)
		for _, k := range g {
			cnt[k]++
		}
		d.counts = append(d.counts, cnt)
		d.size = max(d.size, ng)
	}
	return d
}

// apply removes the fixed effects from v.
func (d *demeaner) apply(v []float64) { d.applyWith(v, make([]float64, d.size)) }

// applyWith is apply with sum (d.size long) as its scratch, for the
// objective's evaluations: it allocates nothing.
func (d *demeaner) applyWith(v, sum []float64) {
	for iter := 0; iter < 10000; iter++ {
		change := 0.0
		for s, g := range d.groups {
			cnt := d.counts[s]
			sum := sum[:len(cnt)]
			clear(sum)
			for i, k := range g {
				sum[k] += v[i]
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

// absorbLinear removes the fixed effects from the columns of X1 and of the
// excluded instruments (zcols beyond the exogenous X1 columns), and refuses
// a column that the fixed effects absorb entirely: one that does not vary
// within the groups of [demand] absorb (a product-level characteristic with
// product effects) is collinear with them, and its coefficient is not
// identified.
func (m *Model) absorbLinear(x1cols, zcols [][]float64) error {
	spec := m.Spec
	check := func(section, name string, v []float64) error {
		before := 0.0
		for _, x := range v {
			before = math.Max(before, math.Abs(x))
		}
		m.absorb.apply(v)
		after := 0.0
		for _, x := range v {
			after = math.Max(after, math.Abs(x))
		}
		if after <= 1e-10*before || before == 0 {
			return fmt.Errorf("%s: %s column %q is collinear with the fixed effects of [demand] absorb = [%s]: it does not vary within %s, so the fixed effects absorb it; remove it from %s",
				spec.File, section, name, quoteList(spec.Demand.Absorb, len(spec.Demand.Absorb)), strings.Join(spec.Demand.Absorb, " × "), section)
		}
		return nil
	}
	for k, v := range x1cols {
		if err := check("[demand] linear", m.X1Names[k], v); err != nil {
			return err
		}
	}
	nx := len(zcols) - len(spec.Instruments.Excluded)
	for k, v := range zcols {
		if k < nx {
			m.absorb.apply(v) // a copy of an X1 column, checked above
			continue
		}
		if err := check("[instruments] excluded", m.ZNames[k], v); err != nil {
			return err
		}
	}
	return nil
}
