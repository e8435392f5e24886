package study

import (
	"fmt"
	"slices"

	"rcdemand/merger"
)

// Gather merges the shard files of one study (files names them, for
// messages) into the study a single run with the same seed would have
// written: every shard 0..N−1 exactly once, every replication of every
// scale exactly once, the statistics and verdicts recomputed over all of
// them. Only the timing fields can differ from the single run.
func Gather(shards []*Study, files []string) (*Study, error) {
	parts := make([]*Shard, len(shards))
	for i, sh := range shards {
		parts[i] = sh.Shard
	}
	const notShard = "not a shard (written without --shard)"
	err := merger.CheckShards(parts, files, notShard, func(i int) error {
		first, sh := shards[0], shards[i]
		switch {
		case sh.Shard.Count != first.Shard.Count:
			return fmt.Errorf("%s: shard %d/%d, but %s is a shard of %d", files[i], sh.Shard.Index, sh.Shard.Count, files[0], first.Shard.Count)
		case sh.ResultsFile != first.ResultsFile || sh.Seed != first.Seed || sh.Replications != first.Replications || !slices.Equal(sh.Names, first.Names) || !sameScales(sh, first):
			return fmt.Errorf("%s: a shard of another study than %s (results file, seed, replications, scales or parameters differ)", files[i], files[0])
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	first := shards[0]
	out := *first
	out.Shard = nil
	out.Runs = nil
	out.Run.Seconds = 0
	for _, sh := range shards {
		out.Runs = append(out.Runs, sh.Runs...)
		out.Run.Seconds += sh.Run.Seconds
	}
	if err := complete(&out); err != nil {
		return nil, err
	}
	var truth []float64
	var kinds []paramKind
	for _, p := range first.Parameters {
		truth = append(truth, p.Truth)
		kinds = append(kinds, paramKind{Kind: p.Kind, Name: p.Name, Demographic: p.Demographic})
	}
	out.summarize(truth, kinds)
	return &out, nil
}

func sameScales(a, b *Study) bool {
	if len(a.Scales) != len(b.Scales) {
		return false
	}
	for i := range a.Scales {
		if a.Scales[i].Scale != b.Scales[i].Scale {
			return false
		}
	}
	return true
}

// complete checks that every replication of every scale is there once.
func complete(st *Study) error {
	type key struct{ scale, index int }
	seen := map[key]bool{}
	for _, r := range st.Runs {
		k := key{r.Scale, r.Index}
		if seen[k] {
			return fmt.Errorf("replication %d (markets scale %d) appears in two shards", r.Index, r.Scale)
		}
		seen[k] = true
	}
	for _, sc := range st.Scales {
		for r := 0; r < st.Replications; r++ {
			if !seen[key{sc.Scale, r}] {
				return fmt.Errorf("replication %d (markets scale %d) is in no shard", r, sc.Scale)
			}
		}
	}
	return nil
}
