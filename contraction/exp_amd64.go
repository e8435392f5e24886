package contraction

import "golang.org/x/sys/cpu"

// useVector reports whether the AVX2/FMA exponential can run here.
var useVector = cpu.X86.HasAVX2 && cpu.X86.HasFMA

//go:noescape
func expAVX2(x []float64)
