package main

import (
	"embed"
	"fmt"
	"os"
	"path/filepath"

	"github.com/spf13/cobra"
)

// The demo data: an invented cold-brew coffee market (four invented firms,
// ten brands, 50 cities), drawn by "rcdemand synth" from
// examples/coldbrew/truth.toml.
//
//go:embed demodata/spec.toml demodata/products.csv demodata/agents.csv
var demoFiles embed.FS

func newDemo() *cobra.Command {
	var out string
	cmd := &cobra.Command{
		Use:   "demo",
		Short: "Run the whole job on built-in invented data",
		Long: `demo writes an invented data set (cold-brew coffee brands of four invented
firms in 50 cities, with consumer incomes) and its spec to a folder, then
estimates a random-coefficients logit with a price × income interaction,
prints the elasticities of one city, simulates a merger of two firms with
intervals from parameter draws, and writes an HTML report.`,
		Example: `  rcdemand demo
  rcdemand demo --out demo-run`,
		Args: noArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			w := cmd.OutOrStdout()
			msg := newMessages(cmd)
			dir := out
			if dir == "" {
				var err error
				if dir, err = os.MkdirTemp("", "rcdemand-demo-"); err != nil {
					return err
				}
			} else if err := os.MkdirAll(dir, 0o755); err != nil {
				return err
			}
			for _, name := range []string{"spec.toml", "products.csv", "agents.csv"} {
				raw, err := demoFiles.ReadFile("demodata/" + name)
				if err != nil {
					return internalError{err}
				}
				if err := os.WriteFile(filepath.Join(dir, name), raw, 0o644); err != nil {
					return err
				}
			}
			fmt.Fprintf(w, "rcdemand demo: invented data and spec written to %s\n\n", dir)
			spec := filepath.Join(dir, "spec.toml")
			results := filepath.Join(dir, "results.json")
			// A partial result (not converged, no covariance) is reported
			// and the demo goes on, so the whole job can be seen.
			_, _, estErr := runEstimate(spec, estimateFlags{out: results, productsOut: filepath.Join(dir, "products_fitted.csv"), starts: 1, seed: 1}, w, msg)
			if estErr != nil && !isPartial(estErr) {
				return estErr
			}
			fmt.Fprintln(w)
			_, fit, err := loadFitted(results, false, msg)
			if err != nil {
				return err
			}
			printMarketMatrices(w, fit, 0)
			fmt.Fprintln(w)
			mergerOut := filepath.Join(dir, "merger.json")
			if _, err := runMerger(results, mergerFlags{combine: "Harbor Roast,Lumen Beverages", out: mergerOut, draws: 200, seed: 1}, w, msg); err != nil && !isPartial(err) {
				return err
			}
			if err := writeReport(results, reportFlags{merger: mergerOut, out: filepath.Join(dir, "report.html")}, msg); err != nil {
				return err
			}
			fmt.Fprintf(w, "wrote %s\n", filepath.Join(dir, "report.html"))
			fmt.Fprintf(w, "\nAll outputs are in %s\n", dir)
			return estErr
		},
	}
	cmd.Flags().StringVar(&out, "out", "", "folder for the demo's data and outputs (default: a new temporary folder)")
	return cmd
}
