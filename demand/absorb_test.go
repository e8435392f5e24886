package demand

import (
	"math"
	"slices"
	"testing"
)

// TestDemeanerTwoWay: with two sets of effects the alternating projections
// leave every group mean of both sets at zero; applyWith gives apply's
// numbers to the bit and allocates nothing.
func TestDemeanerTwoWay(t *testing.T) {
	n := 60
	market, product := make([]int, n), make([]int, n)
	v := make([]float64, n)
	for i := range v {
		market[i], product[i] = i/6, (i*7)%9
		v[i] = math.Sin(float64(i)*1.3) + float64(market[i]) - 0.5*float64(product[i])
	}
	d := newDemeaner([][]int{market, product})
	if d.size != 10 {
		t.Fatalf("scratch size %d, want 10", d.size)
	}
	want := slices.Clone(v)
	d.apply(want)
	for s, g := range d.groups {
		sum := make([]float64, len(d.counts[s]))
		for i, k := range g {
			sum[k] += want[i]
		}
		for k, x := range sum {
			if math.Abs(x/d.counts[s][k]) > 1e-12 {
				t.Errorf("set %d group %d: mean %.3g after demeaning", s, k, x/d.counts[s][k])
			}
		}
	}
	scratch := make([]float64, d.size)
	got := slices.Clone(v)
	d.applyWith(got, scratch)
	if !slices.Equal(got, want) {
		t.Error("applyWith differs from apply")
	}
	w := slices.Clone(v)
	if a := testing.AllocsPerRun(5, func() { copy(w, v); d.applyWith(w, scratch) }); a != 0 {
		t.Errorf("%v allocations", a)
	}
}
