package main

import (
	"fmt"
	"io"
	"strings"

	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/demand"
	"rcdemand/merger"
)

func init() { extraCommands = append(extraCommands, newMerger) }

type mergerFlags struct {
	combine, into, ownership, out string
	costChange                    float64
	draws                         int
	seed                          uint64
	shard                         string
	allowChanged                  bool
}

// namesHelp says how rcdemand matches the names of firms, products and
// markets given on the command line or in a table.
const namesHelp = `Names of firms, products and markets are matched exactly — case, accents and
inner spaces count — after trimming spaces at both ends. --combine splits its
value on commas, so a firm whose name holds a comma ("Cremo Group, Inc.") can
only be named in an --ownership table, where any text is a name.`

func newMerger() *cobra.Command {
	var f mergerFlags
	cmd := &cobra.Command{
		Use:   "merger RESULTS.json (--combine \"A,B\" | --ownership FILE.csv)",
		Short: "Simulate a merger: post-merger prices, shares, welfare and concentration",
		Long: `merger recovers marginal costs from the estimates and the pre-merger
Bertrand–Nash conditions, changes ownership, and solves for the post-merger
prices: price changes, consumer surplus and profit changes (per consumer, and
in money when the spec has [columns] market_size), HHI, the 2023 US Merger
Guidelines' structural presumption and compensating marginal-cost changes.

Ownership changes in two ways, alone or together (--ownership is applied
after --combine, so it can also divest a merged firm's product):
  --combine "A,B"       firms A and B merge into A (or the firm of --into);
  --ownership FILE.csv  a table (.csv or .parquet) with columns product and
                        firm_after, and optionally market (an empty cell means
                        every market): the products listed change owner, the
                        rest keep theirs. It serves multi-firm mergers,
                        divestitures of single products and new owners.
The parties are the firms that gain products; --cost-change applies to them.

` + namesHelp + `

Each market's post-merger Bertrand–Nash equilibrium is solved by a ζ fixed
point, then safeguarded Newton steps, then damped iterations; the prices
found must be a profit maximum for every firm. A market without a
post-merger equilibrium — most often because some agents' price
coefficients are ≥ 0 at the estimates — does not stop the run: it is listed
in failed_markets with its first-order-condition residual and the reason,
its rows are marked converged: false, the summary leaves it out, and the
command exits with status 3 after writing everything.

--draws K (K ≥ 100) draws the parameters from their estimated asymptotic
distribution and repeats the simulation. Draws with an agent whose price
coefficient is ≥ 0, a failed inversion or a market without an equilibrium
are set aside and counted by reason; the share kept is reported, and 95%
intervals are built only from at least 100 kept draws (otherwise the counts
are written with a note and no intervals). Draw r comes from its own seeded
stream, so --shard K/N runs draws K, K+N, … and "rcdemand gather" merges
the shard files into the result one run would have written.

The results file records the fingerprints of the data it was estimated
from; if they changed since, merger refuses (exit 1) unless
--allow-changed-data is given.`,
		Example: `  rcdemand merger results.json --combine "Harbor Roast,Lumen Beverages" --out merger.json
  rcdemand merger results.json --combine "A,B" --into A --cost-change -0.05 --draws 200
  rcdemand merger results.json --ownership owners.csv     # owners.csv: product,firm_after
                                                          #   Cremo Cold,"Cremo Group, Inc."`,
		Args: exactArgs("RESULTS.json"),
		RunE: func(cmd *cobra.Command, args []string) error {
			_, err := runMerger(args[0], f, cmd.OutOrStdout(), newMessages(cmd))
			return err
		},
	}
	cmd.Flags().StringVar(&f.combine, "combine", "", "comma-separated firms that merge, e.g. \"A,B\"")
	cmd.Flags().StringVar(&f.into, "into", "", "name of the merged firm (default: the first of --combine)")
	cmd.Flags().StringVar(&f.ownership, "ownership", "", "table of ownership changes: columns product, firm_after, optional market")
	cmd.Flags().Float64Var(&f.costChange, "cost-change", 0, "proportional change of the parties' marginal costs, e.g. -0.05")
	cmd.Flags().IntVar(&f.draws, "draws", 0, "parameter draws from the estimated asymptotic distribution for 95% intervals (0 for none, else at least 100)")
	cmd.Flags().Uint64Var(&f.seed, "seed", 1, "seed of the parameter draws")
	cmd.Flags().StringVar(&f.shard, "shard", "", "with --draws: run only shard K of N of the draws (K/N)")
	cmd.Flags().StringVar(&f.out, "out", "", "merger JSON to write (default: merger.json beside the results)")
	cmd.Flags().BoolVar(&f.allowChanged, "allow-changed-data", false, "proceed, with a warning, when the data changed since estimation")
	return cmd
}

// splitList splits a comma-separated list, trimming spaces.
func splitList(s string) []string {
	var out []string
	for _, p := range strings.Split(s, ",") {
		if p = strings.TrimSpace(p); p != "" {
			out = append(out, p)
		}
	}
	return out
}

// scenarioFlags checks the ownership flags shared by merger and screen and
// returns the scenario they describe.
func scenarioFlags(combine, into, ownership string) (merger.Scenario, error) {
	sc := merger.Scenario{Combine: splitList(combine), Into: strings.TrimSpace(into)}
	switch {
	case combine == "" && ownership == "":
		return sc, usagef(`give --combine "FirmA,FirmB" or --ownership FILE.csv`)
	case combine != "" && len(sc.Combine) < 2:
		return sc, usagef("--combine %q: name at least two firms, separated by commas (for a firm whose name has a comma, use --ownership)", combine)
	case into != "" && combine == "":
		return sc, usagef("--into names the firm of a --combine merger; with --ownership the table names the new owners")
	}
	if ownership != "" {
		own, err := merger.ReadOwnership(ownership)
		if err != nil {
			return sc, err
		}
		sc.Ownership = own
	}
	return sc, nil
}

func runMerger(resultsPath string, f mergerFlags, stdout io.Writer, msg *messages) (*merger.Result, error) {
	if f.shard != "" && f.draws == 0 {
		return nil, usagef("--shard splits the parameter draws: give --draws too")
	}
	if f.draws < 0 || (f.draws > 0 && f.draws < merger.MinDraws) {
		return nil, usagef("--draws %d: use 0 for no intervals or at least %d draws (95%% intervals from fewer rest on the two or three most extreme draws)", f.draws, merger.MinDraws)
	}
	if f.costChange <= -1 {
		return nil, usagef("--cost-change %v: must be above -1 (a proportional change)", f.costChange)
	}
	sc, err := scenarioFlags(f.combine, f.into, f.ownership)
	if err != nil {
		return nil, err
	}
	sc.CostChange = f.costChange
	res, fit, err := loadFitted(resultsPath, f.allowChanged, msg)
	if err != nil {
		return nil, err
	}
	if f.out == "" {
		f.out = sibling(resultsPath, "merger.json")
	}
	inputs := append(fit.Model.Inputs(), resultsPath)
	if f.ownership != "" {
		inputs = append(inputs, f.ownership)
	}
	if err := checkOutputs(inputs, f.out); err != nil {
		return nil, err
	}
	out, err := merger.Simulate(fit, sc)
	if err != nil {
		return nil, err
	}
	out.ResultsFile = data.RelativeTo(resultsPath, f.out)
	if out.Inputs, err = data.Fingerprints(f.out, "results", resultsPath, "ownership", f.ownership); err != nil {
		return nil, err
	}
	if n := fit.PositiveAlpha(); n > 0 {
		out.Warnings = append(out.Warnings, fmt.Sprintf("%d agents have a non-negative price coefficient at the estimates: their demand does not fall with price, and the supply side is not well defined for them", n))
	}
	if f.draws > 0 {
		if out.Draws, err = mergerDraws(res, fit, out, sc, f, msg); err != nil {
			return nil, err
		}
	}
	if err := data.WriteJSON(f.out, inputs, out); err != nil {
		return nil, err
	}
	printMerger(stdout, out, f.out)
	msg.warnings(out.Warnings)
	fmt.Fprintf(stdout, "\nwrote %s\n", f.out)
	if n := len(out.FailedMarkets); n > 0 {
		return out, &partialError{fmt.Sprintf("the merger results were written, but %d of %d markets have no post-merger equilibrium "+
			"(listed in failed_markets with their reasons, and left out of the summary)", n, len(fit.Model.Products.Markets))}
	}
	return out, nil
}

// mergerDraws repeats the simulation at parameter draws, with a progress bar.
func mergerDraws(res *demand.Results, fit *demand.Fitted, out *merger.Result, sc merger.Scenario, f mergerFlags, msg *messages) (*merger.Draws, error) {
	if len(res.Covariance.Values) == 0 {
		return nil, fmt.Errorf("--draws needs the estimated covariance, and the results file has none")
	}
	k, n, err := parseShard(f.shard)
	if err != nil {
		return nil, err
	}
	opt := merger.DrawOptions{Draws: f.draws, Seed: f.seed, Shard: k, Shards: n, Stop: interrupt}
	progress, finish := msg.bar("parameter draws")
	opt.Progress = progress
	d, err := merger.SimulateDraws(fit.Model, out, res.Estimates(), res.Covariance.Values, sc, opt)
	finish()
	if err == merger.ErrStopped {
		return nil, errInterrupted
	}
	return d, err
}

// loadFitted is demand.LoadFitted with the provenance check of every
// command: refuse when the data changed since estimation, unless allowed.
func loadFitted(resultsPath string, allowChanged bool, msg *messages) (*demand.Results, *demand.Fitted, error) {
	res, fit, err := demand.LoadFitted(resultsPath, demand.AllowChangedData(allowChanged),
		demand.Messages(func(s string) { msg.warn("%s", s) }, func(s string) { msg.note("%s", s) }))
	if _, ok := err.(*demand.ChangedDataError); ok {
		return nil, nil, fmt.Errorf("%v, or pass --allow-changed-data to use them anyway", err)
	}
	return res, fit, err
}
