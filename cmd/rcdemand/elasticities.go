package main

import (
	"fmt"
	"io"
	"math"

	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/demand"
)

func init() { extraCommands = append(extraCommands, newElasticities) }

// outsideGood names the outside good in the to_product column of tables.
const outsideGood = "outside good"

func newElasticities() *cobra.Command {
	var market, out string
	var allowChanged bool
	cmd := &cobra.Command{
		Use:   "elasticities RESULTS.json",
		Short: "Price elasticities and diversion ratios at the estimates",
		Long: `elasticities prints one market's price elasticities and diversion ratios
(the first market, or --market), in blocks of columns that fit the screen.

--out writes them in long form (.csv or .parquet), for every market or for
the --market given: columns market, product, to_product, elasticity and
diversion. elasticity is the % change in product's share per 1% rise in the
price of to_product; diversion is the share of product's lost sales that go
to to_product when product's price rises. The row with to_product "outside
good" has only a diversion; a product's own row has only an elasticity (the
cells left empty). The table can be given to "rcdemand screen --diversion".`,
		Example: `  rcdemand elasticities results.json --market 7
  rcdemand elasticities results.json --out elasticities.parquet
  rcdemand elasticities results.json --market 7 --out market7.csv`,
		Args: exactArgs("RESULTS.json"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := tableFlag("--out", out); err != nil {
				return err
			}
			if err := checkOutputs([]string{args[0]}, out); err != nil {
				return err // before the model is loaded and inverted
			}
			msg := newMessages(cmd)
			_, f, err := loadFitted(args[0], allowChanged, msg)
			if err != nil {
				return err
			}
			if err := checkOutputs(append(f.Model.Inputs(), args[0]), out); err != nil {
				return err
			}
			p := f.Model.Products
			markets := make([]int, len(p.Markets))
			for t := range markets {
				markets[t] = t
			}
			if market != "" {
				t, err := p.MarketOf(market)
				if err != nil {
					return err
				}
				markets = []int{t}
			}
			if out != "" {
				if err := writeElasticities(out, f, markets, append(f.Model.Inputs(), args[0])); err != nil {
					return err
				}
				fmt.Fprintf(cmd.OutOrStdout(), "wrote %s (%d market(s), long form)\n", out, len(markets))
				if market == "" {
					return nil
				}
				fmt.Fprintln(cmd.OutOrStdout())
			}
			printMarketMatrices(cmd.OutOrStdout(), f, markets[0])
			return nil
		},
	}
	cmd.Flags().StringVar(&market, "market", "", "market to print or write (default: print the first, write all)")
	cmd.Flags().StringVar(&out, "out", "", "write the elasticities and diversion ratios in long form (.csv or .parquet)")
	cmd.Flags().BoolVar(&allowChanged, "allow-changed-data", false, "proceed, with a warning, when the data changed since estimation")
	return cmd
}

// printMarketMatrices prints market t's elasticity and diversion matrices
// in blocks of columns that fit the page.
func printMarketMatrices(w io.Writer, f *demand.Fitted, t int) {
	p := f.Model.Products
	mk := p.Markets[t]
	names := p.Product[mk.Start:mk.End]
	E := f.Elasticities(t)
	D := f.Diversion(t)
	fmt.Fprintf(w, "Market %s: price elasticities\n(row j, column l: %% change in the share of j per 1%% rise in the price of l)\n", mk.ID)
	matrixBlocks(w, names, names, E.At, 3)
	fmt.Fprintf(w, "\n%s\n", wrap(fmt.Sprintf("Market %s: diversion ratios (row j, column l: share of j's lost sales that go to l)", mk.ID), ""))
	to := append(append([]string(nil), names...), outsideGood)
	matrixBlocks(w, names, to, func(j, l int) float64 {
		if j == l {
			return math.NaN()
		}
		return D.At(j, l)
	}, 3)
	fmt.Fprintf(w, "\naggregate elasticity of inside demand (uniform 1%% rise in all prices): %.3f\n", f.AggregateElasticity(t))
}

// writeElasticities writes the long-form elasticities and diversion ratios
// of the given markets: empty cells where a figure does not exist.
func writeElasticities(path string, f *demand.Fitted, markets []int, inputs []string) error {
	p := f.Model.Products
	var mkt, from, to []string
	var el, dv []float64
	for _, t := range markets {
		mk := p.Markets[t]
		E := f.Elasticities(t)
		D := f.Diversion(t)
		J := mk.Len()
		for j := 0; j < J; j++ {
			for l := 0; l <= J; l++ {
				mkt = append(mkt, mk.ID)
				from = append(from, p.Product[mk.Start+j])
				switch {
				case l == J:
					to = append(to, outsideGood)
					el = append(el, math.NaN()) // the outside good has no price
				default:
					to = append(to, p.Product[mk.Start+l])
					el = append(el, E.At(j, l))
				}
				if l == j {
					dv = append(dv, math.NaN()) // no diversion to itself
				} else {
					dv = append(dv, D.At(j, l))
				}
			}
		}
	}
	var fr data.Frame
	fr.Add("market", mkt)
	fr.Add("product", from)
	fr.Add("to_product", to)
	fr.Add("elasticity", el)
	fr.Add("diversion", dv)
	return data.WriteFrame(path, inputs, &fr)
}
