package data

import "fmt"

// Columns maps rcdemand's roles to the column names of a products table.
// Firm may name a column that is absent when only demand is estimated; it is
// then left empty.
type Columns struct {
	Market  string
	Product string
	Firm    string
	Share   string
	Price   string
}

// Market is one market's contiguous block of rows [Start, End).
type Market struct {
	ID         string
	Start, End int
}

// Len returns the number of products in the market.
func (m Market) Len() int { return m.End - m.Start }

// Products is a validated products table with its market index. The rows of
// Table are grouped by market; Table.Row gives each row's place in the file.
type Products struct {
	*Table
	Cols    Columns
	Market  []string
	Product []string
	Firm    []string // nil when the table has no firm column
	Share   []float64
	Price   []float64
	Markets []Market
}

// LoadProducts reads and validates a products table. Numeric lists further
// columns that must hold finite numbers (characteristics, instruments).
func LoadProducts(path string, cols Columns, numeric []string) (*Products, error) {
	t, err := ReadTable(path)
	if err != nil {
		return nil, err
	}
	return NewProducts(t, cols, numeric)
}

// NewProducts validates a table already read and groups it by market. When
// the rows must be reordered, the result holds a reordered copy and t is
// left as it was.
func NewProducts(t *Table, cols Columns, numeric []string) (*Products, error) {
	for _, c := range []string{cols.Market, cols.Product, cols.Share, cols.Price} {
		if _, err := t.col(c); err != nil {
			return nil, err
		}
	}
	for _, c := range numeric {
		if _, err := t.col(c); err != nil {
			return nil, err
		}
	}
	mkt, err := t.Strings(cols.Market)
	if err != nil {
		return nil, err
	}
	// Group rows by market, stable, markets in order of first appearance.
	first := map[string]int{}
	var ids []string
	count := map[string]int{}
	for _, m := range mkt {
		if _, ok := first[m]; !ok {
			first[m] = len(ids)
			ids = append(ids, m)
		}
		count[m]++
	}
	start := make([]int, len(ids)+1)
	for k, id := range ids {
		start[k+1] = start[k] + count[id]
	}
	perm := make([]int, len(mkt))
	next := append([]int(nil), start[:len(ids)]...)
	contiguous := true
	for i, m := range mkt {
		k := first[m]
		perm[next[k]] = i
		if next[k] != i {
			contiguous = false
		}
		next[k]++
	}
	if !contiguous {
		t = t.shallow() // the caller's table keeps its order
		t.permute(perm)
	}
	p := &Products{Table: t, Cols: cols}
	if p.Market, err = t.Strings(cols.Market); err != nil {
		return nil, err
	}
	if p.Product, err = t.Strings(cols.Product); err != nil {
		return nil, err
	}
	if cols.Firm != "" && t.Has(cols.Firm) {
		if p.Firm, err = t.Strings(cols.Firm); err != nil {
			return nil, err
		}
	}
	if p.Share, err = t.Floats(cols.Share); err != nil {
		return nil, err
	}
	if p.Price, err = t.Floats(cols.Price); err != nil {
		return nil, err
	}
	for _, c := range numeric {
		if _, err := t.Floats(c); err != nil {
			return nil, err
		}
	}
	for k, id := range ids {
		p.Markets = append(p.Markets, Market{ID: id, Start: start[k], End: start[k+1]})
	}
	for _, m := range p.Markets {
		seen := map[string]bool{}
		sum := 0.0
		for i := m.Start; i < m.End; i++ {
			s := p.Share[i]
			if !(s > 0 && s < 1) {
				return nil, t.Errorf(i, cols.Share, "%v is not in (0, 1)", s)
			}
			sum += s
			if seen[p.Product[i]] {
				return nil, t.Errorf(i, cols.Product, "product %q appears twice in market %q", p.Product[i], m.ID)
			}
			seen[p.Product[i]] = true
		}
		if sum >= 1 {
			return nil, t.Errorf(m.End-1, cols.Share,
				"inside shares of market %q sum to %.6g, leaving no outside good (they must sum to less than 1)", m.ID, sum)
		}
	}
	return p, nil
}

// OutsideShare returns s_0 = 1 − Σ_j s_j for market m.
func (p *Products) OutsideShare(m Market) float64 {
	s0 := 1.0
	for i := m.Start; i < m.End; i++ {
		s0 -= p.Share[i]
	}
	return s0
}

// MarketOf returns the index of the market with the given id.
func (p *Products) MarketOf(id string) (int, error) {
	for k, m := range p.Markets {
		if m.ID == id {
			return k, nil
		}
	}
	return 0, fmt.Errorf("%s: no market %q", p.File, id)
}
