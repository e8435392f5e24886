package contraction

import "golang.org/x/sys/cpu"

// useVector reports whether the AVX2/FMA exponential can run here.
var useVector = cpu.X86.HasAVX2 && cpu.X86.HasFMA

//go:noescape
func expAVX2(x []float64)

//go:noescape
func dotAVX2(x, y []float64) float64

//go:noescape
func axpyAVX2(a float64, x, y []float64)
