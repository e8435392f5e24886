package merger

import (
	"math"
	"slices"
	"testing"
)

func TestTopIndices(t *testing.T) {
	nan := math.NaN()
	tests := []struct {
		name string
		keys []float64
		n    int
		want []int
	}{
		{"largest first", []float64{1, 5, 3}, 2, []int{1, 2}},
		{"ties in index order", []float64{2, 7, 2, 7}, 4, []int{1, 3, 0, 2}},
		{"NaN last, even after −Inf", []float64{nan, -1, math.Inf(-1), 4}, 4, []int{3, 1, 2, 0}},
		{"n above count", []float64{1, 2}, 5, []int{1, 0}},
		{"none", nil, 3, []int{}},
		{"n of 0", []float64{1}, 0, []int{}},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			got := TopIndices(tc.n, len(tc.keys), func(i int) float64 { return tc.keys[i] })
			if !slices.Equal(got, tc.want) {
				t.Errorf("TopIndices(%d, %v) = %v, want %v", tc.n, tc.keys, got, tc.want)
			}
		})
	}
}
