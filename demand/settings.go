package demand

import (
	"errors"
	"time"
)

// Settings are the numbers that steer an estimation: tolerances, limits,
// starting points and the seed. SettingsOf fills them from a spec's
// [estimation] section; callers may then change them (for example the
// number of starts from the command line).
type Settings struct {
	InnerTolerance     float64       // the inversion's max|Δδ| (default 1e-14)
	InnerMaxIterations int           // share-map evaluations per market and inversion (default 10000)
	GradientTolerance  float64       // convergence: ‖g‖∞ ≤ this·max(1, Q) (default 1e-6)
	MaxIterations      int           // optimiser iterations per step (default 500)
	MaxObjectiveCalls  int           // objective evaluations over the whole run, all starts (default 5000)
	TimeLimit          time.Duration // wall-clock limit of the run (0: none)
	Starts             int           // starting points for step 1 (1: the spec's start only)
	Seed               uint64        // of the random starting points
}

// SettingsOf returns the settings of a spec, with one start and seed 1.
func SettingsOf(spec *Spec) Settings {
	e := spec.Estimation
	return Settings{
		InnerTolerance:     e.InnerTolerance,
		InnerMaxIterations: e.InnerMaxIter,
		GradientTolerance:  e.GradientTolerance,
		MaxIterations:      e.MaxIterations,
		MaxObjectiveCalls:  e.MaxObjectiveCalls,
		TimeLimit:          time.Duration(e.TimeLimit * float64(time.Second)),
		Starts:             1,
		Seed:               1,
	}
}

// Monitor connects an estimation to its caller. Both fields may be nil.
type Monitor struct {
	// Progress is called after every optimiser iteration.
	Progress func(step, iteration int, objective float64)
	// Stop, when closed, makes the estimation return ErrInterrupted.
	Stop <-chan struct{}
}

// ErrInterrupted is returned when Monitor.Stop is closed.
var ErrInterrupted = errors.New("interrupted")

// stopped reports whether the monitor's stop channel is closed.
func (mon Monitor) stopped() bool {
	if mon.Stop == nil {
		return false
	}
	select {
	case <-mon.Stop:
		return true
	default:
		return false
	}
}
