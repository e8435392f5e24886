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
	var retries int
	cmd := &cobra.Command{
		Use:   "synth --spec SPEC.toml --truth TRUTH.toml --out DIR",
		Short: "Draw a synthetic data set from a known model, with Bertrand–Nash prices",
		Long: `synth draws characteristics, cost shifters, demand and cost shocks and
agents, solves every market for Bertrand–Nash prices under the true model,
and writes products and agents tables, the truth, and a copy of the spec that
points at the new tables, so "rcdemand estimate DIR/spec.toml" runs at once.

Markets without an equilibrium. A drawn market can have no Bertrand–Nash
equilibrium: with a normal price coefficient a few agents may draw one ≥ 0,
and a firm's profit then need not have a maximum. Such a market is left out
of the tables (every market written is an equilibrium, so estimates on the
data are not polluted by prices no firm would set); a warning names it with
the solver's residual and reason, and truth.json lists it under
dropped_markets. With --retry N the market is redrawn instead: replaced by
the same market of the data set drawn with seed+1, then seed+2, …, up to N
times; truth.json lists the markets so replaced and their seeds under
redrawn_markets. A run that leaves out markets writes the rest and exits 3
(results written but incomplete), naming how many on stderr.`,
		Example: `  rcdemand synth --spec model.toml --truth truth.toml --out sim --seed 3
  rcdemand synth --spec model.toml --truth truth.toml --out sim --seed 3 --retry 5
  rcdemand estimate sim/spec.toml`,
		Args: noArgs,
		RunE: func(cmd *cobra.Command, _ []string) error {
			if specPath == "" || truthPath == "" || outDir == "" {
				return usagef("synth needs --spec, --truth and --out")
			}
			if format != "csv" && format != "parquet" {
				return usagef("--format %q: use csv or parquet", format)
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
			if retries < 0 {
				return usagef("--retry %d: must be 0 or more", retries)
			}
			return runSynth(spec, tr, synth.Options{Retries: retries, Stop: interrupt}, seed, outDir, format,
				[]string{specPath, truthPath}, cmd.OutOrStdout(), newMessages(cmd))
		},
	}
	cmd.Flags().StringVar(&specPath, "spec", "", "model spec (columns and which coefficients are random)")
	cmd.Flags().StringVar(&truthPath, "truth", "", "true parameters and design (TOML)")
	cmd.Flags().StringVar(&outDir, "out", "", "folder to write (created if needed)")
	cmd.Flags().StringVar(&format, "format", "csv", "table format: csv or parquet")
	cmd.Flags().Uint64Var(&seed, "seed", 1, "random seed (default: the truth file's seed, else 1)")
	cmd.Flags().IntVar(&retries, "retry", 0, "redraw a market without an equilibrium up to N times (seeds seed+1, seed+2, …) instead of leaving it out")
	return cmd
}

func runSynth(spec *demand.Spec, tr *synth.Truth, opt synth.Options, seed uint64, outDir, format string, inputs []string, stdout io.Writer, msg *messages) error {
	syn, err := synth.SynthesizeWith(spec, tr, seed, opt)
	if err == merger.ErrStopped {
		return errInterrupted
	}
	if err != nil {
		return err
	}
	if err := syn.Write(outDir, format, spec, tr, seed, inputs); err != nil {
		return err
	}
	if n := len(syn.Redrawn); n > 0 {
		what := "markets without an equilibrium were"
		if n == 1 {
			what = "market without an equilibrium was"
		}
		msg.note("%d %s redrawn with later seeds (listed in truth.json, redrawn_markets)", n, what)
	}
	fmt.Fprintf(stdout, "wrote %d markets × %d products and %d agents per market to %s (largest FOC residual %.2g)\n",
		syn.Markets, tr.Products, tr.Agents, outDir, syn.MaxFOC)
	if n := len(syn.Dropped); n > 0 {
		done := "left out of the data (--retry N redraws them)"
		if opt.Retries > 0 {
			done = fmt.Sprintf("left out of the data after %d redraws", opt.Retries)
		}
		msg.warn("%s", merger.FailureWarning(syn.Dropped, tr.Markets, "Bertrand–Nash equilibrium", done, "dropped_markets in truth.json"))
		return &partialError{fmt.Sprintf("the data were written, but %d of the %d markets have no Bertrand–Nash equilibrium and are not in them (listed in truth.json, dropped_markets)", n, tr.Markets)}
	}
	return nil
}
