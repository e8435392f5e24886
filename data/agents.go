package data

import "math"

// Agents is a validated agents table aligned to a products table: the agents
// of products market k are rows Markets[k].Start..End.
//
// Weight and Values may share memory with the table's columns: read them,
// do not write to them.
type Agents struct {
	*Table
	Weight  []float64
	Values  map[string][]float64 // taste and demographic columns by name
	Markets []Market
}

// NewAgents validates an agents table with columns market, weight and the
// given numeric columns, and aligns it to the markets of p. Like
// NewProducts, it reorders a copy and leaves t as it was.
func NewAgents(t *Table, market, weight string, numeric []string, p *Products) (*Agents, error) {
	for _, c := range append([]string{market, weight}, numeric...) {
		if _, err := t.col(c); err != nil {
			return nil, err
		}
	}
	mkt, err := t.Strings(market)
	if err != nil {
		return nil, err
	}
	index := map[string]int{}
	for k, m := range p.Markets {
		index[m.ID] = k
	}
	count := make([]int, len(p.Markets))
	for i, m := range mkt {
		k, ok := index[m]
		if !ok {
			return nil, t.Errorf(i, market, "market %q is not in the products table %s", m, p.File)
		}
		count[k]++
	}
	for k, c := range count {
		if c == 0 {
			return nil, inputErr(t.File, 0, market, "no agents for market %q of the products table", p.Markets[k].ID)
		}
	}
	start := make([]int, len(p.Markets)+1)
	for k, c := range count {
		start[k+1] = start[k] + c
	}
	next := append([]int(nil), start[:len(p.Markets)]...)
	perm := make([]int, len(mkt))
	sorted := true
	for i, m := range mkt {
		k := index[m]
		perm[next[k]] = i
		if next[k] != i {
			sorted = false
		}
		next[k]++
	}
	if !sorted {
		t = t.shallow() // the caller's table keeps its order
		t.permute(perm)
	}
	a := &Agents{Table: t, Values: map[string][]float64{}}
	if a.Weight, err = t.numbers(weight); err != nil {
		return nil, err
	}
	for _, c := range numeric {
		if a.Values[c], err = t.numbers(c); err != nil {
			return nil, err
		}
	}
	for k, m := range p.Markets {
		am := Market{ID: m.ID, Start: start[k], End: start[k+1]}
		sum := 0.0
		for i := am.Start; i < am.End; i++ {
			if a.Weight[i] < 0 {
				return nil, t.Errorf(i, weight, "negative weight %v", a.Weight[i])
			}
			sum += a.Weight[i]
		}
		if math.Abs(sum-1) > 1e-6 {
			return nil, t.Errorf(am.Start, weight,
				"weights of market %q sum to %.10g, not 1", m.ID, sum)
		}
		a.Markets = append(a.Markets, am)
	}
	return a, nil
}
