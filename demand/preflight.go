package demand

import (
	"fmt"

	"gonum.org/v1/gonum/mat"
)

// Preflight runs the checks Estimate makes before optimising — instruments
// of full rank, as many moments as parameters, an invertible Z'Z and
// X1'ZWZ'X1 — so that a spec that passes "rcdemand check" does not then
// fail at the start of estimation.
func Preflight(m *Model) error {
	_, _, err := m.firstStepIV()
	return err
}

// firstStepIV returns the model's linear IV engine with the step-1 weight
// W1 = (Z'Z/N)⁻¹ set, and W1, after the checks of Preflight.
func (m *Model) firstStepIV() (*IV, *mat.SymDense, error) {
	file := m.Spec.File
	iv, err := m.NewIV()
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %v", file, err)
	}
	M, K, P := iv.M(), iv.K(), len(m.Params)
	if M < K+P {
		return nil, nil, fmt.Errorf("%s: %d moments for %d parameters (%d linear, %d nonlinear): add instruments", file, M, K+P, K, P)
	}
	W1, err := iv.InitialWeight()
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %v", file, err)
	}
	if err := iv.SetWeight(W1); err != nil {
		return nil, nil, fmt.Errorf("%s: %v", file, err)
	}
	return iv, W1, nil
}
