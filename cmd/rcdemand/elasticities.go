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

func newElasticities() *cobra.Command {
	var market, out string
	cmd := &cobra.Command{
		Use:   "elasticities RESULTS.json",
		Short: "Price elasticities and diversion ratios at the estimates",
		Example: `  rcdemand elasticities results.json --market 7
  rcdemand elasticities results.json --out elasticities.parquet`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			_, f, err := demand.LoadFitted(args[0])
			if err != nil {
				return err
			}
			p := f.Model.Products
			if out != "" {
				if err := writeElasticities(out, f, append(f.Model.Inputs(), args[0])); err != nil {
					return err
				}
				fmt.Fprintf(cmd.OutOrStdout(), "wrote %s (%d markets, long form)\n", out, len(p.Markets))
				if market == "" {
					return nil
				}
			}
			t := 0
			if market != "" {
				if t, err = p.MarketOf(market); err != nil {
					return err
				}
			}
			printMarketMatrices(cmd.OutOrStdout(), f, t)
			return nil
		},
	}
	cmd.Flags().StringVar(&market, "market", "", "market to print (default: the first)")
	cmd.Flags().StringVar(&out, "out", "", "write all markets in long form (.csv or .parquet)")
	return cmd
}

func printMarketMatrices(w io.Writer, f *demand.Fitted, t int) {
	p := f.Model.Products
	mk := p.Markets[t]
	names := p.Product[mk.Start:mk.End]
	E := f.Elasticities(t)
	D := f.Diversion(t)
	label := func(s string) string {
		if len(s) > 14 {
			return s[:13] + "…"
		}
		return s
	}
	fmt.Fprintf(w, "Market %s: price elasticities (row j, column l: %% change in s_j per 1%% change in p_l)\n", mk.ID)
	fmt.Fprintf(w, "%-16s", "")
	for _, n := range names {
		fmt.Fprintf(w, " %14s", label(n))
	}
	fmt.Fprintln(w)
	for j, n := range names {
		fmt.Fprintf(w, "%-16s", label(n))
		for l := range names {
			fmt.Fprintf(w, " %14.4f", E.At(j, l))
		}
		fmt.Fprintln(w)
	}
	fmt.Fprintf(w, "\nMarket %s: diversion ratios (row j: share of j's lost sales going to column l)\n", mk.ID)
	fmt.Fprintf(w, "%-16s", "")
	for _, n := range names {
		fmt.Fprintf(w, " %14s", label(n))
	}
	fmt.Fprintf(w, " %14s\n", "outside good")
	for j, n := range names {
		fmt.Fprintf(w, "%-16s", label(n))
		for l := 0; l <= len(names); l++ {
			if l == j {
				fmt.Fprintf(w, " %14s", "·")
				continue
			}
			fmt.Fprintf(w, " %14.4f", D.At(j, l))
		}
		fmt.Fprintln(w)
	}
	fmt.Fprintf(w, "\naggregate elasticity of inside demand (uniform 1%% rise in all prices): %.4f\n", f.AggregateElasticity(t))
}

func writeElasticities(path string, f *demand.Fitted, inputs []string) error {
	p := f.Model.Products
	var mkt, from, to []string
	var el, dv []float64
	for t, mk := range p.Markets {
		E := f.Elasticities(t)
		D := f.Diversion(t)
		J := mk.Len()
		for j := 0; j < J; j++ {
			for l := 0; l <= J; l++ {
				mkt = append(mkt, mk.ID)
				from = append(from, p.Product[mk.Start+j])
				if l == J {
					to = append(to, "outside")
					el = append(el, math.NaN()) // diversion only
				} else {
					to = append(to, p.Product[mk.Start+l])
					el = append(el, E.At(j, l))
				}
				dv = append(dv, D.At(j, l))
			}
		}
	}
	var fr data.Frame
	fr.Add("market", mkt)
	fr.Add("product", from)
	fr.Add("with_respect_to", to)
	fr.Add("elasticity", el)
	fr.Add("diversion", dv)
	return data.WriteFrame(path, inputs, &fr)
}
