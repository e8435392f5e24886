package main

import (
	"bytes"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"

	"github.com/BurntSushi/toml"
	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/demand"
	"rcdemand/merger"
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
			tr, err := merger.ReadTruth(truthPath)
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

func runSynth(spec *demand.Spec, tr *merger.Truth, seed uint64, outDir, format string, inputs []string, stdout io.Writer) error {
	syn, err := merger.Synthesize(spec, tr, seed)
	if err != nil {
		return err
	}
	if err := os.MkdirAll(outDir, 0o755); err != nil {
		return err
	}
	ext := "." + format
	files := map[string]*data.Frame{"products" + ext: syn.Products, "agents" + ext: syn.Agents, "truth_products" + ext: syn.Truth}
	for _, name := range []string{"products" + ext, "agents" + ext, "truth_products" + ext} {
		if err := data.WriteFrame(filepath.Join(outDir, name), inputs, files[name]); err != nil {
			return err
		}
	}
	out := *spec
	out.Data.Products = "products" + ext
	out.Data.Agents = "agents" + ext
	var buf bytes.Buffer
	buf.WriteString("# written by rcdemand synth: the spec of the model that generated products" + ext + "\n")
	if err := toml.NewEncoder(&buf).Encode(out); err != nil {
		return err
	}
	if err := data.WriteAtomic(filepath.Join(outDir, "spec.toml"), inputs, func(w io.Writer) error { _, err := w.Write(buf.Bytes()); return err }); err != nil {
		return err
	}
	record := map[string]any{"schema": "rcdemand.truth.v1", "seed": seed, "truth": tr,
		"equilibrium": map[string]any{"max_foc_residual": syn.MaxFOC, "max_iterations": syn.MaxIter}}
	if err := data.WriteAtomic(filepath.Join(outDir, "truth.json"), inputs, func(w io.Writer) error {
		enc := json.NewEncoder(w)
		enc.SetIndent("", "  ")
		return enc.Encode(record)
	}); err != nil {
		return err
	}
	fmt.Fprintf(stdout, "wrote %d markets × %d products and %d agents per market to %s (largest FOC residual %.2g)\n",
		tr.Markets, tr.Products, tr.Agents, outDir, syn.MaxFOC)
	return nil
}
