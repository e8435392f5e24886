package main

import (
	"fmt"

	"rcdemand/demand"
)

// loadFitted reads a results file, the spec and data it points to, and
// rebuilds the fitted model at the estimates.
func loadFitted(resultsPath string) (*demand.Results, *demand.Fitted, error) {
	res, err := demand.ReadResults(resultsPath)
	if err != nil {
		return nil, nil, err
	}
	spec, err := demand.ReadSpec(res.SpecPath(resultsPath))
	if err != nil {
		return nil, nil, fmt.Errorf("%s: spec_file: %w", resultsPath, err)
	}
	m, err := demand.Load(spec)
	if err != nil {
		return nil, nil, err
	}
	if len(res.Beta) != len(m.X1Names) || len(res.Sigma)+len(res.Pi) != len(m.Params) {
		return nil, nil, fmt.Errorf("%s: the results do not match the model of %s (was the spec changed after estimating?)", resultsPath, spec.File)
	}
	for k, c := range res.Beta {
		if c.Name != m.X1Names[k] {
			return nil, nil, fmt.Errorf("%s: beta %q does not match column %q of the spec", resultsPath, c.Name, m.X1Names[k])
		}
	}
	f, err := demand.NewFitted(m, res.BetaValues(), res.Theta2())
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", resultsPath, err)
	}
	return res, f, nil
}
