package demand

import (
	"errors"
	"fmt"
	"math"
	"slices"
	"strconv"
	"strings"
)

// The values of the model-family keys of [demand].
const (
	NestingAll      = "all"
	NestingByNest   = "by-nest"
	PriceNormal     = "normal"
	PriceLogNormal  = "lognormal"
	CovDiagonal     = "diagonal"
	CovFull         = "full"
	nestingChoices  = `"all" (one ρ for every nest) or "by-nest" (one ρ per nest)`
	priceChoices    = `"normal" (α_i = β + σν_i + ΠD_i) or "lognormal" (α_i = −exp(β + σν_i + ΠD_i))`
	varianceChoices = `"diagonal" (independent tastes) or "full" (correlated tastes, a Cholesky factor)`
)

// Nested reports whether the spec is a nested logit.
func (s *Spec) Nested() bool { return s.Demand.Nests != "" }

// ByNest reports whether each nest has its own ρ.
func (s *Spec) ByNest() bool { return s.Demand.Nesting == NestingByNest }

// LogNormalPrice reports whether the price coefficient is log-normal.
func (s *Spec) LogNormalPrice() bool { return s.Demand.PriceDistribution == PriceLogNormal }

// FullCovariance reports whether the tastes have a full covariance.
func (s *Spec) FullCovariance() bool { return s.Demand.RandomCovariance == CovFull }

// checkFamilies checks the model-family keys and their starting values.
func (s *Spec) checkFamilies() error {
	d, e := &s.Demand, &s.Estimation
	if d.PriceDistribution == "" {
		d.PriceDistribution = PriceNormal
	}
	if d.RandomCovariance == "" {
		d.RandomCovariance = CovDiagonal
	}
	switch {
	case d.Nesting != "" && d.Nesting != NestingAll && d.Nesting != NestingByNest:
		return fmt.Errorf("[demand] nesting %q: use %s", d.Nesting, nestingChoices)
	case d.Nesting != "" && d.Nests == "":
		return fmt.Errorf("[demand] nesting = %q needs [demand] nests, the column that groups products into nests", d.Nesting)
	case d.Nests != "" && slices.Contains([]string{s.Columns.Market, s.Columns.Share, s.Columns.Price}, d.Nests):
		return fmt.Errorf("[demand] nests = %q is the market, share or price column: name the column that groups products into nests", d.Nests)
	case d.PriceDistribution != PriceNormal && d.PriceDistribution != PriceLogNormal:
		return fmt.Errorf("[demand] price_distribution %q: use %s", d.PriceDistribution, priceChoices)
	case d.RandomCovariance != CovDiagonal && d.RandomCovariance != CovFull:
		return fmt.Errorf("[demand] random_covariance %q: use %s", d.RandomCovariance, varianceChoices)
	case s.FullCovariance() && len(d.Random) == 0:
		return errors.New(`[demand] random_covariance = "full" needs random columns in [demand] random`)
	}
	if s.LogNormalPrice() {
		if err := s.checkLogNormal(); err != nil {
			return err
		}
	} else if e.StartPriceLocation != nil {
		return errors.New(`[estimation] start_price_location is for price_distribution = "lognormal"`)
	}
	if err := s.checkStartRho(); err != nil {
		return err
	}
	return s.checkStartCholesky()
}

// checkLogNormal checks a log-normal price sensitivity: price has a
// location β (it is in [demand] linear) and is not absorbed alone.
func (s *Spec) checkLogNormal() error {
	d := &s.Demand
	price := s.Columns.Price
	if !contains(d.Linear, price) {
		return fmt.Errorf(`[demand] price_distribution = "lognormal" needs price %q in [demand] linear: its β is the location of ln(−α)`, price)
	}
	if len(d.Linear) < 2 && len(d.Absorb) == 0 {
		return errors.New(`[demand] price_distribution = "lognormal" takes price out of the linear part: [demand] linear needs another column (such as the constant "1")`)
	}
	if slices.Contains(s.Instruments.Generate, "optimal") {
		return errors.New(`[instruments] generate: "optimal" is not available with price_distribution = "lognormal"`)
	}
	if s.HasSupply() {
		return errors.New(`[supply] is not available with price_distribution = "lognormal" (the cost equation moves a linear price coefficient); estimate demand alone`)
	}
	return nil
}

// RhoStart is [estimation] start_rho as written: a number, or a table of
// numbers by nest name (checkStartRho checks it).
type RhoStart struct{ raw any }

// UnmarshalTOML keeps the value as written.
func (r *RhoStart) UnmarshalTOML(v any) error {
	r.raw = v
	return nil
}

// MarshalTOML writes the value back as a number or an inline table.
func (r *RhoStart) MarshalTOML() ([]byte, error) {
	if t, ok := r.raw.(map[string]any); ok {
		var parts []string
		for _, k := range sortedKeys(t) {
			x, _ := number(t[k])
			parts = append(parts, fmt.Sprintf("%q = %s", k, strconv.FormatFloat(x, 'g', -1, 64)))
		}
		return []byte("{ " + strings.Join(parts, ", ") + " }"), nil
	}
	x, _ := number(r.raw)
	return []byte(strconv.FormatFloat(x, 'g', -1, 64)), nil
}

// table returns the starting ρ by nest, or nil when one number is given.
func (r *RhoStart) table() map[string]any {
	if r == nil {
		return nil
	}
	t, _ := r.raw.(map[string]any)
	return t
}

// Of returns the starting ρ of nest g ("all" for one ρ), if the spec gives
// one.
func (r *RhoStart) Of(g string) (float64, bool) {
	if r == nil {
		return 0, false
	}
	if t := r.table(); t != nil {
		return number(t[g])
	}
	return number(r.raw)
}

// checkStartRho checks [estimation] start_rho: a number in [0, 1) or a
// table of such numbers by nest (names are checked against the data when
// the model is assembled).
func (s *Spec) checkStartRho() error {
	r := s.Estimation.StartRho
	if r == nil {
		return nil
	}
	if !s.Nested() {
		return errors.New("[estimation] start_rho is for a nested logit: set [demand] nests")
	}
	check := func(what string, x any) error {
		f, ok := number(x)
		if !ok || !(f >= 0 && f < 1) {
			return fmt.Errorf("[estimation] start_rho%s = %v: a nesting parameter is a number in [0, 1)", what, x)
		}
		return nil
	}
	if t := r.table(); t != nil {
		if !s.ByNest() {
			return errors.New(`[estimation] start_rho is a table by nest, but [demand] nesting is not "by-nest": give one number`)
		}
		for _, k := range sortedKeys(t) {
			if err := check(fmt.Sprintf(" for nest %q", k), t[k]); err != nil {
				return err
			}
		}
		return nil
	}
	return check("", r.raw)
}

// number returns a TOML number as a float64.
func number(x any) (float64, bool) {
	switch v := x.(type) {
	case float64:
		return v, !math.IsNaN(v) && !math.IsInf(v, 0)
	case int64:
		return float64(v), true
	}
	return 0, false
}

// checkStartCholesky checks [estimation] start_cholesky: entries of the
// lower triangle of L, rows and columns among the random columns.
func (s *Spec) checkStartCholesky() error {
	sc := s.Estimation.StartCholesky
	if len(sc) == 0 {
		return nil
	}
	if !s.FullCovariance() {
		return errors.New(`[estimation] start_cholesky is for random_covariance = "full"`)
	}
	random := s.Demand.Random
	for _, row := range sortedKeys(sc) {
		r := slices.Index(random, row)
		if r < 0 {
			return fmt.Errorf("[estimation] start_cholesky names row %q, which is not in [demand] random", row)
		}
		for _, col := range sortedKeys(sc[row]) {
			c := slices.Index(random, col)
			switch {
			case c < 0:
				return fmt.Errorf("[estimation] start_cholesky names column %q, which is not in [demand] random", col)
			case c > r:
				return fmt.Errorf("[estimation] start_cholesky: %s × %s is above the diagonal; L is lower triangular in the order of [demand] random", row, col)
			case c == r && sc[row][col] < 0:
				return fmt.Errorf("[estimation] start_cholesky: the diagonal entry %s × %s must be ≥ 0", row, col)
			}
		}
	}
	return nil
}
