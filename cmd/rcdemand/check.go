package main

import (
	"fmt"
	"io"
	"math"
	"strings"

	"github.com/spf13/cobra"
	"gonum.org/v1/gonum/mat"

	"rcdemand/data"
	"rcdemand/demand"
)

func newCheck() *cobra.Command {
	var instrumentsOut string
	cmd := &cobra.Command{
		Use:   "check SPEC.toml",
		Short: "Validate a spec file and its data without estimating",
		Example: `  rcdemand check model.toml
  rcdemand check model.toml --instruments-out z.csv`,
		Args: exactArgs("SPEC.toml"),
		RunE: func(cmd *cobra.Command, args []string) error {
			if err := tableFlag("--instruments-out", instrumentsOut); err != nil {
				return err
			}
			spec, err := demand.ReadSpec(args[0])
			if err != nil {
				return err
			}
			m, err := demand.Load(spec)
			if err != nil {
				return err
			}
			if err := checkOutputs(m.Inputs(), instrumentsOut); err != nil {
				return err
			}
			if err := demand.Preflight(m); err != nil {
				return err
			}
			printCheck(cmd.OutOrStdout(), m)
			msg := newMessages(cmd)
			if err := m.PriceLevels(); err != nil {
				msg.warn("%v (demand can still be estimated)", err)
			}
			msg.notes(m.Notes)
			if instrumentsOut != "" {
				if err := writeInstruments(instrumentsOut, m); err != nil {
					return err
				}
				fmt.Fprintf(cmd.OutOrStdout(), "wrote %s\n", instrumentsOut)
			}
			return nil
		},
	}
	cmd.Flags().StringVar(&instrumentsOut, "instruments-out", "", "write the instrument matrix Z (.csv or .parquet)")
	return cmd
}

func printCheck(w io.Writer, m *demand.Model) {
	p := m.Products
	minS, maxS := math.Inf(1), math.Inf(-1)
	minO, maxO := math.Inf(1), math.Inf(-1)
	minJ, maxJ := math.MaxInt, 0
	for _, mk := range p.Markets {
		minJ, maxJ = min(minJ, mk.Len()), max(maxJ, mk.Len())
		s0 := p.OutsideShare(mk)
		minO, maxO = math.Min(minO, s0), math.Max(maxO, s0)
		for i := mk.Start; i < mk.End; i++ {
			minS, maxS = math.Min(minS, p.Share[i]), math.Max(maxS, p.Share[i])
		}
	}
	fmt.Fprintf(w, "%s: spec and data are valid\n", m.Spec.File)
	fmt.Fprintf(w, "  products table   %s: %d rows, %d markets, %d to %d products per market\n", p.File, p.Len(), len(p.Markets), minJ, maxJ)
	if p.Firm != nil {
		firms := map[string]bool{}
		for _, f := range p.Firm {
			firms[f] = true
		}
		fmt.Fprintf(w, "  firms            %d\n", len(firms))
	}
	fmt.Fprintf(w, "  inside shares    %.4g to %.4g\n", minS, maxS)
	fmt.Fprintf(w, "  outside shares   %.4g to %.4g\n", minO, maxO)
	ag := m.Problem.Agents
	minI, maxI := math.MaxInt, 0
	for _, a := range ag {
		minI, maxI = min(minI, a.End-a.Start), max(maxI, a.End-a.Start)
	}
	src := "rule " + m.Spec.Integration.Rule
	if m.Agents != nil {
		src = m.Agents.File
	}
	if len(m.Params) == 0 {
		fmt.Fprintf(w, "  agents           none needed (plain logit)\n")
	} else {
		fmt.Fprintf(w, "  agents           %s: %d to %d per market\n", src, minI, maxI)
	}
	fmt.Fprintf(w, "  linear (X1)      %s\n", strings.Join(m.X1Names, ", "))
	params := wrap(fmt.Sprintf("%d parameters: %s", len(m.Params), strings.Join(m.ParamNames(), ", ")), strings.Repeat(" ", 19))
	fmt.Fprintf(w, "  nonlinear (θ2)   %s\n", strings.TrimLeft(params, " "))
	if line := familyLine(m); line != "" {
		fmt.Fprintf(w, "  model family     %s\n", line)
	}
	if m.Nests != nil {
		fmt.Fprintf(w, "  nests            %d: %s\n", len(m.Nests), strings.Join(m.Nests, ", "))
	}
	z := wrap(fmt.Sprintf("%d columns: %s", len(m.ZNames), strings.Join(m.ZNames, ", ")), strings.Repeat(" ", 19))
	fmt.Fprintf(w, "  instruments (Z)  %s\n", strings.TrimLeft(z, " "))
	if sz := m.MarketSize; sz != nil {
		lo, hi := sz[0], sz[0]
		for _, x := range sz {
			lo, hi = min(lo, x), max(hi, x)
		}
		fmt.Fprintf(w, "  market sizes     %s to %s consumers\n", thousands(lo), thousands(hi))
	}
}

// writeInstruments writes Z with the key columns named by role (market,
// product), like every table rcdemand writes.
func writeInstruments(path string, m *demand.Model) error {
	var fr data.Frame
	fr.Add("market", m.Products.Market)
	fr.Add("product", m.Products.Product)
	for j, name := range m.ZNames {
		fr.Add(name, mat.Col(nil, j, m.Z))
	}
	return data.WriteFrame(path, m.Inputs(), &fr)
}
