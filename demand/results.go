package demand

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"gonum.org/v1/gonum/mat"

	"rcdemand/data"
)

// ResultsSchema identifies the results file format.
const ResultsSchema = "rcdemand.results.v1"

// Coef is one estimated parameter. SE is nil (null in the results file)
// when the covariance could not be computed or its diagonal entry is
// negative.
type Coef struct {
	Name        string   `json:"name"`
	Demographic string   `json:"demographic,omitempty"`
	Value       float64  `json:"value"`
	SE          *float64 `json:"se"`
	// Nonlinear marks a β estimated with θ2 (price's β under a log-normal
	// price sensitivity, the location of ln(−α)); Note says what it is.
	Nonlinear bool   `json:"nonlinear,omitempty"`
	Note      string `json:"note,omitempty"`
}

// NormalQuantile975 is the 97.5% quantile of the standard normal, for 95%
// intervals.
const NormalQuantile975 = 1.959963984540054

// Interval returns the 95% normal interval Value ± 1.96·SE, and false when
// there is no standard error.
func (c Coef) Interval() (lo, hi float64, ok bool) {
	if c.SE == nil {
		return math.NaN(), math.NaN(), false
	}
	return c.Value - NormalQuantile975**c.SE, c.Value + NormalQuantile975**c.SE, true
}

// StdErr returns the standard error, or NaN when there is none.
func (c Coef) StdErr() float64 {
	if c.SE == nil {
		return math.NaN()
	}
	return *c.SE
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

// Convergence records how the optimiser and the inner loop ended. Counts
// cover the whole run: every step and every start.
type Convergence struct {
	Converged       bool          `json:"converged"`
	Status          Status        `json:"status"`
	GradientNorm    float64       `json:"gradient_norm"` // ‖projected gradient‖∞ at the estimate
	Iterations      int           `json:"iterations"`
	ObjectiveCalls  int           `json:"objective_calls"`
	InnerIterations int           `json:"inner_iterations"`
	InnerFailures   int           `json:"inner_failures"`
	Curvature       []float64     `json:"curvature,omitempty"` // eigenvalues of the Hessian of Q (parameters off their bounds)
	OnBound         []string      `json:"on_bound,omitempty"`  // parameters at a bound with the gradient pointing out
	Message         string        `json:"message,omitempty"`
	Markets         []MarketInner `json:"markets,omitempty"`
}

// Stage is the record of one GMM step.
type Stage struct {
	Step           int       `json:"step"`
	Objective      float64   `json:"objective"`
	Beta           []float64 `json:"beta"`
	Theta2         []float64 `json:"theta2"`
	GradientNorm   float64   `json:"gradient_norm"`
	Iterations     int       `json:"iterations"`
	ObjectiveCalls int       `json:"objective_calls"`
	Converged      bool      `json:"converged"`
	Status         Status    `json:"status"`
	Message        string    `json:"message,omitempty"`
}

// Minimum is one local minimum of step 1 found by a multi-start search.
type Minimum struct {
	Objective float64   `json:"objective"`
	Theta2    []float64 `json:"theta2"`
	Converged bool      `json:"converged"`
	Starts    []int     `json:"starts"` // the starts (0 = the spec's) that reached it
}

// MultiStart reports a multi-start search (Knittel & Metaxoglou 2014): the
// distinct step-1 minima, and the step-2 objectives reached from the best
// few of them.
type MultiStart struct {
	Starts  int       `json:"starts"`
	Minima  []Minimum `json:"minima"`
	Refined []Minimum `json:"step2"` // step 2 from the best minima, in the order tried
	Agree   bool      `json:"agree"`
	Note    string    `json:"note"`
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
	Inputs      []data.Input `json:"inputs,omitempty"` // fingerprints of spec, products and agents at estimation
	Beta        []Coef       `json:"beta"`
	Sigma       []Coef       `json:"sigma"`
	Pi          []Coef       `json:"pi"`
	Gamma       []Coef       `json:"gamma,omitempty"` // the cost equation, with [supply]
	Rho         []Coef       `json:"rho,omitempty"`   // nesting parameters, by nest or "all"
	Cholesky    []Entry      `json:"cholesky,omitempty"`
	Correlation []Entry      `json:"correlations,omitempty"` // implied by the Cholesky factor
	PriceAlpha  *PriceAlpha  `json:"price_sensitivity,omitempty"`
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

// coefs returns the list of r that holds parameters of kind k.
func (r *Results) coefs(k Kind) *[]Coef {
	switch k {
	case Beta:
		return &r.Beta
	case Sigma:
		return &r.Sigma
	case Pi:
		return &r.Pi
	case Gamma:
		return &r.Gamma
	case Rho:
		return &r.Rho
	}
	panic(fmt.Sprintf("demand: no results list for %v", k))
}

// layout returns every estimated parameter in the estimator's order: the
// linear parameters concentrated out (β of X1, without price when it is
// nonlinear; then γ of the cost equation), then θ.
func (m *Model) layout() []Param {
	var out []Param
	for k, c := range m.X1Names {
		if m.PriceParam < 0 || k != m.PriceX1 {
			out = append(out, Param{Kind: Beta, Column: c})
		}
	}
	if m.Supply != nil {
		for _, c := range m.Supply.WNames {
			out = append(out, Param{Kind: Gamma, Column: c})
		}
	}
	return append(out, m.Params...)
}

// reportOrder returns the positions in layout of the parameters as the
// results report them: β in the order of X1 (price included), γ, then the
// other nonlinear parameters in the model's order. label is the name each
// carries in the covariance matrix (β by column, the others by Param.Name).
func (m *Model) reportOrder() (order []int, label []string) {
	lay := m.layout()
	find := func(p Param) int {
		for i, q := range lay {
			if q == p {
				return i
			}
		}
		panic("demand: parameter not in the layout: " + p.Name())
	}
	for _, c := range m.X1Names {
		order, label = append(order, find(Param{Kind: Beta, Column: c})), append(label, c)
	}
	for i, p := range lay {
		if p.Kind == Gamma {
			order, label = append(order, i), append(label, p.Name())
		}
	}
	for i, p := range m.Params {
		if i != m.PriceParam {
			order, label = append(order, find(p)), append(label, p.Name())
		}
	}
	return order, label
}

// setEstimates fills the results' parameter lists from values (in the
// layout's order) with standard errors √diag V (V in the same order, or nil
// when there is none), the covariance in report order, and a note for any
// negative variance.
func (r *Results) setEstimates(m *Model, values []float64, V *mat.SymDense) {
	lay := m.layout()
	order, label := m.reportOrder()
	var negative []string
	se := func(i int) *float64 {
		if V == nil {
			return nil
		}
		v := V.At(i, i)
		if !(v >= 0) {
			negative = append(negative, lay[i].Name())
			return nil
		}
		s := math.Sqrt(v)
		return &s
	}
	r.Beta, r.Gamma, r.Sigma, r.Pi, r.Rho, r.Cholesky = nil, nil, []Coef{}, []Coef{}, nil, nil
	location := m.Spec.LogNormalPrice() // then a β of price is the location of ln(−α)
	for _, i := range order {
		p := lay[i]
		c := Coef{Name: p.Column, Demographic: p.Demographic, Value: values[i], SE: se(i)}
		switch {
		case p.Kind == Cholesky:
			r.Cholesky = append(r.Cholesky, Entry{Row: p.Column, Column: p.Other, Value: c.Value, SE: c.SE})
			continue
		case p.Kind == Rho:
			c.Name = p.Nest
		case p.Kind == Beta && location && p.Column == m.Spec.Columns.Price:
			c.Nonlinear, c.Note = true, locationNote
		}
		list := r.coefs(p.Kind)
		*list = append(*list, c)
	}
	off := len(lay) - len(m.Params)
	r.setImplied(m, values[off:], V, off)
	if V != nil {
		rows := make([][]float64, len(order))
		for a, i := range order {
			rows[a] = make([]float64, len(order))
			for b, j := range order {
				rows[a][b] = V.At(i, j)
			}
		}
		r.Covariance = Matrix{Names: label, Values: rows}
	}
	if len(negative) > 0 {
		r.Notes = append(r.Notes, fmt.Sprintf("the estimated variance of %s is negative (a numerically indefinite covariance), so no standard error is reported", strings.Join(negative, ", ")))
	}
}

// ThetaOf returns θ of the model from results, matching each parameter by
// kind and name, so that results read back into a model whose spec lists
// its random columns in another order, or has other parameters, are refused
// instead of misassigned.
func (m *Model) ThetaOf(r *Results) ([]float64, error) {
	theta := make([]float64, len(m.Params))
	lists := r.params()
	counts := map[Kind]int{}
	for i, p := range m.Params {
		if p.Kind == Beta {
			k := slices.IndexFunc(r.Beta, func(c Coef) bool { return c.Name == p.Column })
			if k < 0 {
				return nil, fmt.Errorf("the results have no estimate of %s", p.Name())
			}
			theta[i] = r.Beta[k].Value
			continue
		}
		list := lists[p.Kind]
		n := counts[p.Kind]
		counts[p.Kind]++
		if n >= len(list) {
			return nil, fmt.Errorf("the results have no estimate of %s", p.Name())
		}
		if got := list[n].Name(); got != p.Name() {
			return nil, fmt.Errorf("the results list %s where the model has %s", got, p.Name())
		}
		theta[i] = list[n].value
	}
	for _, k := range []Kind{Sigma, Pi, Rho, Cholesky} {
		if n := len(lists[k]); n != counts[k] {
			return nil, fmt.Errorf("the results have %d %s parameters, the model %d", n, k, counts[k])
		}
	}
	return theta, nil
}

// Estimates returns every estimate in the order of the covariance matrix
// (see Results.List).
func (r *Results) Estimates() []float64 {
	var x []float64
	for _, e := range r.List() {
		x = append(x, e.Value)
	}
	return x
}

// FromEstimates splits a vector in the order of the results' covariance
// (see Results.Estimates) into β (in the order of X1) and θ (in the model's
// order; a nonlinear price coefficient is taken from β).
func (m *Model) FromEstimates(x []float64) (beta, theta []float64) {
	order, _ := m.reportOrder()
	lay := m.layout()
	val := make([]float64, len(lay))
	for a, i := range order {
		val[i] = x[a]
	}
	K := len(m.X1Names)
	beta = x[:K]
	theta = make([]float64, len(m.Params))
	off := len(lay) - len(m.Params)
	for i := range m.Params {
		theta[i] = val[off+i]
	}
	if m.PriceParam >= 0 {
		theta[m.PriceParam] = beta[m.PriceX1]
	}
	return beta, theta
}

// BetaValues returns the linear β, in the order of X1 (a nonlinear β is in
// θ; see Model.ThetaOf).
func (r *Results) BetaValues() []float64 {
	linear, _ := r.splitBeta()
	var b []float64
	for _, c := range linear {
		b = append(b, c.Value)
	}
	return b
}

// ReadResults reads a results file and checks its schema.
func ReadResults(path string) (*Results, error) {
	var r Results
	if err := data.ReadJSON(path, ResultsSchema, "estimate", &r); err != nil {
		return nil, err
	}
	return &r, r.check(path)
}

// ParseResults parses results content; path is for messages.
func ParseResults(path string, raw []byte) (*Results, error) {
	var r Results
	if err := data.ParseJSON(path, raw, ResultsSchema, "estimate", &r); err != nil {
		return nil, err
	}
	return &r, r.check(path)
}

// check verifies that the results hold estimates and a covariance of the
// right size.
func (r *Results) check(path string) error {
	if r.SpecFile == "" || len(r.Beta) == 0 {
		return fmt.Errorf("%s: results file lacks spec_file or beta", path)
	}
	n := r.numParams()
	if len(r.Covariance.Values) != n && len(r.Covariance.Values) != 0 {
		return fmt.Errorf("%s: covariance is %d×%d for %d parameters", path, len(r.Covariance.Values), len(r.Covariance.Values), n)
	}
	for _, row := range r.Covariance.Values {
		if len(row) != n {
			return fmt.Errorf("%s: covariance rows must have %d values", path, n)
		}
	}
	return nil
}

// SpecPath returns the spec file of results read from resultsPath.
func (r *Results) SpecPath(resultsPath string) string { return data.Resolve(resultsPath, r.SpecFile) }

// RelativeSpec sets SpecFile to the spec's path relative to the folder of
// the results file at outPath.
func (r *Results) RelativeSpec(specPath, outPath string) {
	r.SpecFile = data.RelativeTo(specPath, outPath)
}

// LoadFitted reads a results file and the spec and data it points to,
// checks that these inputs are the ones estimated from (their recorded
// fingerprints: a *ChangedDataError unless AllowChangedData) and that the
// model of the spec is the one estimated (the same β, σ and Π, by name and
// in order), and rebuilds the fitted model at the estimates.
func LoadFitted(resultsPath string, opts ...LoadOption) (*Results, *Fitted, error) {
	res, err := ReadResults(resultsPath)
	if err != nil {
		return nil, nil, err
	}
	var o loadOptions
	for _, opt := range opts {
		opt(&o)
	}
	if err := res.checkInputs(resultsPath, o); err != nil {
		return nil, nil, err
	}
	spec, err := ReadSpec(res.SpecPath(resultsPath))
	if err != nil {
		return nil, nil, fmt.Errorf("%s: spec_file: %w", resultsPath, err)
	}
	m, err := Load(spec)
	if err != nil {
		return nil, nil, err
	}
	mismatch := func(format string, args ...any) error {
		return fmt.Errorf("%s: the results do not match the model of %s (was the spec changed after estimating?): %s",
			resultsPath, spec.File, fmt.Sprintf(format, args...))
	}
	linear, _ := res.splitBeta()
	if len(linear) != len(m.X1Names) {
		return nil, nil, mismatch("%d linear coefficients, the spec has %d", len(linear), len(m.X1Names))
	}
	for k, c := range linear {
		if c.Name != m.X1Names[k] {
			return nil, nil, mismatch("beta %q where the spec has column %q", c.Name, m.X1Names[k])
		}
	}
	theta, err := m.ThetaOf(res)
	if err != nil {
		return nil, nil, mismatch("%v", err)
	}
	if err := m.PriceLevels(); err != nil {
		return nil, nil, err
	}
	f, err := NewFitted(m, res.BetaValues(), theta)
	if err != nil {
		return nil, nil, fmt.Errorf("%s: %w", resultsPath, err)
	}
	if !res.Convergence.Converged && o.warn != nil {
		o.warn(fmt.Sprintf("%s: the estimate did not converge (%s); everything computed from it inherits that", resultsPath, res.Convergence.Message))
	}
	return res, f, nil
}

// PriceLevels checks that every price is positive: elasticities, markups,
// costs and counterfactual prices need price levels (a demeaned or
// logged price estimates demand, but p_l/s_j and p − η are then
// meaningless). It names the first row with a price ≤ 0 and how many there
// are.
func (m *Model) PriceLevels() error {
	p := m.Products
	first, n := -1, 0
	for i, v := range p.Price {
		if !(v > 0) {
			n++
			if first < 0 {
				first = i
			}
		}
	}
	if n == 0 {
		return nil
	}
	return p.Errorf(first, p.Cols.Price, "price %v is not positive (%d of %d prices are not): elasticities, markups, costs and merger simulation need price levels, not a demeaned or logged price",
		p.Price[first], n, p.Len())
}
