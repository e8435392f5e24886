package demand

import (
	"errors"
	"fmt"
	"os"
	"reflect"
	"slices"
	"sort"
	"strings"

	"github.com/BurntSushi/toml"

	"rcdemand/data"
	"rcdemand/instruments"
)

// Spec is a model specification as read from a TOML spec file.
type Spec struct {
	Data        DataSpec        `toml:"data"`
	Columns     ColumnSpec      `toml:"columns"`
	Demand      DemandSpec      `toml:"demand"`
	Instruments InstrumentSpec  `toml:"instruments"`
	Supply      SupplySpec      `toml:"supply,omitempty"`
	Agents      AgentSpec       `toml:"agents"`
	Integration IntegrationSpec `toml:"integration"`
	Estimation  EstimationSpec  `toml:"estimation"`

	// File is the path of the spec file; relative data paths are resolved
	// against its folder.
	File string `toml:"-"`

	source *data.Input // fingerprint of the bytes read by ReadSpec
}

// DataSpec names the input tables.
type DataSpec struct {
	Products string `toml:"products"`
	Agents   string `toml:"agents"`
}

// ColumnSpec maps roles to products-table column names.
type ColumnSpec struct {
	Market  string `toml:"market"`
	Product string `toml:"product"`
	Firm    string `toml:"firm"`
	Share   string `toml:"share"`
	Price   string `toml:"price"`
	// MarketSize (optional) is the number of consumers of each market, the
	// same on every row of a market; welfare changes are then also in money.
	MarketSize string `toml:"market_size,omitempty"`
}

// DemandSpec is the utility specification.
type DemandSpec struct {
	Linear       []string            `toml:"linear"`
	Random       []string            `toml:"random"`
	Demographics []string            `toml:"demographics"`
	Interactions map[string][]string `toml:"interactions"`
	Absorb       []string            `toml:"absorb"`

	// Nests names the products-table column that groups products into the
	// nests of a nested logit ("" for none); Nesting is "all" (one ρ, the
	// default) or "by-nest" (one ρ per nest).
	Nests   string `toml:"nests,omitempty"`
	Nesting string `toml:"nesting,omitempty"`
	// PriceDistribution is "normal" (the default) or "lognormal":
	// α_i = −exp(β_price + σ_price ν_i + Σ_d Π_price,d D_id).
	PriceDistribution string `toml:"price_distribution"`
	// RandomCovariance is "diagonal" (the default) or "full": the tastes'
	// covariance LLᵀ with L lower triangular.
	RandomCovariance string `toml:"random_covariance"`
}

// InstrumentSpec lists excluded instruments and instrument sets to build.
type InstrumentSpec struct {
	Excluded []string `toml:"excluded"`
	Generate []string `toml:"generate"`
}

// SupplySpec is the marginal-cost equation estimated jointly with demand
// under Bertrand–Nash pricing. An empty Cost means no supply side.
type SupplySpec struct {
	Cost     []string `toml:"cost"`           // marginal-cost columns (γ); "1" is the constant
	Form     string   `toml:"form,omitempty"` // "linear": c = wγ + ω; "log": ln c = wγ + ω (default)
	Excluded []string `toml:"excluded"`       // supply-only excluded instruments
}

// Forms are the cost-equation forms accepted in [supply] form.
var Forms = []string{"log", "linear"}

// AgentSpec maps the agents table.
type AgentSpec struct {
	Market string            `toml:"market"` // default: the products market column name
	Weight string            `toml:"weight"`
	Tastes map[string]string `toml:"tastes"` // random column → taste-draw column
}

// IntegrationSpec chooses a generated integration rule.
type IntegrationSpec struct {
	Rule  string `toml:"rule"`
	Draws int    `toml:"draws"` // monte-carlo and halton: draws per market
	Nodes int    `toml:"nodes"` // gauss-hermite: nodes per dimension
	Level int    `toml:"level"` // sparse-grid: accuracy level k (exact to degree 2k−1)
	Seed  uint64 `toml:"seed"`
}

// EstimationSpec sets the GMM options.
type EstimationSpec struct {
	Steps             int                           `toml:"steps"`
	Start             map[string]float64            `toml:"start"`
	StartInteractions map[string]map[string]float64 `toml:"start_interactions"`
	// StartRho is the starting ρ: a number, or a table by nest name.
	StartRho *RhoStart `toml:"start_rho"`
	// StartCholesky holds starting entries of L by row and column (random
	// columns; the column at or before the row in [demand] random).
	StartCholesky map[string]map[string]float64 `toml:"start_cholesky"`
	// StartPriceLocation is the starting β_price under a log-normal price
	// sensitivity (default ln(−α̂) of the plain logit's 2SLS α̂, else 0).
	StartPriceLocation *float64 `toml:"start_price_location"`
	Covariance         string   `toml:"covariance"`
	InnerTolerance     float64  `toml:"inner_tolerance"`
	InnerMaxIter       int      `toml:"inner_max_iterations"`
	GradientTolerance  float64  `toml:"gradient_tolerance"`
	MaxIterations      int      `toml:"max_iterations"`
	MaxObjectiveCalls  int      `toml:"max_objective_calls"`
	TimeLimit          float64  `toml:"time_limit"` // seconds; 0 for none
}

// Generators are the instrument sets [instruments] generate accepts: the
// sets of package instruments and "optimal".
var Generators = append(slices.Clone(instruments.Sets), "optimal")

// Rules are the integration rules accepted in [integration] rule.
var Rules = []string{"halton", "monte-carlo", "gauss-hermite", "sparse-grid"}

// SpecError is a problem with a spec file.
type SpecError struct {
	File string
	Msg  string
}

func (e *SpecError) Error() string { return e.File + ": " + e.Msg }

// ReadSpec parses and checks a spec file.
func ReadSpec(path string) (*Spec, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, &SpecError{path, "file does not exist"}
		}
		return nil, &SpecError{path, err.Error()}
	}
	s, err := ParseSpec(path, raw)
	if err != nil {
		return nil, err
	}
	src := data.FingerprintOf("spec", path, raw)
	s.source = &src
	return s, nil
}

// ParseSpec parses spec content; path is used for messages and for resolving
// relative data paths.
func ParseSpec(path string, raw []byte) (*Spec, error) {
	var s Spec
	if err := notTruth(raw); err != nil {
		return nil, &SpecError{path, err.Error()}
	}
	md, err := toml.Decode(string(raw), &s)
	if err == nil {
		err = TOMLTables(md, reflect.TypeOf(s))
	}
	if err != nil {
		return nil, &SpecError{path, TOMLError(err)}
	}
	if und := md.Undecoded(); len(und) > 0 {
		key := und[0].String()
		msg := fmt.Sprintf("unknown key %q", key)
		if sug := suggestKey(key); sug != "" {
			msg += fmt.Sprintf(" (did you mean %q?)", sug)
		}
		return nil, &SpecError{path, msg}
	}
	s.File = path
	s.defaults()
	if err := s.check(); err != nil {
		return nil, &SpecError{path, err.Error()}
	}
	return &s, nil
}

func (s *Spec) defaults() {
	c := &s.Columns
	for _, d := range []struct {
		v   *string
		def string
	}{{&c.Market, "market"}, {&c.Product, "product"}, {&c.Firm, "firm"}, {&c.Share, "share"}, {&c.Price, "price"}} {
		if *d.v == "" {
			*d.v = d.def
		}
	}
	if s.Agents.Market == "" {
		s.Agents.Market = c.Market
	}
	if s.Agents.Weight == "" {
		s.Agents.Weight = "weight"
	}
	if s.Integration.Rule == "" {
		s.Integration.Rule = "halton"
	}
	if s.Integration.Draws == 0 {
		s.Integration.Draws = 200
	}
	if s.Integration.Nodes == 0 {
		s.Integration.Nodes = 5
	}
	if s.Integration.Level == 0 {
		s.Integration.Level = 4
	}
	if s.Integration.Seed == 0 {
		s.Integration.Seed = 1
	}
	if len(s.Supply.Cost) > 0 && s.Supply.Form == "" {
		s.Supply.Form = "log"
	}
	e := &s.Estimation
	if e.Steps == 0 {
		e.Steps = 2
	}
	if e.Covariance == "" {
		e.Covariance = "robust"
	}
	if e.InnerTolerance == 0 {
		e.InnerTolerance = 1e-14
	}
	if e.InnerMaxIter == 0 {
		e.InnerMaxIter = 10000
	}
	if e.GradientTolerance == 0 {
		e.GradientTolerance = 1e-6
	}
	if e.MaxObjectiveCalls == 0 {
		e.MaxObjectiveCalls = 5000
	}
	if e.MaxIterations == 0 {
		e.MaxIterations = 500
	}
}

func (s *Spec) check() error {
	d := &s.Demand
	if s.Data.Products == "" {
		return errors.New(`[data] products is required: the path of the products table`)
	}
	if len(d.Linear) == 0 {
		return errors.New(`[demand] linear is empty: list the columns of x, e.g. ["1", "price", "x1"]`)
	}
	if err := distinct("[demand] linear", d.Linear); err != nil {
		return err
	}
	if err := distinct("[demand] random", d.Random); err != nil {
		return err
	}
	if len(d.Demographics) > 0 && s.Data.Agents == "" {
		return errors.New("[demand] demographics need an agents table: set [data] agents to a table with one row per agent holding the demographic columns")
	}
	for col, dems := range d.Interactions {
		for _, dm := range dems {
			if !contains(d.Demographics, dm) {
				return fmt.Errorf("[demand] interactions: %s × %s uses %q, which is not in [demand] demographics", col, dm, dm)
			}
		}
	}
	if err := s.checkUnused(); err != nil {
		return err
	}
	if err := s.checkSupply(); err != nil {
		return err
	}
	for _, g := range s.Instruments.Generate {
		if !contains(Generators, g) {
			return fmt.Errorf("[instruments] generate: unknown set %q (known: %s)", g, strings.Join(Generators, ", "))
		}
	}
	if e := s.Estimation; e.Steps != 1 && e.Steps != 2 {
		return fmt.Errorf("[estimation] steps = %d: use 1 or 2", e.Steps)
	}
	switch c := s.Estimation.Covariance; {
	case c == "robust", c == "unadjusted":
	case strings.HasPrefix(c, "cluster:") && len(c) > len("cluster:"):
	default:
		return fmt.Errorf(`[estimation] covariance %q: use "robust", "unadjusted" or "cluster:<column>"`, c)
	}
	e := s.Estimation
	for _, c := range []struct {
		key  string
		v    any
		ok   bool
		want string
	}{
		{"max_iterations", e.MaxIterations, e.MaxIterations >= 1, "must be positive"},
		{"max_objective_calls", e.MaxObjectiveCalls, e.MaxObjectiveCalls >= 1, "must be positive"},
		{"inner_max_iterations", e.InnerMaxIter, e.InnerMaxIter >= 1, "must be positive"},
		{"gradient_tolerance", e.GradientTolerance, e.GradientTolerance > 0, "must be positive"},
		{"time_limit", e.TimeLimit, e.TimeLimit >= 0, "must be 0 or more (seconds; 0 for none)"},
	} {
		if !c.ok {
			return fmt.Errorf("[estimation] %s = %v: %s", c.key, c.v, c.want)
		}
	}
	if s.Estimation.InnerTolerance <= 0 || s.Estimation.InnerTolerance > 1e-4 {
		return fmt.Errorf("[estimation] inner_tolerance %g must be in (0, 1e-4]", s.Estimation.InnerTolerance)
	}
	for k := range s.Estimation.Start {
		if !contains(d.Random, k) {
			return fmt.Errorf("[estimation] start names %q, which is not in [demand] random", k)
		}
	}
	for col, m := range s.Estimation.StartInteractions {
		for dm := range m {
			if !contains(d.Interactions[col], dm) {
				return fmt.Errorf("[estimation] start_interactions names %s × %s, which is not in [demand] interactions", col, dm)
			}
		}
	}
	return s.checkFamilies()
}

// checkSupply validates [supply].
func (s *Spec) checkSupply() error {
	sp := s.Supply
	if len(sp.Cost) == 0 {
		if sp.Form != "" || len(sp.Excluded) > 0 {
			return errors.New("[supply] needs cost: the marginal-cost columns, e.g. cost = [\"1\", \"cost_index\"]")
		}
		return nil
	}
	if !slices.Contains(Forms, sp.Form) {
		return fmt.Errorf("[supply] form %q: use \"log\" (ln c = wγ + ω) or \"linear\" (c = wγ + ω)", sp.Form)
	}
	if err := distinct("[supply] cost", sp.Cost); err != nil {
		return err
	}
	if err := distinct("[supply] excluded", sp.Excluded); err != nil {
		return err
	}
	for _, c := range sp.Excluded {
		if slices.Contains(sp.Cost, c) {
			return fmt.Errorf("[supply] excluded lists %q, which is already a cost column", c)
		}
	}
	price := s.Columns.Price
	if !slices.Contains(s.Demand.Linear, price) {
		return fmt.Errorf("[supply] needs price %q among [demand] linear: markups depend on its coefficient", price)
	}
	if slices.Contains(sp.Cost, price) || slices.Contains(sp.Excluded, price) {
		return fmt.Errorf("[supply] cannot use price %q as a cost column or instrument: it is endogenous", price)
	}
	return nil
}

// HasSupply reports whether the spec estimates a cost equation.
func (s *Spec) HasSupply() bool { return len(s.Supply.Cost) > 0 }

// Path resolves a path of the spec against the spec file's folder.
func (s *Spec) Path(p string) string { return data.Resolve(s.File, p) }

// Cluster returns the clustering column of covariance "cluster:<column>", or "".
func (s *Spec) Cluster() string {
	if c, ok := strings.CutPrefix(s.Estimation.Covariance, "cluster:"); ok {
		return c
	}
	return ""
}

func distinct(what string, xs []string) error {
	seen := map[string]bool{}
	for _, x := range xs {
		if seen[x] {
			return fmt.Errorf("%s lists %q twice", what, x)
		}
		seen[x] = true
	}
	return nil
}

func contains(xs []string, x string) bool {
	for _, y := range xs {
		if y == x {
			return true
		}
	}
	return false
}

// knownKeys lists every key path of the spec, for suggestions.
func knownKeys() []string { return TOMLKeys(reflect.TypeOf(Spec{})) }

// TOMLKeys lists the keys of a struct decoded from TOML, sorted: each
// field's toml tag, and the keys of a struct (or pointer to struct) field
// below it as "table.key", at any depth. Fields without a tag or tagged
// "-" are not keys.
func TOMLKeys(t reflect.Type) []string {
	var keys []string
	var walk func(prefix string, t reflect.Type)
	walk = func(prefix string, t reflect.Type) {
		for i := 0; i < t.NumField(); i++ {
			f := t.Field(i)
			tag := tomlKey(f)
			if tag == "" {
				continue
			}
			keys = append(keys, prefix+tag)
			ft := f.Type
			if ft.Kind() == reflect.Pointer {
				ft = ft.Elem()
			}
			if ft.Kind() == reflect.Struct {
				walk(prefix+tag+".", ft)
			}
		}
	}
	walk("", t)
	sort.Strings(keys)
	return keys
}

// tomlKey returns the TOML key of a struct field: its toml tag without
// options, or "" for a field that is not a key (no tag, or "-").
func tomlKey(f reflect.StructField) string {
	key, _, _ := strings.Cut(f.Tag.Get("toml"), ",")
	if key == "-" {
		return ""
	}
	return key
}

// suggestKey returns the known key closest to key in edit distance, if close.
func suggestKey(key string) string { return Closest(key, knownKeys()) }

// Closest returns the name of known closest to name in edit distance
// (Levenshtein), or "" when none is within max(2, len(name)/3) edits: the
// suggestion of an error about an unknown name.
func Closest(name string, known []string) string {
	best, bestD := "", 1<<30
	for _, k := range known {
		if d := editDistance(name, k); d < bestD {
			best, bestD = k, d
		}
	}
	if bestD > max(2, len([]rune(name))/3) {
		return ""
	}
	return best
}

// editDistance is the Levenshtein distance between a and b.
func editDistance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	prev := make([]int, len(rb)+1)
	cur := make([]int, len(rb)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(ra); i++ {
		cur[0] = i
		for j := 1; j <= len(rb); j++ {
			c := 1
			if ra[i-1] == rb[j-1] {
				c = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+c)
		}
		prev, cur = cur, prev
	}
	return prev[len(rb)]
}
