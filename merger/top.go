package merger

import (
	"math"
	"slices"
	"sort"
)

// TopIndices returns the indices, among 0, …, count−1, of the n items with
// the largest key, largest first: ties keep index order, and a NaN key
// sorts after every number (a market without a post-merger equilibrium is
// shown last, if at all).
func TopIndices(n, count int, key func(i int) float64) []int {
	idx := make([]int, count)
	k := make([]float64, count)
	for i := range idx {
		idx[i], k[i] = i, key(i)
	}
	sort.SliceStable(idx, func(a, b int) bool {
		x, y := k[idx[a]], k[idx[b]]
		return !math.IsNaN(x) && (math.IsNaN(y) || x > y)
	})
	return slices.Clip(idx[:max(0, min(n, count))])
}
