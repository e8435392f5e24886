package merger

import (
	"errors"
	"fmt"
	"math"
	"math/rand/v2"
	"slices"
	"sort"

	"gonum.org/v1/gonum/mat"

	"rcdemand/demand"
)

// Interval is a 2.5/50/97.5 percentile summary over draws.
type Interval struct {
	Lo     float64 `json:"p2_5"`
	Median float64 `json:"p50"`
	Hi     float64 `json:"p97_5"`
}

// ProductDraws is the distribution of one product's price change.
type ProductDraws struct {
	Market         string   `json:"market"`
	Product        string   `json:"product"`
	PriceChangePct Interval `json:"price_change_pct"`
}

// MarketDraws is the distribution of one market's effects.
type MarketDraws struct {
	Market                string   `json:"market"`
	PriceChangePctMerging Interval `json:"price_change_pct_merging"`
	CSChange              Interval `json:"cs_change"`
}

// MinDraws is the fewest draws SimulateDraws accepts and the fewest kept
// draws it builds intervals from: with fewer, the 2.5 and 97.5 percentiles
// rest on the two or three most extreme draws (common practice asks for
// several hundred; 100 is the floor here).
const MinDraws = 100

// Draws carries the parameter-uncertainty intervals.
type Draws struct {
	Requested int     `json:"requested"`
	Used      int     `json:"used"`
	UsedShare float64 `json:"used_share"` // Used / Requested
	Seed      uint64  `json:"seed"`
	Failed    int     `json:"failed"`
	// Why draws failed: an agent's price coefficient ≥ 0, the share
	// inversion failed, or some market had no post-merger equilibrium.
	FailedAlpha       int `json:"failed_nonnegative_alpha"`
	FailedInversion   int `json:"failed_inversion"`
	FailedEquilibrium int `json:"failed_equilibrium"`
	// Intervals is false when fewer than MinDraws draws were kept: Products,
	// Markets and Summary are then empty and Note says why.
	Intervals bool                `json:"intervals"`
	Note      string              `json:"note,omitempty"`
	Products  []ProductDraws      `json:"products"`
	Markets   []MarketDraws       `json:"markets"`
	Summary   map[string]Interval `json:"summary"`
	// A shard (merger --draws K --shard i/n) holds the records of its draws
	// i, i+n, …, and no intervals until the shards are gathered.
	Shard   *DrawShard   `json:"shard,omitempty"`
	Records []DrawRecord `json:"records,omitempty"`
}

// DrawShard says which part of the draws a file holds.
type DrawShard struct {
	Index int `json:"index"`
	Count int `json:"count"`
}

// DrawRecord is what one draw gave: a failure reason, or the effects.
type DrawRecord struct {
	Index   int       `json:"index"`
	Failure string    `json:"failure,omitempty"` // "nonnegative_alpha", "inversion" or "equilibrium"
	Price   []float64 `json:"price_change_pct,omitempty"`
	Merging []float64 `json:"merging_price_change_pct,omitempty"`
	CS      []float64 `json:"cs_change,omitempty"`
	Summary *Summary  `json:"summary,omitempty"`
}

// ErrStopped is returned when a run of draws is interrupted.
var ErrStopped = errors.New("interrupted")

// DrawOptions steer SimulateDraws.
type DrawOptions struct {
	Draws         int    // k ≥ MinDraws
	Seed          uint64 // draw r uses its own stream (Seed, r)
	Shard, Shards int    // run draws r with r % Shards == Shard (Shards 0 or 1: all)
	Progress      func(done, total int)
	Stop          <-chan struct{}
}

// SimulateDraws repeats the scenario for k ≥ MinDraws parameter draws from
// N(θ̂, V̂) (mean and covariance in the order of the results covariance; see
// demand.Results.Estimates). Draw r is θ̂ + L z with LL' = V̂ and z standard
// normal from its own seeded stream, so any shard of the draws gives the
// draws the whole run would. Draws with an agent whose price coefficient is
// ≥ 0, a failed inversion or a market without an equilibrium are set aside
// and counted by reason; the intervals come from the draws kept, and only
// when at least MinDraws were kept (otherwise the counts are returned with
// a note and no intervals). res is the point simulation, whose rows the
// intervals follow. Draws run in order (each one's markets in parallel), so
// the result does not depend on the number of cores.
func SimulateDraws(m *demand.Model, res *Result, mean []float64, cov [][]float64, sc Scenario, opt DrawOptions) (*Draws, error) {
	k := opt.Draws
	if k < MinDraws {
		return nil, fmt.Errorf("%d parameter draws are too few for 95%% intervals: ask for at least %d", k, MinDraws)
	}
	chol, err := covarianceFactor(cov)
	if err != nil {
		return nil, err
	}
	shards := max(opt.Shards, 1)
	d := &Draws{Requested: k, Seed: opt.Seed}
	total := (k - opt.Shard + shards - 1) / shards
	done := 0
	for r := opt.Shard; r < k; r += shards {
		select {
		case <-opt.Stop:
			return nil, ErrStopped
		default:
		}
		beta, theta := m.FromEstimates(drawParameters(mean, chol, opt.Seed, r))
		for i, p := range m.Params {
			if p.Kind == demand.Sigma {
				theta[i] = math.Abs(theta[i])
			}
			theta[i] = p.Project(theta[i])
		}
		d.Records = append(d.Records, simulateDraw(m, beta, theta, sc, r))
		done++
		if opt.Progress != nil {
			opt.Progress(done, total)
		}
	}
	if shards > 1 {
		d.Shard = &DrawShard{Index: opt.Shard, Count: shards}
	}
	d.Finish(res)
	return d, nil
}

// covarianceFactor returns the lower Cholesky factor of the (symmetrised)
// covariance.
func covarianceFactor(cov [][]float64) (*mat.TriDense, error) {
	n := len(cov)
	sym := mat.NewSymDense(n, nil)
	for i := 0; i < n; i++ {
		for j := i; j < n; j++ {
			sym.SetSym(i, j, (cov[i][j]+cov[j][i])/2)
		}
	}
	var ch mat.Cholesky
	if !ch.Factorize(sym) {
		return nil, fmt.Errorf("the estimated covariance is not positive definite, so parameters cannot be drawn from it")
	}
	var L mat.TriDense
	ch.LTo(&L)
	return &L, nil
}

// drawParameters returns draw r: mean + L z with z from the stream (seed, r).
func drawParameters(mean []float64, L *mat.TriDense, seed uint64, r int) []float64 {
	rng := rand.New(rand.NewPCG(seed, 0xd4a55<<20|uint64(r)))
	z := mat.NewVecDense(len(mean), nil)
	for i := range mean {
		z.SetVec(i, rng.NormFloat64())
	}
	var x mat.VecDense
	x.MulVec(L, z)
	out := make([]float64, len(mean))
	for i := range out {
		out[i] = mean[i] + x.AtVec(i)
	}
	return out
}

// simulateDraw runs the scenario at one parameter draw.
func simulateDraw(m *demand.Model, beta, theta []float64, sc Scenario, r int) DrawRecord {
	rec := DrawRecord{Index: r}
	f, err := demand.NewFitted(m, beta, theta)
	var res *Result
	switch {
	case err != nil:
		rec.Failure = "inversion"
	case f.PositiveAlpha() > 0:
		rec.Failure = "nonnegative_alpha"
	default:
		if res, err = Simulate(f, sc); err != nil {
			rec.Failure = "inversion"
		} else if res.Summary.Unconverged > 0 {
			rec.Failure = "equilibrium"
		}
	}
	if rec.Failure != "" {
		return rec
	}
	sum := res.Summary
	rec.Summary = &sum
	rec.Price = make([]float64, len(res.Products))
	for i, p := range res.Products {
		rec.Price[i] = p.PriceChangePct
	}
	// Every market of a kept draw has its equilibrium, so none is NaN.
	rec.Merging = MarketPriceChanges(res)
	rec.CS = make([]float64, len(res.Markets))
	for t, mrow := range res.Markets {
		rec.CS[t] = mrow.CSChange
	}
	return rec
}

// Finish counts the records by outcome and, for a whole run (not a shard),
// builds the intervals along the rows of res and drops the records.
func (d *Draws) Finish(res *Result) {
	sort.Slice(d.Records, func(a, b int) bool { return d.Records[a].Index < d.Records[b].Index })
	d.Failed, d.FailedAlpha, d.FailedInversion, d.FailedEquilibrium = 0, 0, 0, 0
	var kept []DrawRecord
	for _, r := range d.Records {
		switch r.Failure {
		case "":
			kept = append(kept, r)
			continue
		case "nonnegative_alpha":
			d.FailedAlpha++
		case "inversion":
			d.FailedInversion++
		case "equilibrium":
			d.FailedEquilibrium++
		}
		d.Failed++
	}
	d.Used = len(kept)
	d.UsedShare = float64(d.Used) / float64(len(d.Records))
	d.Products, d.Markets, d.Summary = []ProductDraws{}, []MarketDraws{}, map[string]Interval{}
	d.Intervals, d.Note = false, ""
	switch {
	case d.Shard != nil:
		d.Note = fmt.Sprintf("shard %d of %d: %d of its %d draws kept; no intervals until the shards are gathered (rcdemand gather)", d.Shard.Index, d.Shard.Count, d.Used, len(d.Records))
		return
	case d.Used < MinDraws:
		need := "more draws"
		if d.Used > 0 {
			need = fmt.Sprintf("about %d draws would keep %d at this rate", int(math.Ceil(float64(MinDraws*d.Requested)/float64(d.Used))), MinDraws)
		}
		d.Note = fmt.Sprintf("only %d of %d draws were kept (%.0f%%; see failed_*), fewer than the %d needed for 2.5 and 97.5 percentiles: "+
			"no intervals are reported (%s)", d.Used, d.Requested, 100*d.UsedShare, MinDraws, need)
	default:
		if d.Failed > 0 {
			d.Note = fmt.Sprintf("%d of %d draws were kept (%.0f%%; see failed_*); the intervals are conditional on the draws kept", d.Used, d.Requested, 100*d.UsedShare)
		}
		d.Intervals = true
		d.summarize(res, kept)
	}
	d.Records = nil
}

// summarize sets the percentiles of the kept draws along the rows of res.
func (d *Draws) summarize(res *Result, kept []DrawRecord) {
	pick := func(get func(DrawRecord) float64) Interval {
		v := make([]float64, len(kept))
		for i, o := range kept {
			v[i] = get(o)
		}
		return percentiles(v)
	}
	for i, p := range res.Products {
		d.Products = append(d.Products, ProductDraws{Market: p.Market, Product: p.Product,
			PriceChangePct: pick(func(o DrawRecord) float64 { return o.Price[i] })})
	}
	for t, mk := range res.Markets {
		d.Markets = append(d.Markets, MarketDraws{Market: mk.Market,
			PriceChangePctMerging: pick(func(o DrawRecord) float64 { return o.Merging[t] }),
			CSChange:              pick(func(o DrawRecord) float64 { return o.CS[t] })})
	}
	d.Summary = map[string]Interval{
		"price_change_pct_merging": pick(func(o DrawRecord) float64 { return o.Summary.PriceChangePctMerging }),
		"price_change_pct_rivals":  pick(func(o DrawRecord) float64 { return o.Summary.PriceChangePctRivals }),
		"price_change_pct_all":     pick(func(o DrawRecord) float64 { return o.Summary.PriceChangePctAll }),
	}
	for k, v := range welfareDraws(kept) {
		d.Summary[k] = pick(v)
	}
}

// GatherDraws merges the shard files of one merger run with draws (files
// names them, for messages) into the result a single run with the same
// seed would have written.
func GatherDraws(shards []*Result, files []string) (*Result, error) {
	parts := make([]*DrawShard, len(shards))
	for i, r := range shards {
		if r.Draws != nil {
			parts[i] = r.Draws.Shard
		}
	}
	err := CheckShards(parts, files, "not a shard of merger draws (written without --draws and --shard)", func(i int) error {
		first, r, d := shards[0], shards[i], shards[i].Draws
		if d.Shard.Count != first.Draws.Shard.Count || d.Requested != first.Draws.Requested || d.Seed != first.Draws.Seed ||
			r.ResultsFile != first.ResultsFile || !slices.Equal(r.Combine, first.Combine) {
			return fmt.Errorf("%s: a shard of another merger run than %s", files[i], files[0])
		}
		return nil
	})
	if err != nil {
		return nil, err
	}
	var recs []DrawRecord
	for _, r := range shards {
		recs = append(recs, r.Draws.Records...)
	}
	first := shards[0]
	out := *first
	d := *first.Draws
	d.Shard, d.Records = nil, recs
	if len(recs) != d.Requested {
		return nil, fmt.Errorf("the shards hold %d draws, the run asked for %d", len(recs), d.Requested)
	}
	d.Finish(&out)
	out.Draws = &d
	return &out, nil
}

// CheckShards checks that parts, the shard records of files (nil for a
// file that is no shard, which notShard then describes), are the shards
// 0..n−1 of one run, each exactly once, n the count of the first.
// other(i) returns the error for file i when it belongs to another run than
// files[0] (it must check the count), or nil.
func CheckShards(parts []*DrawShard, files []string, notShard string, other func(i int) error) error {
	if len(parts) == 0 {
		return fmt.Errorf("no shard files given")
	}
	if parts[0] == nil {
		return fmt.Errorf("%s: %s", files[0], notShard)
	}
	count := parts[0].Count
	seen := make([]string, count)
	for i, sh := range parts {
		if sh == nil {
			return fmt.Errorf("%s: %s", files[i], notShard)
		}
		if err := other(i); err != nil {
			return err
		}
		switch {
		case sh.Index < 0 || sh.Index >= count:
			return fmt.Errorf("%s: shard index %d outside 0..%d", files[i], sh.Index, count-1)
		case seen[sh.Index] != "":
			return fmt.Errorf("shard %d/%d appears twice: %s and %s", sh.Index, count, seen[sh.Index], files[i])
		}
		seen[sh.Index] = files[i]
	}
	for k, f := range seen {
		if f == "" {
			return fmt.Errorf("shard %d/%d is missing", k, count)
		}
	}
	return nil
}

// percentiles returns the 2.5, 50 and 97.5 percentiles (linear interpolation
// between order statistics, common practice).
func percentiles(x []float64) Interval {
	s := append([]float64(nil), x...)
	sort.Float64s(s)
	q := func(p float64) float64 {
		if len(s) == 1 {
			return s[0]
		}
		h := p * float64(len(s)-1)
		lo := int(math.Floor(h))
		hi := min(lo+1, len(s)-1)
		return s[lo] + (h-float64(lo))*(s[hi]-s[lo])
	}
	return Interval{Lo: q(0.025), Median: q(0.5), Hi: q(0.975)}
}
