package main

import (
	"fmt"
	"io"
	"sort"
	"strings"

	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/demand"
	"rcdemand/merger"
)

func init() { extraCommands = append(extraCommands, newMerger) }

type mergerFlags struct {
	combine, into, out string
	costChange         float64
	draws              int
	seed               uint64
	shard              string
	quiet              bool
}

func newMerger() *cobra.Command {
	var f mergerFlags
	cmd := &cobra.Command{
		Use:   "merger RESULTS.json --combine \"A,B\"",
		Short: "Simulate a merger: post-merger prices, shares, welfare and concentration",
		Long: `merger recovers marginal costs from the pre-merger first-order conditions,
solves every market's post-merger Bertrand–Nash equilibrium (ζ fixed point,
then safeguarded Newton steps, then damped iterations; the prices found must
be a profit maximum for every firm) and reports prices, shares, welfare,
HHI and the Guidelines presumption.

A market without a post-merger equilibrium — most often because some agents'
price coefficients are ≥ 0 at the estimates — does not stop the run: it is
listed in failed_markets with its first-order-condition residual and the
reason, its rows are marked converged: false, the summary leaves it out,
and the command exits with status 3 after writing everything.

--draws K (K ≥ 100) draws the parameters from their estimated asymptotic
distribution and repeats the simulation. Draws with an agent whose price
coefficient is ≥ 0, a failed inversion or a market without an equilibrium
are set aside and counted by reason; the share kept is reported, and 95%
intervals are built only from at least 100 kept draws (otherwise the counts
are written with a note and no intervals). Draw r comes from its own seeded
stream, so --shard K/N runs draws K, K+N, … and "rcdemand gather" merges
the shard files into the result one run would have written.`,
		Example: `  rcdemand merger results.json --combine "Harbor Roast,Lumen Beverages" --out merger.json
  rcdemand merger results.json --combine "A,B" --into A --cost-change -0.05 --draws 200`,
		Args: cobra.ExactArgs(1),
		RunE: func(cmd *cobra.Command, args []string) error {
			_, err := runMerger(args[0], f, cmd.OutOrStdout(), cmd.ErrOrStderr())
			return err
		},
	}
	cmd.Flags().StringVar(&f.combine, "combine", "", "comma-separated firms that merge (required)")
	cmd.Flags().StringVar(&f.into, "into", "", "name of the merged firm (default: the first of --combine)")
	cmd.Flags().Float64Var(&f.costChange, "cost-change", 0, "proportional change of the merging parties' marginal costs, e.g. -0.05")
	cmd.Flags().IntVar(&f.draws, "draws", 0, "parameter draws from the estimated asymptotic distribution for 95% intervals (0 for none, else at least 100)")
	cmd.Flags().Uint64Var(&f.seed, "seed", 1, "seed of the parameter draws")
	cmd.Flags().StringVar(&f.shard, "shard", "", "with --draws: run only shard K of N of the draws (K/N)")
	cmd.Flags().StringVar(&f.out, "out", "", "merger JSON to write (default: merger.json beside the results)")
	cmd.Flags().BoolVar(&f.quiet, "quiet", false, "no progress bar")
	return cmd
}

func splitList(s string) []string {
	var out []string
	for _, p := range strings.Split(s, ",") {
		if p = strings.TrimSpace(p); p != "" {
			out = append(out, p)
		}
	}
	return out
}

func runMerger(resultsPath string, f mergerFlags, stdout, stderr io.Writer) (*merger.Result, error) {
	if f.combine == "" {
		return nil, fmt.Errorf("--combine is required, e.g. --combine \"FirmA,FirmB\"")
	}
	if f.shard != "" && f.draws == 0 {
		return nil, fmt.Errorf("--shard splits the parameter draws: give --draws too")
	}
	if f.draws < 0 || (f.draws > 0 && f.draws < merger.MinDraws) {
		return nil, fmt.Errorf("--draws %d: use 0 for no intervals or at least %d draws (95%% intervals from fewer rest on the two or three most extreme draws)", f.draws, merger.MinDraws)
	}
	if f.costChange <= -1 {
		return nil, fmt.Errorf("--cost-change %v: must be above -1 (a proportional change)", f.costChange)
	}
	res, fit, err := demand.LoadFitted(resultsPath)
	if err != nil {
		return nil, err
	}
	if f.out == "" {
		f.out = sibling(resultsPath, "merger.json")
	}
	inputs := append(fit.Model.Inputs(), resultsPath)
	for _, in := range inputs {
		if data.SamePath(f.out, in) {
			return nil, fmt.Errorf("%s: refusing to write an output over an input file", f.out)
		}
	}
	sc := merger.Scenario{Combine: splitList(f.combine), Into: f.into, CostChange: f.costChange}
	out, err := merger.Simulate(fit, sc)
	if err != nil {
		return nil, err
	}
	out.ResultsFile = relativeTo(resultsPath, f.out)
	if n := fit.PositiveAlpha(); n > 0 {
		out.Warnings = append(out.Warnings, fmt.Sprintf("%d agents have a non-negative price coefficient at the estimates: their demand does not fall with price, and the supply side is not well defined for them", n))
	}
	if f.draws > 0 {
		k, n, err := parseShard(f.shard)
		if err != nil {
			return nil, err
		}
		opt := merger.DrawOptions{Draws: f.draws, Seed: f.seed, Shard: k, Shards: n, Stop: interrupt}
		bar := newBar(stderr, f.quiet, "parameter draws")
		if bar != nil {
			opt.Progress = func(done, total int) {
				bar.ChangeMax(total)
				bar.Set(done)
			}
		}
		d, err := merger.SimulateDraws(fit.Model, out, res.Estimates(), res.Covariance.Values, sc, opt)
		if bar != nil {
			bar.Finish()
			bar.Clear()
		}
		if err == merger.ErrStopped {
			return nil, errInterrupted
		}
		if err != nil {
			return nil, err
		}
		out.Draws = d
	}
	if err := data.WriteJSON(f.out, inputs, out); err != nil {
		return nil, err
	}
	printMerger(stdout, out)
	fmt.Fprintf(stdout, "\nwrote %s\n", f.out)
	if n := len(out.FailedMarkets); n > 0 {
		return out, &partialError{fmt.Sprintf("the merger results were written, but %d of %d markets have no post-merger equilibrium "+
			"(listed in failed_markets with their reasons, and left out of the summary)", n, len(fit.Model.Products.Markets))}
	}
	return out, nil
}

func printMerger(w io.Writer, r *merger.Result) {
	s := r.Summary
	fmt.Fprintf(w, "Merger of %s (merged firm: %s)", strings.Join(r.Combine, " + "), r.Into)
	if r.CostChange != 0 {
		fmt.Fprintf(w, ", merging parties' marginal costs %+.1f%%", 100*r.CostChange)
	}
	fmt.Fprintf(w, "\n\n")
	fmt.Fprintf(w, "  share-weighted price change   merging parties %+.3f%% · rivals %+.3f%% · all %+.3f%%\n",
		s.PriceChangePctMerging, s.PriceChangePctRivals, s.PriceChangePctAll)
	fmt.Fprintf(w, "  consumer surplus change        %.6g per capita, summed over %d markets\n", s.CSChangeTotal, len(r.Markets)-s.Unconverged)
	fmt.Fprintf(w, "  producer surplus change        %.6g per capita, summed over markets\n", s.PSChangeTotal)
	fmt.Fprintf(w, "  HHI (mean over markets)        %.0f before → %.0f after (Δ %.0f at equilibrium shares)\n", s.MeanHHIPre, s.MeanHHIPost, s.MeanDeltaHHI)
	fmt.Fprintf(w, "  2023 US Merger Guidelines      structural presumption met in %d of %d markets\n", s.MarketsPresumed, len(r.Markets))
	if n := len(r.FailedMarkets); n > 0 {
		fmt.Fprintf(w, "  markets without an equilibrium %d, left out of the figures above (listed in failed_markets)\n", n)
	}
	if d := r.Draws; d != nil {
		printDraws(w, d)
	}
	// The merging parties' products in the first markets.
	fmt.Fprintf(w, "\n  %-10s %-22s %10s %10s %9s %10s %12s\n", "market", "product", "price pre", "price post", "change", "share post", "comp. cost")
	shown := 0
	for _, p := range r.Products {
		if !p.Merging {
			continue
		}
		if shown == 12 {
			fmt.Fprintf(w, "  … (all products are in the output file)\n")
			break
		}
		fmt.Fprintf(w, "  %-10s %-22s %10.4f %10.4f %+8.2f%% %10.5f %+11.2f%%\n", p.Market, trunc(p.Product, 22), p.PricePre, p.PricePost, p.PriceChangePct, p.SharePost, p.CompensatingShare)
		shown++
	}
	for _, warn := range r.Warnings {
		fmt.Fprintf(w, "  warning: %s\n", warn)
	}
	fmt.Fprintf(w, "\n%s\n", caution)
}

// printDraws prints the draws kept, why the others were set aside, and the
// intervals when enough draws were kept.
func printDraws(w io.Writer, d *merger.Draws) {
	fmt.Fprintf(w, "\n  parameter uncertainty: %d of %d draws kept (%.0f%%)\n", d.Used, d.Requested, 100*d.UsedShare)
	if d.Failed > 0 {
		fmt.Fprintf(w, "    draws set aside: %d with a non-negative price coefficient for some agent, %d failed inversions, %d with a market without an equilibrium\n",
			d.FailedAlpha, d.FailedInversion, d.FailedEquilibrium)
	}
	if !d.Intervals {
		fmt.Fprintf(w, "    no intervals: %s\n", d.Note)
		return
	}
	if d.Failed > 0 {
		fmt.Fprintf(w, "    (the intervals are conditional on the draws kept: they are narrower than the full sampling uncertainty)\n")
	}
	fmt.Fprintf(w, "    95%% intervals:\n")
	keys := make([]string, 0, len(d.Summary))
	for k := range d.Summary {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	for _, k := range keys {
		iv := d.Summary[k]
		fmt.Fprintf(w, "    %-28s median %+.4g  [%+.4g, %+.4g]\n", k, iv.Median, iv.Lo, iv.Hi)
	}
}

func trunc(s string, n int) string {
	if r := []rune(s); len(r) > n {
		return string(r[:n-1]) + "…"
	}
	return s
}
