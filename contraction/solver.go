package contraction

import (
	"fmt"
	"math"
)

// Span is a half-open block of rows [Start, End).
type Span struct{ Start, End int }

// Param places one element of θ2: it multiplies random column Col of X2 and
// agent variable Var, so ∂μ_ij/∂θ_p = x2_j,Col · v_i,Var.
type Param struct{ Col, Var int }

// Problem is the data of the share inversion for all markets.
type Problem struct {
	K2       int         // random characteristic columns
	Params   []Param     // the elements of θ2
	X2       []float64   // N×K2 row-major
	LogShare []float64   // N, ln s_obs
	Products []Span      // rows of each market
	Agents   []Span      // agents of each market
	Weight   []float64   // one weight per agent
	Vars     [][]float64 // agent variables, one slice over all agents per variable
}

// Validate checks the dimensions of p.
func (p *Problem) Validate() error {
	n := len(p.LogShare)
	if len(p.X2) != n*p.K2 {
		return fmt.Errorf("contraction: X2 has %d values, want %d×%d", len(p.X2), n, p.K2)
	}
	if len(p.Products) != len(p.Agents) {
		return fmt.Errorf("contraction: %d product spans but %d agent spans", len(p.Products), len(p.Agents))
	}
	for _, q := range p.Params {
		if q.Col < 0 || q.Col >= p.K2 || q.Var < 0 || q.Var >= len(p.Vars) {
			return fmt.Errorf("contraction: parameter %+v out of range", q)
		}
	}
	for _, v := range p.Vars {
		if len(v) != len(p.Weight) {
			return fmt.Errorf("contraction: an agent variable has %d values for %d agents", len(v), len(p.Weight))
		}
	}
	return nil
}

// LogitStart returns δ_j = ln s_j − ln s_0 for every row (Berry 1994), the
// exact inversion when θ2 = 0 and the default starting point otherwise.
func (p *Problem) LogitStart() []float64 {
	d := make([]float64, len(p.LogShare))
	for _, m := range p.Products {
		s0 := 1.0
		for n := m.Start; n < m.End; n++ {
			s0 -= math.Exp(p.LogShare[n])
		}
		l0 := math.Log(s0)
		for n := m.Start; n < m.End; n++ {
			d[n] = p.LogShare[n] - l0
		}
	}
	return d
}

// MaxSizes returns the largest number of products and of agents in a market.
func (p *Problem) MaxSizes() (maxJ, maxI int) {
	for t := range p.Products {
		maxJ = max(maxJ, p.Products[t].End-p.Products[t].Start)
		maxI = max(maxI, p.Agents[t].End-p.Agents[t].Start)
	}
	return
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

	start   []float64
	chord   [][]float64 // per market, Cholesky factor of ∂s/∂δ at its last solution
	chordOK []bool      // chord[t] is valid
	cols    []int       // Col of each parameter
	work    []*Workspace
	vars    [][][]float64 // per worker, per parameter: the market's agent values
}

// NewSolver returns a SQUAREM solver at tolerance 1e-14 for p.
func NewSolver(p *Problem) (*Solver, error) {
	if err := p.Validate(); err != nil {
		return nil, err
	}
	s := &Solver{Problem: p, Tolerance: 1e-14, MaxIterations: 10000, Accelerate: true}
	s.start = p.LogitStart()
	for _, q := range p.Params {
		s.cols = append(s.cols, q.Col)
	}
	s.Delta = append([]float64(nil), s.start...)
	T := len(p.Products)
	s.Iterations = make([]int, T)
	s.chord = make([][]float64, T)
	s.chordOK = make([]bool, T)
	for t, m := range p.Products {
		s.chord[t] = make([]float64, (m.End-m.Start)*(m.End-m.Start))
	}
	s.Failed = make([]bool, T)
	s.work = make([]*Workspace, Workers())
	s.vars = make([][][]float64, Workers())
	for w := range s.work {
		s.work[w] = p.NewWorkspace()
		s.vars[w] = make([][]float64, len(p.Params))
	}
	return s, nil
}

// NewWorkspace returns a workspace sized for every market of p.
func (p *Problem) NewWorkspace() *Workspace {
	maxJ, maxI := p.MaxSizes()
	return NewWorkspace(maxJ, maxI, p.K2, len(p.Params))
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

// Reset makes the next Solve start every market from the logit inversion,
// with the contraction (forgetting the factors the chord steps use).
func (s *Solver) Reset() {
	copy(s.Delta, s.start)
	for t := range s.chordOK {
		s.chordOK[t] = false
	}
}

// FillTastes writes the I×K2 agent coefficient deviations of market t at θ2
// into dst: a_ik = Σ_{p: Col_p = k} θ_p v_i,Var_p.
func (p *Problem) FillTastes(dst []float64, t int, theta []float64) {
	a := p.Agents[t]
	I := a.End - a.Start
	k2 := p.K2
	dst = dst[:I*k2]
	for i := range dst {
		dst[i] = 0
	}
	for q, par := range p.Params {
		th := theta[q]
		if th == 0 {
			continue
		}
		v := p.Vars[par.Var][a.Start:a.End]
		for i, x := range v {
			dst[i*k2+par.Col] += th * x
		}
	}
}

// Prepare points w at market t for parameters theta.
func (p *Problem) Prepare(w *Workspace, t int, theta []float64) {
	a := p.Agents[t]
	m := p.Products[t]
	p.FillTastes(w.Tastes(a.End-a.Start), t, theta)
	w.SetTastes(p.X2[m.Start*p.K2:m.End*p.K2], m.End-m.Start, p.Weight[a.Start:a.End])
}

// Solve inverts all markets at θ2 = theta. When ddelta is not nil (N×P,
// row-major) it also fills ∂δ/∂θ2. A market that failed before starts again
// from the logit inversion.
func (s *Solver) Solve(theta, ddelta []float64) Summary {
	p := s.Problem
	P := len(p.Params)
	tol := s.Tolerance
	if tol <= 0 {
		tol = 1e-14
	}
	maxIter := s.MaxIterations
	if maxIter <= 0 {
		maxIter = 10000
	}
	ForEach(len(p.Products), func(wk, t int) {
		w := s.work[wk]
		m := p.Products[t]
		a := p.Agents[t]
		p.Prepare(w, t, theta)
		delta := s.Delta[m.Start:m.End]
		if s.Failed[t] {
			copy(delta, s.start[m.Start:m.End])
		}
		var it int
		ok := false
		if s.chordOK[t] && !s.Failed[t] && s.Accelerate {
			it, ok = w.ChordInvert(delta, p.LogShare[m.Start:m.End], s.chord[t], tol, 50)
		}
		if !ok {
			var it1 int
			it1, ok = w.Invert(delta, p.LogShare[m.Start:m.End], tol, maxIter, s.Accelerate)
			it += it1
		}
		if !ok && !s.Failed[t] {
			// A warm start can be worse than the logit start: try that once.
			copy(delta, s.start[m.Start:m.End])
			var it2 int
			it2, ok = w.Invert(delta, p.LogShare[m.Start:m.End], tol, maxIter, s.Accelerate)
			it += it2
		}
		s.Iterations[t] = it
		if ok && ddelta != nil {
			vars := s.vars[wk]
			for q, par := range p.Params {
				vars[q] = p.Vars[par.Var][a.Start:a.End]
			}
			ok = w.Jacobians(delta, s.cols, vars, ddelta[m.Start*P:m.End*P])
			s.chordOK[t] = ok && w.Factor(s.chord[t])
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
