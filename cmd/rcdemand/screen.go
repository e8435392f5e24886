package main

import (
	"errors"
	"fmt"
	"io"
	"path/filepath"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/demand"
	"rcdemand/merger"
)

func init() { extraCommands = append(extraCommands, newScreen) }

type screenFlags struct {
	combine, ownership, margin, diversion, out string
	efficiency                                 float64
	cols                                       data.Columns
}

func newScreen() *cobra.Command {
	var f screenFlags
	cmd := &cobra.Command{
		Use:   "screen (SPEC.toml | PRODUCTS.csv) (--combine \"A,B\" | --ownership FILE.csv)",
		Short: "Concentration and pricing-pressure screens without estimating demand",
		Long: `screen reads a products table — named by a spec file, whose [columns] it
uses, or given directly with the --*-column flags — and reports, per market,
HHI and ΔHHI on observed inside shares with the structural presumption of the
2023 US Merger Guidelines, and, when margins are given, for each of the
parties' products:
  diversion to the partners' products (proportional to shares, or --diversion);
  UPP = Σ_k D_jk (p_k − c_k) − E·c_j, in the currency of prices per unit sold,
        over the partners' products k, with the efficiency credit E of
        --efficiency (a proportion of the product's own marginal cost c_j);
  GUPPI = Σ_k D_jk (p_k − c_k) / p_j, in percent of the product's price
        (Farrell & Shapiro 2010);
  the price change of a logit calibrated to the margins (Werden & Froeb 1994).
Margins are (p − c)/p. The terminal shows the markets and products with the
largest ΔHHI and GUPPI; --out has them all.

` + namesHelp,
		Example: `  rcdemand screen model.toml --combine "Harbor Roast,Lumen Beverages"
  rcdemand screen products.csv --combine "A,B" --margin margin --efficiency 0.05 --out screen.json
  rcdemand screen model.toml --combine "A,B" --margin margin --diversion elasticities.csv`,
		Args: exactArgs("SPEC.toml or PRODUCTS.csv"),
		RunE: func(cmd *cobra.Command, args []string) error {
			return runScreen(cmd, args[0], f)
		},
	}
	cmd.Flags().StringVar(&f.combine, "combine", "", "comma-separated firms that merge, e.g. \"A,B\"")
	cmd.Flags().StringVar(&f.ownership, "ownership", "", "table of ownership changes: columns product, firm_after, optional market")
	cmd.Flags().StringVar(&f.margin, "margin", "", "column of price-cost margins (p − c)/p, each in (0, 1)")
	cmd.Flags().StringVar(&f.diversion, "diversion", "proportional", `"proportional" (to shares) or a table with columns market, product, to_product, diversion (as written by rcdemand elasticities --out)`)
	cmd.Flags().Float64Var(&f.efficiency, "efficiency", 0, "efficiency credit E in UPP, a proportion of marginal cost in [0, 1): 0.05 credits a 5% cost saving")
	cmd.Flags().StringVar(&f.out, "out", "", "write the whole screen as JSON")
	cmd.Flags().StringVar(&f.cols.Market, "market-column", "market", "market column (default: the spec's, else market)")
	cmd.Flags().StringVar(&f.cols.Product, "product-column", "product", "product column (default: the spec's, else product)")
	cmd.Flags().StringVar(&f.cols.Firm, "firm-column", "firm", "firm column (default: the spec's, else firm)")
	cmd.Flags().StringVar(&f.cols.Share, "share-column", "share", "share column (default: the spec's, else share)")
	cmd.Flags().StringVar(&f.cols.Price, "price-column", "price", "price column (default: the spec's, else price)")
	return cmd
}

// screenTable returns the products table and its columns: those of a spec
// file (where a --*-column flag was not given), or of the flags.
func screenTable(cmd *cobra.Command, arg string, cols data.Columns) (string, data.Columns, error) {
	if !strings.EqualFold(filepath.Ext(arg), ".toml") {
		return arg, cols, nil
	}
	spec, err := demand.ReadSpec(arg)
	if err != nil {
		return "", cols, err
	}
	c := spec.Columns
	for _, x := range []struct {
		flag string
		dst  *string
		v    string
	}{{"market-column", &cols.Market, c.Market}, {"product-column", &cols.Product, c.Product}, {"firm-column", &cols.Firm, c.Firm},
		{"share-column", &cols.Share, c.Share}, {"price-column", &cols.Price, c.Price}} {
		if !cmd.Flags().Changed(x.flag) {
			*x.dst = x.v
		}
	}
	return spec.Path(spec.Data.Products), cols, nil
}

func runScreen(cmd *cobra.Command, arg string, f screenFlags) error {
	if f.efficiency < 0 || f.efficiency >= 1 {
		return usagef("--efficiency %v: a proportion of marginal cost in [0, 1), e.g. 0.05", f.efficiency)
	}
	sc, err := scenarioFlags(f.combine, "", f.ownership)
	if err != nil {
		return err
	}
	path, cols, err := screenTable(cmd, arg, f.cols)
	if err != nil {
		return err
	}
	var numeric []string
	if f.margin != "" {
		numeric = append(numeric, f.margin)
	}
	if err := checkOutputs([]string{arg, path, f.ownership, f.diversion}, f.out); err != nil {
		return err
	}
	p, err := data.LoadProducts(path, cols, numeric)
	if err != nil {
		return err
	}
	opt := merger.ScreenOptions{Scenario: sc, Efficiency: f.efficiency}
	if f.margin != "" {
		if opt.Margin, err = p.Floats(f.margin); err != nil {
			return err
		}
		for i, m := range opt.Margin {
			if !(m > 0 && m < 1) {
				return p.Errorf(i, f.margin, "margin %v is not in (0, 1)", m)
			}
		}
	}
	inputs := []string{arg, path, f.ownership}
	if f.diversion != "" && f.diversion != "proportional" {
		if opt.Diversion, err = readDiversion(f.diversion); err != nil {
			return err
		}
		inputs = append(inputs, f.diversion)
	}
	res, err := merger.RunScreen(p, opt)
	if err != nil {
		if errors.Is(err, merger.ErrMissingDiversion) {
			return fmt.Errorf("%s: %w", f.diversion, err)
		}
		return err
	}
	if f.out != "" {
		if res.Inputs, err = data.Fingerprints(f.out, "products", path, "ownership", f.ownership); err != nil {
			return err
		}
		if err := data.WriteJSON(f.out, inputs, res); err != nil {
			return err
		}
	}
	printScreen(cmd.OutOrStdout(), res, f.margin != "", f.out)
	newMessages(cmd).notes(res.Notes)
	if f.out != "" {
		fmt.Fprintf(cmd.OutOrStdout(), "\nwrote %s\n", f.out)
	}
	return nil
}

func readDiversion(path string) (map[[3]string]float64, error) {
	t, err := data.ReadTable(path)
	if err != nil {
		return nil, err
	}
	var cols [3][]string
	for k, c := range []string{"market", "product", "to_product"} {
		if cols[k], err = t.Strings(c); err != nil {
			return nil, err
		}
	}
	d, err := t.StringsOrEmpty("diversion")
	if err != nil {
		return nil, err
	}
	out := map[[3]string]float64{}
	for i := range d {
		if d[i] == "" { // a product's own row, as elasticities --out writes it
			continue
		}
		v, err := strconv.ParseFloat(d[i], 64)
		if err != nil {
			return nil, t.Errorf(i, "diversion", "%q is not a number", d[i])
		}
		if !(v >= 0 && v <= 1) {
			return nil, t.Errorf(i, "diversion", "%v is not in [0, 1]", v)
		}
		out[[3]string{cols[0][i], cols[1][i], cols[2][i]}] = v
	}
	return out, nil
}

// printScreen prints a screen: its markets and, when margins were given,
// the pricing pressure of the parties' products.
func printScreen(w io.Writer, sc *merger.Screen, margins bool, outPath string) {
	fmt.Fprintf(w, "Screen of %s (observed shares, no demand estimation)\n\n", ownershipChange(sc.Combine, "", sc.Ownership, sc.Parties))
	flagged := 0
	for _, m := range sc.Markets {
		if m.FlagHHI || m.FlagShare {
			flagged++
		}
	}
	fmt.Fprintf(w, "%s\n", wrap(fmt.Sprintf("2023 US Merger Guidelines: presumption met in %d of %d markets (%s)", flagged, len(sc.Markets), presumptionRule), "  "))
	idx := merger.TopIndices(shownRows, len(sc.Markets), func(k int) float64 { return sc.Markets[k].DeltaHHIFixed })
	t := newTable("  ", col{head: "market", left: true, max: 16}, col{head: twoLines(labelHHIPre)}, col{head: twoLines(labelHHIAfter)},
		col{head: twoLines(labelDeltaHHI)}, col{head: "party\nshare"}, col{head: "presumption", left: true})
	for _, k := range idx {
		m := sc.Markets[k]
		flag := "no"
		switch {
		case m.FlagHHI && m.FlagShare:
			flag = "yes: HHI and share"
		case m.FlagHHI:
			flag = "yes: HHI"
		case m.FlagShare:
			flag = "yes: share"
		}
		t.add(m.Market, thousands(m.HHIPre), thousands(m.HHIPostFixed), thousands(m.DeltaHHIFixed), fixed(m.MergedShare, 1)+"%", flag)
	}
	if len(sc.Markets) > shownRows {
		fmt.Fprintf(w, "\n  The %d of %d markets with the largest %s\n", shownRows, len(sc.Markets), labelDeltaHHI)
	} else {
		fmt.Fprintln(w)
	}
	t.write(w)
	more(w, len(sc.Markets), "markets", outPath)
	if margins && len(sc.Products) > 0 {
		printPressure(w, sc, outPath)
	}
	fmt.Fprintf(w, "\n%s\n", wrap(caution, ""))
}

// printPressure prints the parties' products with the largest GUPPI.
func printPressure(w io.Writer, sc *merger.Screen, outPath string) {
	idx := merger.TopIndices(shownRows, len(sc.Products), func(k int) float64 { return sc.Products[k].GUPPI })
	var upp []float64
	for _, k := range idx {
		upp = append(upp, sc.Products[k].UPP)
	}
	du := decimals(3, upp...)
	t := newTable("  ", col{head: "market", left: true, max: 16}, col{head: "product", left: true, max: 24}, col{head: "diversion\nto partners"},
		col{head: "UPP\n(price units)"}, col{head: "GUPPI\n(% of price)"}, col{head: "calibrated logit\nprice change"})
	for _, k := range idx {
		p := sc.Products[k]
		t.add(p.Market, p.Product, fixed(p.DiversionToPartner, 3), signed(p.UPP, du), fixed(100*p.GUPPI, 2)+"%", pct(p.LogitPriceChangePct))
	}
	fmt.Fprintf(w, "\n  Upward pricing pressure of the parties' products (largest GUPPI first)\n")
	t.write(w)
	more(w, len(sc.Products), "products", outPath)
}

// more says how many rows the terminal did not show.
func more(w io.Writer, n int, what, outPath string) {
	if n <= shownRows {
		return
	}
	where := "in " + outPath
	if outPath == "" {
		where = "with --out FILE.json"
	}
	fmt.Fprintf(w, "  … %d more %s %s\n", n-shownRows, what, where)
}
