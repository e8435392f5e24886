package demand

import (
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"rcdemand/data"
)

// DataPath resolves a data path of the spec ([data] products or agents,
// named by key) against the spec file's folder and checks that the file
// exists. When it does not, but the path as written exists relative to the
// working directory, the error says that spec paths are relative to the
// spec and how to write this one.
func (s *Spec) DataPath(key, p string) (string, error) {
	resolved := s.Path(p)
	if _, err := os.Stat(resolved); !errors.Is(err, os.ErrNotExist) {
		return resolved, nil
	}
	dir := filepath.Dir(s.File)
	if !filepath.IsAbs(p) {
		if _, err := os.Stat(p); err == nil && filepath.Clean(dir) != "." {
			hint := data.RelativeTo(p, s.File)
			return "", fmt.Errorf("%s: file does not exist ([data] %s = %q in %s): paths in a spec are relative to the spec's folder %s, not to the working directory; write %s = %q",
				resolved, key, p, s.File, dir, key, hint)
		}
	}
	return "", fmt.Errorf("%s: file does not exist ([data] %s = %q in %s; paths in a spec are relative to the spec's folder)", resolved, key, p, s.File)
}

// checkPrice requires the price column among the linear columns (the
// supply side and every price effect need its coefficient). It is checked
// once the products table is read, so that a misspelt [columns] price is
// reported as a column missing from the table.
func (s *Spec) checkPrice() error {
	if !contains(s.Demand.Linear, s.Columns.Price) && len(s.Demand.Absorb) == 0 {
		return &SpecError{s.File, fmt.Sprintf("[demand] linear must include the price column %q ([columns] price)", s.Columns.Price)}
	}
	return nil
}

// checkUnused validates the agents and integration sections, whether the
// model uses them or not (a mistake in a section that is not used today is
// one tomorrow).
func (s *Spec) checkUnused() error {
	d := &s.Demand
	if s.Data.Agents != "" {
		for _, r := range d.Random {
			if _, ok := s.Agents.Tastes[r]; !ok {
				return fmt.Errorf("[agents] tastes has no column for random coefficient %q: an agents table must carry a taste draw for every random coefficient", r)
			}
		}
	}
	for _, k := range sortedKeys(s.Agents.Tastes) {
		if !contains(d.Random, k) {
			return fmt.Errorf("[agents] tastes names %q, which is not in [demand] random", k)
		}
	}
	if len(s.Agents.Tastes) > 0 && s.Data.Agents == "" {
		return errors.New("[agents] tastes is given but [data] agents is not: name the agents table, or remove [agents]")
	}
	in := s.Integration
	if !contains(Rules, in.Rule) {
		return fmt.Errorf("[integration] rule %q is not one of %s", in.Rule, strings.Join(Rules, ", "))
	}
	if in.Draws < 1 || in.Nodes < 1 || in.Level < 1 {
		return errors.New("[integration] draws, nodes and level must be positive")
	}
	if err := distinct("[instruments] generate", s.Instruments.Generate); err != nil {
		return err
	}
	if err := distinct("[instruments] excluded", s.Instruments.Excluded); err != nil {
		return err
	}
	return distinct("[demand] absorb", d.Absorb)
}

// roleHint adds to a missing-column error of the products table the key of
// the spec that names the column, e.g. `([columns] price in model.toml)`.
func (s *Spec) roleHint(err error) error {
	var ie *data.InputError
	if !errors.As(err, &ie) || ie.Row != 0 || ie.Column == "" || !strings.HasPrefix(ie.Msg, "no such column") {
		return err
	}
	c := s.Columns
	for _, r := range []struct{ key, col string }{{"market", c.Market}, {"product", c.Product}, {"share", c.Share}, {"price", c.Price}, {"market_size", c.MarketSize}} {
		if r.col == ie.Column {
			ie.Msg += fmt.Sprintf("; it is [columns] %s in %s", r.key, s.File)
			return err
		}
	}
	d := &s.Demand
	for _, r := range []struct {
		key  string
		cols []string
	}{
		{"[demand] linear", d.Linear}, {"[demand] random", d.Random}, {"[demand] interactions", sortedKeys(d.Interactions)},
		{"[instruments] excluded", s.Instruments.Excluded}, {"[supply] cost", s.Supply.Cost}, {"[supply] excluded", s.Supply.Excluded},
	} {
		if slices.Contains(r.cols, ie.Column) {
			ie.Msg += fmt.Sprintf("; %s names it in %s", r.key, s.File)
			return err
		}
	}
	return err
}
