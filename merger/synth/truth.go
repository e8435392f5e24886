package synth

import (
	"errors"
	"fmt"
	"math"
	"os"
	"reflect"
	"slices"
	"strings"

	"github.com/BurntSushi/toml"

	"rcdemand/demand"
)

// Truth is the data-generating process of Synthesize, read from a TOML file.
type Truth struct {
	Markets  int    `toml:"markets" json:"markets"`
	Products int    `toml:"products" json:"products"` // per market
	Firms    int    `toml:"firms" json:"firms"`       // product j belongs to firm j mod firms
	Agents   int    `toml:"agents" json:"agents"`     // per market, equal weights
	Seed     uint64 `toml:"seed" json:"seed"`

	FirmNames    []string `toml:"firm_names" json:"firm_names"`
	ProductNames []string `toml:"product_names" json:"product_names"`

	Beta  map[string]float64            `toml:"beta" json:"beta"`
	Sigma map[string]float64            `toml:"sigma" json:"sigma"`
	Pi    map[string]map[string]float64 `toml:"pi" json:"pi"`

	// Nests: product j belongs to nest j mod Nests, named NestNames (else
	// N1, N2, …), written to the spec's [demand] nests column. Rho is one
	// number, or a table by nest name under nesting = "by-nest".
	Nests     int      `toml:"nests" json:"nests"`
	NestNames []string `toml:"nest_names" json:"nest_names"`
	Rho       any      `toml:"rho" json:"rho"`
	// PriceDistribution, when given, must be the spec's.
	PriceDistribution string `toml:"price_distribution" json:"price_distribution"`
	// Cholesky is L (random_covariance = "full") by row and column among the
	// random columns, lower triangular in the order of [demand] random. As
	// in the spec's start_cholesky, a diagonal entry it leaves out comes
	// from Sigma (given in one place, never both), and an entry below the
	// diagonal it leaves out is 0.
	Cholesky map[string]map[string]float64 `toml:"cholesky" json:"cholesky"`

	Characteristics map[string][2]float64 `toml:"characteristics" json:"characteristics"` // column → [mean, sd] of a normal
	Demographics    map[string][2]float64 `toml:"demographics" json:"demographics"`

	// Markets that differ: see markets.go.
	DemographicMarketSD map[string]float64 `toml:"demographic_market_sd" json:"demographic_market_sd"`
	MarketSize          *MarketSize        `toml:"market_size" json:"market_size"`

	Cost struct {
		Constant        float64            `toml:"constant" json:"constant"`
		Shifters        map[string]float64 `toml:"shifters" json:"shifters"`               // standard normal shifters and their coefficients
		Characteristics map[string]float64 `toml:"characteristics" json:"characteristics"` // coefficients on characteristics
	} `toml:"cost" json:"cost"`
	Shocks struct {
		XiSD        float64 `toml:"xi_sd" json:"xi_sd"`
		OmegaSD     float64 `toml:"omega_sd" json:"omega_sd"`
		Correlation float64 `toml:"correlation" json:"correlation"`
	} `toml:"shocks" json:"shocks"`

	path string // the file it was read from, for messages
}

// ReadTruth parses a truth file, rejecting unknown keys at any depth and
// values out of range; its errors name the file. The tables whose keys are
// column names ([beta], [sigma], …) are checked against the spec when the
// data are drawn.
func ReadTruth(path string) (*Truth, error) {
	raw, err := os.ReadFile(path)
	if err != nil {
		if errors.Is(err, os.ErrNotExist) {
			return nil, fmt.Errorf("%s: file does not exist", path)
		}
		return nil, fmt.Errorf("%s: %v", path, err)
	}
	t := Truth{path: path}
	// The metadata hold every key parsed, also when decoding into t failed
	// (a spec's [agents] table is no number of agents); after a syntax
	// error they are empty.
	md, err := toml.Decode(string(raw), &t)
	for _, section := range []string{"data", "demand", "columns", "instruments"} {
		if md.IsDefined(section) {
			return nil, fmt.Errorf("%s: this is a spec file (it has [%s]), not a truth file: a truth file sets markets, products, firms, agents, [beta], [sigma], [pi], [characteristics], [demographics], [cost] and [shocks] (see the README, \"Synthetic data\")", path, section)
		}
	}
	if err == nil {
		err = demand.TOMLTables(md, reflect.TypeOf(t))
	}
	if err != nil {
		return nil, fmt.Errorf("%s: %s", path, demand.TOMLError(err))
	}
	if und := md.Undecoded(); len(und) > 0 {
		key := und[0].String()
		return nil, t.errorf("unknown key %q%s", key, didYouMean(key, truthKeys()))
	}
	if err := t.check(); err != nil {
		return nil, err
	}
	return &t, nil
}

// errorf returns an error that names the truth file.
func (tr *Truth) errorf(format string, args ...any) error {
	return fmt.Errorf("%s: %s", tr.name(), fmt.Sprintf(format, args...))
}

// name is the truth file's path, or "truth" for a Truth built in code.
func (tr *Truth) name() string {
	if tr.path == "" {
		return "truth"
	}
	return tr.path
}

// check checks the values that need no spec: a positive design, standard
// deviations of 0 or more and a correlation in [−1, 1].
func (tr *Truth) check() error {
	if tr.Markets < 1 || tr.Products < 1 || tr.Firms < 1 || tr.Agents < 1 {
		return tr.errorf("markets, products, firms and agents must be positive")
	}
	s := tr.Shocks
	for _, sd := range []struct {
		key string
		v   float64
	}{{"xi_sd", s.XiSD}, {"omega_sd", s.OmegaSD}} {
		if !(sd.v >= 0) || math.IsInf(sd.v, 0) {
			return tr.errorf("[shocks] %s = %v: a standard deviation must be a finite number, 0 or more", sd.key, sd.v)
		}
	}
	if !(s.Correlation >= -1 && s.Correlation <= 1) {
		return tr.errorf("[shocks] correlation = %v: a correlation must be in [−1, 1]", s.Correlation)
	}
	for _, tab := range []struct {
		name string
		m    map[string][2]float64
	}{{"characteristics", tr.Characteristics}, {"demographics", tr.Demographics}} {
		for _, c := range sortedKeys(tab.m) {
			md := tab.m[c]
			if math.IsNaN(md[0]) || math.IsInf(md[0], 0) || !(md[1] >= 0) || math.IsInf(md[1], 0) {
				return tr.errorf("[%s] %s = [%v, %v]: give [mean, sd], finite, with sd 0 or more", tab.name, c, md[0], md[1])
			}
		}
	}
	return nil
}

// checkTables checks the keys of the truth's tables that are keyed by the
// spec's names (columns, demographics, nests) against the spec: a name the
// spec does not have is an unknown key, with the closest name suggested.
func (g *generator) checkTables() error {
	tr, d := g.tr, g.spec.Demand
	drawable := append([]string{"1", g.spec.Columns.Price}, g.chars...)
	type table struct {
		key   string
		names []string
		known []string
		what  string
	}
	tables := []table{
		{"beta", sortedKeys(tr.Beta), d.Linear, "[beta] takes a value for each [demand] linear column of the spec"},
		{"sigma", sortedKeys(tr.Sigma), d.Random, "[sigma] takes a value for each [demand] random column of the spec"},
		{"cholesky", sortedKeys(tr.Cholesky), d.Random, "[cholesky] rows are [demand] random columns of the spec"},
		{"pi", sortedKeys(tr.Pi), drawable, "[pi] rows are columns of the spec"},
		{"characteristics", sortedKeys(tr.Characteristics), g.chars, "[characteristics] takes a distribution for each characteristic of the spec"},
		{"demographics", sortedKeys(tr.Demographics), d.Demographics, "[demographics] takes a distribution for each [demand] demographics column of the spec"},
		{"demographic_market_sd", sortedKeys(tr.DemographicMarketSD), d.Demographics, "demographic_market_sd takes [demand] demographics columns of the spec"},
		{"cost.characteristics", sortedKeys(tr.Cost.Characteristics), g.chars, "[cost] characteristics are characteristics of the spec"},
	}
	for _, c := range sortedKeys(tr.Pi) {
		tables = append(tables, table{"pi." + c, sortedKeys(tr.Pi[c]), d.Demographics, "[pi] columns are [demand] demographics of the spec"})
	}
	for _, r := range sortedKeys(tr.Cholesky) {
		tables = append(tables, table{"cholesky." + r, sortedKeys(tr.Cholesky[r]), d.Random, "[cholesky] columns are [demand] random columns of the spec"})
	}
	if rho, ok := tr.Rho.(map[string]any); ok && tr.Nests > 0 {
		var nests []string
		for k := range tr.Nests {
			nests = append(nests, g.nestName(k))
		}
		tables = append(tables, table{"rho", sortedKeys(rho), nests, "rho takes a value for each nest"})
	}
	for _, t := range tables {
		for _, name := range t.names {
			if !slices.Contains(t.known, name) {
				return tr.errorf("unknown key %q%s: %s (%s)", t.key+"."+name, didYouMean(name, t.known), t.what, listOrNone(t.known))
			}
		}
	}
	return nil
}

// listOrNone lists names, or says there are none.
func listOrNone(names []string) string {
	if len(names) == 0 {
		return "it has none"
	}
	return strings.Join(names, ", ")
}

// truthKeys lists the keys of a truth file, nested ones as table.key.
func truthKeys() []string { return demand.TOMLKeys(reflect.TypeOf(Truth{})) }

// didYouMean returns ` (did you mean "x"?)` for the name of known closest
// to name in edit distance, when it is close, else "".
func didYouMean(name string, known []string) string {
	if best := demand.Closest(name, known); best != "" {
		return fmt.Sprintf(" (did you mean %q?)", best)
	}
	return ""
}
