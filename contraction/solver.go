package contraction

import "math"

// LogitStart returns δ_j = ln s_j − ln s_0 for every row (Berry 1994), the
// exact inversion when θ2 = 0 and the default starting point otherwise.
func (p *Problem) LogitStart() []float64 {
	d := make([]float64, len(p.LogShare))
	for _, m := range p.Products {
		logitStart(p.LogShare[m.Start:m.End], d[m.Start:m.End])
	}
	return d
}

// logitStart writes δ_j = ln s_j − ln s_0 for one market into delta.
func logitStart(logShare, delta []float64) {
	s0 := 1.0
	for _, l := range logShare {
		s0 -= math.Exp(l)
	}
	l0 := math.Log(s0)
	for j, l := range logShare {
		delta[j] = l - l0
	}
}

// Start writes the inversion's starting point for the current market from
// its observed log shares into delta: the family's own when its Market is a
// Starter, the logit inversion ln s_j − ln s_0 otherwise.
func (w *Worker) Start(logShare, delta []float64) {
	if st, ok := w.Market.(Starter); ok {
		st.Start(logShare, delta)
		return
	}
	logitStart(logShare, delta)
}

// Summary describes one Solve over all markets.
type Summary struct {
	Iterations    int // map evaluations, summed over markets
	MaxIterations int // the most any market needed
	Failures      int // markets that did not converge or whose Jacobian is singular
}

// Solver inverts shares for all markets of a Problem in parallel, keeping the
// last δ of each market as the next starting point.
type Solver struct {
	Problem       *Problem
	Tolerance     float64 // on max|Δδ|; default 1e-14
	MaxIterations int     // map evaluations per market; default 10000
	Accelerate    bool    // SQUAREM (default true from NewSolver)

	Delta      []float64 // N, the δ of the last Solve
	Iterations []int     // per market, last Solve
	Failed     []bool    // per market, last Solve

	cold    []bool      // per market: not solved since NewSolver or Reset
	chord   [][]float64 // per market, Cholesky factor of ∂s/∂δ at its last solution
	chordOK []bool      // chord[t] is valid
	pool    *Pool[*Worker]
}

// NewSolver returns a SQUAREM solver at tolerance 1e-14 for p.
func NewSolver(p *Problem) (*Solver, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	s := &Solver{Problem: p, Tolerance: 1e-14, MaxIterations: 10000, Accelerate: true}
	s.Delta = p.LogitStart()
	T := len(p.Products)
	s.Iterations = make([]int, T)
	s.cold = make([]bool, T)
	for t := range s.cold {
		s.cold[t] = true
	}
	s.chord = make([][]float64, T)
	s.chordOK = make([]bool, T)
	for t, m := range p.Products {
		s.chord[t] = make([]float64, m.Len()*m.Len())
	}
	s.Failed = make([]bool, T)
	s.pool = NewPool(p.NewWorker)
	return s, nil
}

// Predict moves the stored δ of every market that converged to a first-order
// prediction at a new θ2: δ ← δ + (∂δ/∂θ2)·dtheta, with ddelta (N×P) from an
// earlier Solve near the current point. A good prediction makes the next
// inversion start close to its answer; it does not change what it converges
// to.
func (s *Solver) Predict(ddelta, dtheta []float64) {
	P := len(dtheta)
	for t, m := range s.Problem.Products {
		if s.Failed[t] {
			continue
		}
		for n := m.Start; n < m.End; n++ {
			row := ddelta[n*P : (n+1)*P]
			d := 0.0
			for q, x := range dtheta {
				d += row[q] * x
			}
			s.Delta[n] += d
		}
	}
}

// Reset makes the next Solve start every market from the worker's start
// (the family's own, see Starter, or the logit inversion), with the
// contraction (forgetting the factors the chord steps use).
func (s *Solver) Reset() {
	for t := range s.chordOK {
		s.chordOK[t], s.cold[t] = false, true
	}
}

// Solve inverts all markets at θ2 = theta. When ddelta is not nil (N×P,
// row-major) it also fills ∂δ/∂θ2. A market solved for the first time since
// NewSolver or Reset, or that failed before, starts from the worker's start
// (the family's own, see Starter, or the logit inversion); any other starts
// from its δ of the last Solve, moved by Predict. A θ2 with a value that is
// not finite fails every market without an inversion.
func (s *Solver) Solve(theta, ddelta []float64) Summary {
	p := s.Problem
	P := p.NumParams()
	tol := s.Tolerance
	if tol <= 0 {
		tol = 1e-14
	}
	maxIter := s.MaxIterations
	if maxIter <= 0 {
		maxIter = 10000
	}
	finite := true
	for _, x := range theta {
		finite = finite && !math.IsNaN(x) && !math.IsInf(x, 0)
	}
	s.pool.Run(len(p.Products), func(w *Worker, t int) {
		if !finite {
			s.Iterations[t], s.Failed[t], s.chordOK[t] = 0, true, false
			return
		}
		m := p.Products[t]
		w.Set(t, theta)
		delta := s.Delta[m.Start:m.End]
		logShare := p.LogShare[m.Start:m.End]
		if s.Failed[t] || s.cold[t] {
			w.Start(logShare, delta)
		}
		s.cold[t] = false
		var it int
		ok := false
		if s.chordOK[t] && !s.Failed[t] && s.Accelerate {
			it, ok = w.ChordInvert(delta, logShare, s.chord[t], tol, 50)
		}
		if !ok {
			var it1 int
			it1, ok = w.Invert(delta, logShare, tol, maxIter, s.Accelerate)
			it += it1
		}
		if !ok && !s.Failed[t] {
			// A warm start can be worse than the logit start: try that once.
			w.Start(logShare, delta)
			var it2 int
			it2, ok = w.Invert(delta, logShare, tol, maxIter, s.Accelerate)
			it += it2
		}
		s.Iterations[t] = it
		if ok && ddelta != nil {
			ok = w.DeltaJacobian(delta, ddelta[m.Start*P:m.End*P], s.chord[t])
			s.chordOK[t] = ok && w.factored
		}
		s.Failed[t] = !ok
	})
	var sum Summary
	for t, it := range s.Iterations {
		sum.Iterations += it
		sum.MaxIterations = max(sum.MaxIterations, it)
		if s.Failed[t] {
			sum.Failures++
		}
	}
	return sum
}
