package main

import (
	"fmt"
	"io"

	"github.com/spf13/cobra"

	"rcdemand/demand"
	"rcdemand/merger"
	"rcdemand/merger/synth"
)

func init() { extraCommands = append(extraCommands, newSynth) }

func newSynth() *cobra.Command {
	var specPath, truthPath, outDir, format string
	var seed uint64
	cmd := &cobra.Command{
		Use:   "synth --spec SPEC.toml --truth TRUTH.toml --out DIR",
		Short: "Draw a synthetic data set from a known model, with Bertrand–Nash prices",
		Long: `synth draws characteristics, cost shifters, demand and cost shocks and
agents, solves every market for Bertrand–Nash prices under the true model,
and writes products and agents tables, the truth, and a copy of the spec that
points at the new tables, so "rcdemand estimate DIR/spec.toml" runs at once.`,
		Example: `  rcdemand synth --spec model.toml --truth truth.toml --out sim --seed 3
  rcdemand estimate sim/spec.toml`,
		Args: cobra.NoArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			if specPath == "" || truthPath == "" || outDir == "" {
				return fmt.Errorf("synth needs --spec, --truth and --out")
			}
			spec, err := demand.ReadSpec(specPath)
			if err != nil {
				return err
			}
			tr, err := synth.ReadTruth(truthPath)
			if err != nil {
				return err
			}
			if !cmd.Flags().Changed("seed") && tr.Seed != 0 {
				seed = tr.Seed
			}
			if format != "csv" && format != "parquet" {
				return fmt.Errorf("--format %q: use csv or parquet", format)
			}
			return runSynth(spec, tr, seed, outDir, format, []string{specPath, truthPath}, cmd.OutOrStdout())
		},
	}
	cmd.Flags().StringVar(&specPath, "spec", "", "model spec (columns and which coefficients are random)")
	cmd.Flags().StringVar(&truthPath, "truth", "", "true parameters and design (TOML)")
	cmd.Flags().StringVar(&outDir, "out", "", "folder to write (created if needed)")
	cmd.Flags().StringVar(&format, "format", "csv", "table format: csv or parquet")
	cmd.Flags().Uint64Var(&seed, "seed", 1, "random seed (default: the truth file's seed, else 1)")
	return cmd
}

func runSynth(spec *demand.Spec, tr *synth.Truth, seed uint64, outDir, format string, inputs []string, stdout io.Writer) error {
	syn, err := synth.Synthesize(spec, tr, seed, interrupt)
	if err == merger.ErrStopped {
		return errInterrupted
	}
	if err != nil {
		return err
	}
	if err := syn.Write(outDir, format, spec, tr, seed, inputs); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "wrote %d markets × %d products and %d agents per market to %s (largest FOC residual %.2g)\n",
		tr.Markets, tr.Products, tr.Agents, outDir, syn.MaxFOC)
	return nil
}
