package contraction

import (
	"os"

	"golang.org/x/sys/cpu"
)

// useVector reports whether the AVX2/FMA kernels run here. Setting the
// environment variable RCDEMAND_NO_ASM (to anything) selects the portable
// kernels, for comparison and for testing them on machines with AVX2.
var useVector = cpu.X86.HasAVX2 && cpu.X86.HasFMA && os.Getenv("RCDEMAND_NO_ASM") == ""

//go:noescape
func expAVX2(x []float64)

//go:noescape
func dotAVX2(x, y []float64) float64

//go:noescape
func axpyAVX2(a float64, x, y []float64)

//go:noescape
func logAVX2(dst, x []float64) (special bool)
