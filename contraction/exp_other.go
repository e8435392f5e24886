//go:build !amd64

package contraction

var useVector = false

func expAVX2(x []float64) { panic("contraction: no vector exponential on this architecture") }

func dotAVX2(x, y []float64) float64 { panic("contraction: no vector kernels on this architecture") }

func axpyAVX2(a float64, x, y []float64) {
	panic("contraction: no vector kernels on this architecture")
}

func logAVX2(dst, x []float64) bool { panic("contraction: no vector logarithm on this architecture") }
