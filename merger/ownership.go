package merger

import (
	"fmt"
	"slices"
	"strings"

	"rcdemand/data"
	"rcdemand/demand"
)

// Reassignment gives a product a new owner: in one market, or in every
// market where the product is sold when Market is empty.
type Reassignment struct {
	Market    string
	Product   string
	FirmAfter string
	Row       int // data row in the ownership file (1-based), for messages
	Line      int // its line when the file is CSV, else 0
}

// Ownership is a change of ownership read from a table (see ReadOwnership).
type Ownership struct {
	File    string
	Changes []Reassignment
}

// ReadOwnership reads an ownership table (CSV or Parquet) with columns
// product and firm_after, and optionally market (an empty cell means every
// market). Any text is a valid name, commas included; names are matched
// exactly, case and inner spaces included, after trimming spaces at both
// ends (as the products table's names are).
func ReadOwnership(path string) (*Ownership, error) {
	t, err := data.ReadTable(path)
	if err != nil {
		return nil, err
	}
	prod, err := t.Strings("product")
	if err != nil {
		return nil, err
	}
	firm, err := t.Strings("firm_after")
	if err != nil {
		return nil, err
	}
	var mkt []string
	if t.Has("market") {
		if mkt, err = t.StringsOrEmpty("market"); err != nil {
			return nil, err
		}
	}
	o := &Ownership{File: path}
	for i := range prod {
		r := Reassignment{Product: strings.TrimSpace(prod[i]), FirmAfter: strings.TrimSpace(firm[i]), Row: t.Row(i), Line: t.Line(i)}
		if mkt != nil {
			r.Market = strings.TrimSpace(mkt[i])
		}
		o.Changes = append(o.Changes, r)
	}
	if len(o.Changes) == 0 {
		return nil, &data.InputError{File: path, Msg: "no rows: list the products that change owner (columns product, firm_after, optional market)"}
	}
	return o, nil
}

// errorf returns an error about reassignment r of the ownership file.
func (o *Ownership) errorf(r Reassignment, column, format string, args ...any) error {
	return &data.InputError{File: o.File, Row: r.Row, Line: r.Line, Column: column, Msg: fmt.Sprintf(format, args...)}
}

// numbering numbers firm names in order of first appearance.
type numbering struct {
	index map[string]int
	names []string // by number
}

// of returns the number of firm name, numbering it when it is new.
func (n *numbering) of(name string) int {
	if n.index == nil {
		n.index = map[string]int{}
	}
	k, ok := n.index[name]
	if !ok {
		k = len(n.names)
		n.index[name] = k
		n.names = append(n.names, name)
	}
	return k
}

// all returns the number of each of firms.
func (n *numbering) all(firms []string) []int {
	out := make([]int, len(firms))
	for i, f := range firms {
		out[i] = n.of(f)
	}
	return out
}

// owners is the ownership of every row before and after a scenario.
type owners struct {
	numbering          // of the firms, before and after
	pre, post []int    // firm number per row
	merging   []bool   // the row's owner after the change is a party
	parties   []string // firms that gain products, in order of first appearance
}

// resolveOwners applies a scenario's --combine, then its ownership table
// (which may override the combination product by product), to the firm
// column of p. The parties are the firms that own, after the change, a
// product they did not own before; a row is "merging" when its owner after
// the change is a party.
func resolveOwners(p *data.Products, sc Scenario) (*owners, error) {
	if p.Firm == nil {
		return nil, fmt.Errorf("%s: the products table has no firm column %q: ownership is needed for the supply side", p.File, p.Cols.Firm)
	}
	o := &owners{}
	if len(sc.Combine) > 0 || sc.Ownership == nil {
		pre, post, num, err := combineOwners(p.Firm, sc)
		if err != nil {
			return nil, fmt.Errorf("%s: column %q: %v", p.File, p.Cols.Firm, err)
		}
		o.pre, o.post, o.numbering = pre, post, num
	} else {
		o.pre = o.all(p.Firm)
		o.post = slices.Clone(o.pre)
	}
	if sc.Ownership != nil {
		if err := o.reassign(p, sc.Ownership); err != nil {
			return nil, err
		}
	}
	gains := map[int]bool{}
	for n := range o.pre {
		if o.post[n] != o.pre[n] && !gains[o.post[n]] {
			gains[o.post[n]] = true
			o.parties = append(o.parties, o.names[o.post[n]])
		}
	}
	if len(o.parties) == 0 {
		if sc.Ownership == nil {
			return nil, fmt.Errorf("the merger moves no product to another firm")
		}
		return nil, fmt.Errorf("%s: the ownership change moves no product to another firm", sc.Ownership.File)
	}
	o.merging = make([]bool, len(o.pre))
	for n := range o.post {
		o.merging[n] = gains[o.post[n]]
	}
	return o, nil
}

// reassign moves the products of an ownership table to their new owners.
func (o *owners) reassign(p *data.Products, own *Ownership) error {
	set := map[int]int{} // row → index of the change that set it
	for k, r := range own.Changes {
		if r.Product == "" {
			return own.errorf(r, "product", "empty product name")
		}
		if r.FirmAfter == "" {
			return own.errorf(r, "firm_after", "empty firm name")
		}
		if r.Market != "" && !slices.ContainsFunc(p.Markets, func(m data.Market) bool { return m.ID == r.Market }) {
			return own.errorf(r, "market", "market %q is not in %s (markets are: %s)", r.Market, p.File, strings.Join(firstN(marketIDs(p), 12), ", "))
		}
		f := o.of(r.FirmAfter)
		found := false
		for n := range p.Product {
			if p.Product[n] != r.Product || (r.Market != "" && p.Market[n] != r.Market) {
				continue
			}
			found = true
			if j, ok := set[n]; ok && o.post[n] != f {
				return own.errorf(r, "firm_after", "product %q in market %q is given to %q here and to %q in data row %d",
					r.Product, p.Market[n], r.FirmAfter, own.Changes[j].FirmAfter, own.Changes[j].Row)
			}
			set[n] = k
			o.post[n] = f
		}
		if !found {
			where := "any market"
			if r.Market != "" {
				where = fmt.Sprintf("market %q", r.Market)
			}
			return own.errorf(r, "product", "product %q is not sold in %s of %s (names are matched exactly, case included, after trimming spaces)", r.Product, where, p.File)
		}
	}
	return nil
}

func marketIDs(p *data.Products) []string {
	ids := make([]string, len(p.Markets))
	for k, m := range p.Markets {
		ids[k] = m.ID
	}
	return ids
}

// DiversionToPartners sums market t's diversion ratios of the parties'
// products by destination: to the products a party gains or joins (same
// owner after, another owner before), to every other product, and to the
// outside good. firmPre and firmPost are the owners of the market's
// products before and after; merging marks the parties' products.
func DiversionToPartners(f *demand.Fitted, t int, firmPre, firmPost []string, merging []bool) (names []string, partner, rivals, outside []float64) {
	p := f.Model.Products
	mk := p.Markets[t]
	D := f.Diversion(t)
	J := mk.Len()
	for j := 0; j < J; j++ {
		if !merging[j] {
			continue
		}
		var pa, ri float64
		for l := 0; l < J; l++ {
			switch {
			case l == j:
			case firmPost[l] == firmPost[j] && firmPre[l] != firmPre[j]:
				pa += D.At(j, l)
			default:
				ri += D.At(j, l)
			}
		}
		names = append(names, p.Product[mk.Start+j])
		partner, rivals, outside = append(partner, pa), append(rivals, ri), append(outside, D.At(j, J))
	}
	return names, partner, rivals, outside
}
