package main

import (
	"errors"
	"fmt"
	"io"
	"strconv"
	"strings"

	"github.com/spf13/cobra"

	"rcdemand/data"
	"rcdemand/merger"
	"rcdemand/merger/study"
)

func init() { extraCommands = append(extraCommands, newStudy, newGather) }

type studyFlags struct {
	replications int
	seed         uint64
	shard, scale string
	out          string
	allowChanged bool
}

func newStudy() *cobra.Command {
	var f studyFlags
	cmd := &cobra.Command{
		Use:   "study RESULTS.json --replications R --out study.json",
		Short: "Trust study: simulate data from the estimated model on your design and re-estimate",
		Long: `study draws R data sets from the estimated model on your own design (same
markets, products, characteristics, instruments and agents): demand shocks
ξ̂ flipped in sign market by market at random (a wild bootstrap), the costs
recovered from the first-order conditions (or the estimated cost equation),
Bertrand–Nash prices and the shares they imply. Each data set is estimated
with the same spec, from the estimates. For each parameter it reports the
mean, bias, RMSE and spread of the estimates, the median reported standard
error and how often the 95% intervals cover the truth (the estimate), how
often Hansen's J rejects at 5%, and verdicts in words.

--markets-scale 1,2,4 repeats the study with designs of 2 and 4 times as
many markets, drawn with replacement from yours, to show how the RMSE falls
as the sample grows (RMSE·√N is constant under √N-consistency).

--shard K/N runs replications K, K+N, K+2N, …; "rcdemand gather" merges the
shard files into the study one run would write (see examples/cluster/).`,
		Example: `  rcdemand study results.json --replications 200 --out study.json
  rcdemand study results.json --replications 200 --markets-scale 1,4 --out study.json
  rcdemand study results.json --replications 200 --shard 3/10 --out study-3.json`,
		Args: exactArgs("RESULTS.json"),
		RunE: func(cmd *cobra.Command, args []string) error {
			_, err := runStudy(args[0], f, cmd.OutOrStdout(), newMessages(cmd))
			return err
		},
	}
	cmd.Flags().IntVar(&f.replications, "replications", 100, "simulated data sets per markets scale")
	cmd.Flags().BoolVar(&f.allowChanged, "allow-changed-data", false, "proceed, with a warning, when the data changed since estimation")
	cmd.Flags().Uint64Var(&f.seed, "seed", 1, "seed of the simulated data")
	cmd.Flags().StringVar(&f.shard, "shard", "", "run only shard K of N (K/N, 0 ≤ K < N)")
	cmd.Flags().StringVar(&f.scale, "markets-scale", "1", "comma-separated markets scales, e.g. 1,2,4")
	cmd.Flags().StringVar(&f.out, "out", "", "study JSON to write (default: study.json beside the results)")
	return cmd
}

// parseShard reads "K/N".
func parseShard(s string) (k, n int, err error) {
	if s == "" {
		return 0, 1, nil
	}
	a, b, ok := strings.Cut(s, "/")
	k, err1 := strconv.Atoi(strings.TrimSpace(a))
	n, err2 := strconv.Atoi(strings.TrimSpace(b))
	if !ok || err1 != nil || err2 != nil || n < 1 || k < 0 || k >= n {
		return 0, 0, usagef("--shard %q: write K/N with 0 ≤ K < N, e.g. --shard 0/4", s)
	}
	return k, n, nil
}

// parseScales reads "1,2,4".
func parseScales(s string) ([]int, error) {
	var out []int
	for _, p := range strings.Split(s, ",") {
		k, err := strconv.Atoi(strings.TrimSpace(p))
		if err != nil || k < 1 {
			return nil, usagef("--markets-scale %q: give whole numbers of 1 or more, e.g. 1,2,4", s)
		}
		out = append(out, k)
	}
	return out, nil
}

func runStudy(resultsPath string, f studyFlags, stdout io.Writer, msg *messages) (*study.Study, error) {
	k, n, err := parseShard(f.shard)
	if err != nil {
		return nil, err
	}
	scales, err := parseScales(f.scale)
	if err != nil {
		return nil, err
	}
	if f.replications < n {
		return nil, usagef("--replications %d: need at least one replication per shard (%d shards)", f.replications, n)
	}
	res, fit, err := loadFitted(resultsPath, f.allowChanged, msg)
	if err != nil {
		return nil, err
	}
	if f.out == "" {
		f.out = sibling(resultsPath, "study.json")
	}
	inputs := append(fit.Model.Inputs(), resultsPath)
	if err := checkOutputs(inputs, f.out); err != nil {
		return nil, err
	}
	progress, finish := msg.bar("trust study")
	opt := study.Options{Replications: f.replications, Seed: f.seed, Shard: k, Shards: n, Scales: scales, Stop: interrupt, Progress: progress}
	st, err := study.Run(res, fit, opt)
	finish()
	if errors.Is(err, study.ErrStopped) {
		return nil, errInterrupted
	}
	if err != nil {
		return nil, err
	}
	st.ResultsFile = data.RelativeTo(resultsPath, f.out)
	st.Run.Version = version
	if err := data.WriteJSON(f.out, inputs, st); err != nil {
		return nil, err
	}
	printStudy(stdout, st)
	fmt.Fprintf(stdout, "\nwrote %s\n", f.out)
	return st, nil
}

func printStudy(w io.Writer, st *study.Study) {
	title := fmt.Sprintf("Trust study · %d replications", st.Replications)
	if st.Shard != nil {
		title += fmt.Sprintf(" · shard %d of %d (run \"rcdemand gather\" on all shards for the study)", st.Shard.Index, st.Shard.Count)
	}
	fmt.Fprintf(w, "%s\n\n", title)
	t := newTable("  ", col{head: "parameter", left: true, max: 24}, col{head: "truth"}, col{head: "bias"}, col{head: "RMSE"},
		col{head: "sd"}, col{head: "median se"}, col{head: "coverage"})
	for _, p := range st.Parameters {
		r := studyRowOf(p)
		t.add(r.Name, r.Truth, r.Bias, r.RMSE, r.SD, r.SE, r.Coverage)
	}
	t.write(w)
	if len(st.Scales) > 1 {
		printScales(w, st)
	}
	if j := st.JRejection5; j != nil {
		fmt.Fprintf(w, "\n  Hansen J rejects at 5%% in %.0f%% of replications\n", 100**j)
	}
	if st.Failures > 0 {
		fmt.Fprintf(w, "  %d replications failed\n", st.Failures)
	}
	fmt.Fprintln(w)
	for _, v := range st.Verdicts {
		fmt.Fprintf(w, "  • %s\n", strings.TrimPrefix(wrap(v, "    "), "    "))
	}
	fmt.Fprintf(w, "\n%s\n", wrap(st.Caution, ""))
}

func newGather() *cobra.Command {
	var out string
	cmd := &cobra.Command{
		Use:   "gather SHARD.json... --out study.json",
		Short: "Merge the shard files of a trust study or of merger draws",
		Long: `gather merges the files written by "rcdemand study --shard K/N" (or
"rcdemand merger --draws D --shard K/N") for K = 0..N−1 into the file a
single run with the same seed would have written. A missing or duplicated
shard, or a shard of another run, is an error naming it.`,
		Example: `  rcdemand gather study-*.json --out study.json
  rcdemand gather merger-*.json --out merger.json`,
		Args: func(cmd *cobra.Command, args []string) error {
			if len(args) == 0 {
				return usagef("gather needs the shard files, e.g. rcdemand gather study-*.json --out study.json")
			}
			return nil
		},
		RunE: func(cmd *cobra.Command, args []string) error {
			if out == "" {
				return usagef("--out is required, e.g. --out study.json")
			}
			w := cmd.OutOrStdout()
			if data.SchemaOf(args[0]) == merger.Schema {
				return gatherShards(args, out, merger.Schema, "merger", merger.GatherDraws, w,
					func(r *merger.Result) { printMerger(w, r, out) })
			}
			return gatherShards(args, out, study.Schema, "study", study.Gather, w,
				func(st *study.Study) { printStudy(w, st) })
		},
	}
	cmd.Flags().StringVar(&out, "out", "", "file to write: the study, or the merger results when the shards are a merger's draws (JSON, required)")
	return cmd
}

// gatherShards reads the shard files (JSON of the schema, files of the
// kind named in messages), merges them, writes the result to out and prints
// it.
func gatherShards[T any](files []string, out, schema, kind string, merge func([]*T, []string) (*T, error), stdout io.Writer, print func(*T)) error {
	var shards []*T
	for _, p := range files {
		var r T
		if err := data.ReadJSON(p, schema, kind, &r); err != nil {
			return err
		}
		shards = append(shards, &r)
	}
	res, err := merge(shards, files)
	if err != nil {
		return err
	}
	if err := data.WriteJSON(out, files, res); err != nil {
		return err
	}
	print(res)
	fmt.Fprintf(stdout, "\nwrote %s from %s\n", out, shardCount(len(files)))
	return nil
}

// printScales prints RMSE and RMSE·√N of each parameter at every markets
// scale, in blocks of scales that fit the page.
func printScales(w io.Writer, st *study.Study) {
	fmt.Fprintf(w, "\n  RMSE by markets scale (RMSE·√N in brackets: constant under √N-consistency)\n")
	names := make([]string, len(st.Parameters))
	for k, p := range st.Parameters {
		names[k] = studyRowOf(p).Name
	}
	heads := make([]string, len(st.Scales))
	for c, sc := range st.Scales {
		heads[c] = fmt.Sprintf("%d markets", sc.Markets)
	}
	columnBlocks(w, blockLayout{corner: "parameter", labelMax: 24}, names, heads, func(k, c int) string {
		sc := st.Scales[c]
		if q := sc.Parameters[k]; q.RMSE != nil && sc.RMSESqrtN[k] != nil {
			return fmt.Sprintf("%.4f [%.3g]", *q.RMSE, *sc.RMSESqrtN[k])
		}
		return "—"
	})
}

func shardCount(n int) string {
	if n == 1 {
		return "1 shard"
	}
	return fmt.Sprintf("%d shards", n)
}
