package main

import (
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/merger"
)

func init() { extraCommands = append(extraCommands, newScreen) }

func newScreen() *cobra.Command {
	var combine, margin, diversion, out string
	var efficiency float64
	cols := data.Columns{}
	cmd := &cobra.Command{
		Use:   "screen PRODUCTS.csv --combine \"A,B\"",
		Short: "Concentration and pricing-pressure screens without estimating demand",
		Long: `screen reads a products table and reports, per market, HHI and ΔHHI on
inside shares with the structural presumptions of the 2023 US Merger
Guidelines, and, when margins are given, UPP and GUPPI for each merging
product (Farrell & Shapiro 2010) and a merger simulation with a logit
calibrated to the margins (Werden & Froeb 1994).`,
		Example: `  rcdemand screen products.csv --combine "Harbor Roast,Lumen Beverages"
  rcdemand screen products.csv --combine "A,B" --margin margin --diversion diversion.csv --out screen.json`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			if combine == "" {
				return fmt.Errorf("--combine is required, e.g. --combine \"FirmA,FirmB\"")
			}
			var numeric []string
			if margin != "" {
				numeric = append(numeric, margin)
			}
			p, err := data.LoadProducts(args[0], cols, numeric)
			if err != nil {
				return err
			}
			opt := merger.ScreenOptions{Scenario: merger.Scenario{Combine: splitList(combine)}, Efficiency: efficiency}
			if margin != "" {
				if opt.Margin, err = p.Floats(margin); err != nil {
					return err
				}
				for i, m := range opt.Margin {
					if !(m > 0 && m < 1) {
						return p.Errorf(i, margin, "margin %v is not in (0, 1)", m)
					}
				}
			}
			if diversion != "" && diversion != "proportional" {
				if opt.Diversion, err = readDiversion(diversion); err != nil {
					return err
				}
			}
			sc, err := merger.RunScreen(p, opt)
			if err != nil {
				return err
			}
			if out != "" {
				if err := data.WriteJSON(out, []string{args[0], diversion}, sc); err != nil {
					return err
				}
			}
			printScreen(cmd.OutOrStdout(), sc)
			if out != "" {
				fmt.Fprintf(cmd.OutOrStdout(), "\nwrote %s\n", out)
			}
			return nil
		},
	}
	cmd.Flags().StringVar(&combine, "combine", "", "comma-separated firms that merge (required)")
	cmd.Flags().StringVar(&margin, "margin", "", "column of price-cost margins (p − c)/p")
	cmd.Flags().StringVar(&diversion, "diversion", "proportional", `"proportional" (to shares) or a table with columns market, product, to_product, diversion`)
	cmd.Flags().Float64Var(&efficiency, "efficiency", 0, "efficiency credit in UPP, as a share of marginal cost")
	cmd.Flags().StringVar(&out, "out", "", "write the screen as JSON")
	cmd.Flags().StringVar(&cols.Market, "market-column", "market", "market column")
	cmd.Flags().StringVar(&cols.Product, "product-column", "product", "product column")
	cmd.Flags().StringVar(&cols.Firm, "firm-column", "firm", "firm column")
	cmd.Flags().StringVar(&cols.Share, "share-column", "share", "share column")
	cmd.Flags().StringVar(&cols.Price, "price-column", "price", "price column")
	return cmd
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
	d, err := t.Floats("diversion")
	if err != nil {
		return nil, err
	}
	out := map[[3]string]float64{}
	for i := range d {
		if d[i] < 0 || d[i] > 1 {
			return nil, t.Errorf(i, "diversion", "%v is not in [0, 1]", d[i])
		}
		out[[3]string{cols[0][i], cols[1][i], cols[2][i]}] = d[i]
	}
	return out, nil
}

func printScreen(w io.Writer, sc *merger.Screen) {
	fmt.Fprintf(w, "Screen of a merger of %v (observed shares, no demand estimation)\n\n", sc.Combine)
	fmt.Fprintf(w, "  %-12s %9s %9s %8s %12s  %s\n", "market", "HHI pre", "HHI post", "ΔHHI", "merged share", "2023 Guidelines presumption")
	flagged := 0
	for _, m := range sc.Markets {
		flag := "no"
		switch {
		case m.FlagHHI && m.FlagShare:
			flag = "yes: HHI > 1,800 and share > 30%, ΔHHI > 100"
		case m.FlagHHI:
			flag = "yes: HHI > 1,800, ΔHHI > 100"
		case m.FlagShare:
			flag = "yes: share > 30%, ΔHHI > 100"
		}
		if flag != "no" {
			flagged++
		}
		fmt.Fprintf(w, "  %-12s %9.0f %9.0f %8.0f %11.1f%%  %s\n", trunc(m.Market, 12), m.HHIPre, m.HHIPost, m.DeltaHHI, m.MergedShare, flag)
	}
	fmt.Fprintf(w, "  presumption met in %d of %d markets\n", flagged, len(sc.Markets))
	if len(sc.Products) > 0 && sc.Products[0].GUPPI != 0 {
		fmt.Fprintf(w, "\n  %-12s %-22s %10s %10s %10s %14s\n", "market", "product", "diversion", "UPP", "GUPPI", "logit Δp")
		for _, p := range sc.Products {
			fmt.Fprintf(w, "  %-12s %-22s %10.4f %10.4f %9.2f%% %+13.2f%%\n", trunc(p.Market, 12), trunc(p.Product, 22), p.DiversionToPartner, p.UPP, 100*p.GUPPI, p.LogitPriceChangePct)
		}
	}
	for _, n := range sc.Notes {
		fmt.Fprintf(w, "  note: %s\n", n)
	}
	fmt.Fprintf(w, "\n%s\n", caution)
}
