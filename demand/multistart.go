package demand

import (
	"fmt"
	"math"
	"math/rand/v2"
	"sort"
	"strings"
)

// refineMinima is how many of the best step-1 minima step 2 starts from.
const refineMinima = 3

// multiStart runs step 1 from the spec's start and from Starts−1 seeded
// random starts, one after the other (each start's markets on the worker
// pool), groups the results into distinct local minima and, with two steps,
// sets W2 at the residuals of the best step-1 minimum and re-optimises step
// 2 from the best few minima under that one W2, so their objectives compare
// (Knittel & Metaxoglou 2014). The lowest step-2 objective wins.
func (e *estimation) multiStart(start []float64) (stageResult, error) {
	starts := e.startingPoints(start)
	results := make([]stageResult, len(starts))
	objs := make([]*objective, len(starts))
	for s, x := range starts {
		mon := e.mon
		if s != 0 {
			mon.Progress = nil
		}
		o := e.obj
		if s > 0 {
			var err error
			if o, err = newObjective(e.m, e.iv, e.set, mon, e.lim); err != nil {
				return stageResult{}, err
			}
			e.objs = append(e.objs, o)
		}
		sr, err := e.step1(o, x)
		if err != nil && s == 0 {
			return stageResult{}, err
		}
		if err != nil {
			sr = stageResult{x: x, q: math.Inf(1), status: InversionFailed}
		}
		results[s], objs[s] = sr, o
	}
	ms := &MultiStart{Starts: len(starts), Minima: groupMinima(results)}
	e.res.MultiStart = ms
	best := ms.Minima[0].Starts[0]
	e.record(1, results[best])
	e.obj = objs[best]
	if e.m.Spec.Estimation.Steps == 1 {
		ms.describe(nil)
		return results[best], nil
	}
	if err := e.secondWeight(results[best].fit.Xi); err != nil {
		return stageResult{}, err
	}
	var final stageResult
	for k, mn := range ms.Minima[:min(refineMinima, len(ms.Minima))] {
		if math.IsInf(mn.Objective, 1) {
			break
		}
		o := objs[mn.Starts[0]]
		sr, err := e.step2(o, mn.Theta2)
		if err != nil {
			return stageResult{}, err
		}
		ms.Refined = append(ms.Refined, Minimum{Objective: sr.q, Theta2: sr.x, Converged: sr.converged, Starts: mn.Starts})
		if k == 0 || sr.q < final.q {
			final, e.obj = sr, o
		}
	}
	ms.describe(ms.Refined)
	e.record(2, final)
	return final, nil
}

// startingPoints returns the spec's start and Starts−1 random ones drawn by
// each parameter's kind (seeded).
func (e *estimation) startingPoints(start []float64) [][]float64 {
	rng := rand.New(rand.NewPCG(e.set.Seed, 0x5eed))
	out := [][]float64{start}
	for s := 1; s < e.set.Starts; s++ {
		x := make([]float64, len(start))
		for i, q := range e.m.Params {
			x[i] = q.RandomStart(rng, start[i])
		}
		out = append(out, x)
	}
	return out
}

// sameMinimum reports whether two step results are the same local minimum:
// objectives within 1e-6 and parameters within 1e-4 (relative).
func sameMinimum(a, b Minimum) bool {
	if math.Abs(a.Objective-b.Objective) > 1e-6*math.Max(1, math.Abs(a.Objective)) {
		return false
	}
	scale := math.Max(1, infNorm(a.Theta2))
	for i := range a.Theta2 {
		if math.Abs(a.Theta2[i]-b.Theta2[i]) > 1e-4*scale {
			return false
		}
	}
	return true
}

// groupMinima groups step results into distinct minima, lowest objective
// first (converged ones before unconverged ones of equal objective).
func groupMinima(results []stageResult) []Minimum {
	var out []Minimum
	for s, r := range results {
		m := Minimum{Objective: r.q, Theta2: r.x, Converged: r.converged, Starts: []int{s}}
		found := false
		for k := range out {
			if sameMinimum(out[k], m) {
				out[k].Starts = append(out[k].Starts, s)
				out[k].Converged = out[k].Converged || m.Converged
				found = true
				break
			}
		}
		if !found {
			out = append(out, m)
		}
	}
	sort.SliceStable(out, func(i, j int) bool {
		if out[i].Converged != out[j].Converged && math.Abs(out[i].Objective-out[j].Objective) <= 1e-6*math.Max(1, math.Abs(out[i].Objective)) {
			return out[i].Converged
		}
		return out[i].Objective < out[j].Objective
	})
	return out
}

// describe says plainly whether the starts agree.
func (ms *MultiStart) describe(refined []Minimum) {
	var converged int
	for _, m := range ms.Minima {
		if m.Converged && !math.IsInf(m.Objective, 1) {
			converged++
		}
	}
	ms.Agree = converged <= 1
	if len(refined) > 1 {
		for _, r := range refined[1:] {
			if !sameMinimum(refined[0], r) {
				ms.Agree = false
			}
		}
	}
	if ms.Agree {
		ms.Note = fmt.Sprintf("the starts that converged (%d of %d) all reached the same minimum", len(ms.Minima[0].Starts), ms.Starts)
		return
	}
	ms.Note = fmt.Sprintf("the starts disagree: step 1 reached %d distinct local minima (objectives %s); the estimate is the lowest step-2 objective among the best %d — check that the conclusions hold at the others",
		converged, formatObjectives(ms.Minima), max(1, len(refined)))
}

func formatObjectives(ms []Minimum) string {
	var parts []string
	for _, m := range ms[:min(len(ms), 6)] {
		parts = append(parts, fmt.Sprintf("%.6g", m.Objective))
	}
	s := strings.Join(parts, ", ")
	if len(ms) > 6 {
		s += ", …"
	}
	return s
}
