package contraction

import "gonum.org/v1/gonum/floats"

// dot returns Σ x[i]·y[i] (len(y) ≥ len(x)): the AVX2 kernel for the bulk
// when available, gonum's otherwise and for the tail.
func dot(x, y []float64) float64 {
	if !useVector {
		return floats.Dot(x, y[:len(x)])
	}
	n := len(x) &^ 15
	s := dotAVX2(x[:n], y[:n])
	for i := n; i < len(x); i++ {
		s += x[i] * y[i]
	}
	return s
}

// axpy sets y[i] += a·x[i] for i < len(x) (len(y) ≥ len(x)).
func axpy(a float64, x, y []float64) {
	if !useVector {
		floats.AddScaled(y[:len(x)], a, x)
		return
	}
	n := len(x) &^ 15
	axpyAVX2(a, x[:n], y[:n])
	for i := n; i < len(x); i++ {
		y[i] += a * x[i]
	}
}
