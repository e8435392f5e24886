package demand

import (
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
)

// ResultsSchema identifies the results file format.
const ResultsSchema = "rcdemand.results.v1"

// Coef is one estimated parameter.
type Coef struct {
	Name        string  `json:"name"`
	Demographic string  `json:"demographic,omitempty"`
	Value       float64 `json:"value"`
	SE          float64 `json:"se"`
}

// GMMInfo is the fit block of the results.
type GMMInfo struct {
	Steps        int      `json:"steps"`
	Objective    float64  `json:"objective"`
	J            *float64 `json:"j"` // Hansen J; null after one step
	JDF          int      `json:"j_df"`
	JPValue      *float64 `json:"j_pvalue"` // null after one step
	Observations int      `json:"observations"`
	Markets      int      `json:"markets"`
	Moments      int      `json:"moments"`
	Covariance   string   `json:"covariance"`
	Instruments  []string `json:"instruments"`
}

// MarketInner is the inner-loop record of one market.
type MarketInner struct {
	Market     string `json:"market"`
	Iterations int    `json:"inner_iterations"`
	Failures   int    `json:"inner_failures"`
}

// Convergence records how the optimiser and the inner loop ended.
type Convergence struct {
	Converged            bool          `json:"converged"`
	GradientNorm         float64       `json:"gradient_norm"`
	Iterations           int           `json:"iterations"`
	ObjectiveEvaluations int           `json:"objective_evaluations"`
	InnerIterations      int           `json:"inner_iterations"`
	InnerFailures        int           `json:"inner_failures"`
	HessianEigenvalues   []float64     `json:"hessian_eigenvalues,omitempty"`
	Message              string        `json:"message,omitempty"`
	Markets              []MarketInner `json:"markets,omitempty"`
}

// Stage is the record of one GMM step.
type Stage struct {
	Step         int       `json:"step"`
	Objective    float64   `json:"objective"`
	Beta         []float64 `json:"beta"`
	Theta2       []float64 `json:"theta2"`
	GradientNorm float64   `json:"gradient_norm"`
	Iterations   int       `json:"iterations"`
	Evaluations  int       `json:"objective_evaluations"`
	Converged    bool      `json:"converged"`
}

// MultiStart reports a multi-start search (Knittel & Metaxoglou 2014).
type MultiStart struct {
	Starts      int       `json:"starts"`
	ReachedBest int       `json:"reached_best"`
	Objectives  []float64 `json:"objectives"`
	Best        int       `json:"best"`
}

// Matrix is a labelled square matrix.
type Matrix struct {
	Names  []string    `json:"names"`
	Values [][]float64 `json:"values"`
}

// RunInfo describes the run.
type RunInfo struct {
	Version string  `json:"version"`
	Seed    uint64  `json:"seed"`
	Seconds float64 `json:"seconds"`
}

// Results is what an estimation produces; it is written as the results JSON.
type Results struct {
	Schema      string       `json:"schema"`
	SpecFile    string       `json:"spec_file"`
	Beta        []Coef       `json:"beta"`
	Sigma       []Coef       `json:"sigma"`
	Pi          []Coef       `json:"pi"`
	GMM         GMMInfo      `json:"gmm"`
	Convergence Convergence  `json:"convergence"`
	Stages      []Stage      `json:"stages"`
	MultiStart  *MultiStart  `json:"multi_start,omitempty"`
	Covariance  Matrix       `json:"covariance"`
	Diagnostics *Diagnostics `json:"diagnostics,omitempty"`
	Notes       []string     `json:"notes,omitempty"`
	Preliminary *Results     `json:"preliminary,omitempty"` // the estimate the optimal instruments were built at
	Run         RunInfo      `json:"run"`
}

// Theta2 returns θ2 in the order of the model's parameters: σ then Π.
func (r *Results) Theta2() []float64 {
	var t []float64
	for _, c := range r.Sigma {
		t = append(t, c.Value)
	}
	for _, c := range r.Pi {
		t = append(t, c.Value)
	}
	return t
}

// BetaValues returns β in the order of X1.
func (r *Results) BetaValues() []float64 {
	b := make([]float64, len(r.Beta))
	for i, c := range r.Beta {
		b[i] = c.Value
	}
	return b
}

// ReadResults reads a results file and checks its schema.
func ReadResults(path string) (*Results, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, fmt.Errorf("%s: file does not exist", path)
		}
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	return ParseResults(path, raw)
}

// ParseResults parses results content; path is for messages.
func ParseResults(path string, raw []byte) (*Results, error) {
	var head struct {
		Schema string `json:"schema"`
	}
	if err := json.Unmarshal(raw, &head); err != nil {
		return nil, fmt.Errorf("%s: not a results file (invalid JSON: %v)", path, err)
	}
	if head.Schema != ResultsSchema {
		return nil, fmt.Errorf("%s: schema %q, want %q (a file written by rcdemand estimate)", path, head.Schema, ResultsSchema)
	}
	var r Results
	if err := json.Unmarshal(raw, &r); err != nil {
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	if r.SpecFile == "" || len(r.Beta) == 0 {
		return nil, fmt.Errorf("%s: results file lacks spec_file or beta", path)
	}
	n := len(r.Beta) + len(r.Sigma) + len(r.Pi)
	if len(r.Covariance.Values) != n {
		return nil, fmt.Errorf("%s: covariance is %d×%d for %d parameters", path, len(r.Covariance.Values), len(r.Covariance.Values), n)
	}
	for _, row := range r.Covariance.Values {
		if len(row) != n {
			return nil, fmt.Errorf("%s: covariance rows must have %d values", path, n)
		}
	}
	return &r, nil
}

// SpecPath returns the spec file of results read from resultsPath.
func (r *Results) SpecPath(resultsPath string) string {
	if filepath.IsAbs(r.SpecFile) {
		return r.SpecFile
	}
	return filepath.Join(filepath.Dir(resultsPath), r.SpecFile)
}

// RelativeSpec sets SpecFile to the spec's path relative to the folder of
// the results file at outPath.
func (r *Results) RelativeSpec(specPath, outPath string) {
	absSpec, err1 := filepath.Abs(specPath)
	absOut, err2 := filepath.Abs(filepath.Dir(outPath))
	if err1 == nil && err2 == nil {
		if rel, err := filepath.Rel(absOut, absSpec); err == nil {
			r.SpecFile = filepath.ToSlash(rel)
			return
		}
	}
	r.SpecFile = specPath
}
