//go:build !amd64

package contraction

const useVector = false

func expAVX2(x []float64) { panic("contraction: no vector exponential on this architecture") }
