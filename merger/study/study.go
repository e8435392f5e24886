package study

import (
	"fmt"
	"math"
	"slices"
	"sort"
	"time"

	"rcdemand/demand"
	"rcdemand/merger"
)

// Schema identifies the study output format.
const Schema = "rcdemand.study.v1"

// ErrStopped is returned when the stop channel closes: merger.ErrStopped.
var ErrStopped = merger.ErrStopped

// Options steer a study.
type Options struct {
	Replications int    // per scale
	Seed         uint64 // of the draws
	Shard        int    // run replications r with r % Shards == Shard
	Shards       int    // 1: all replications
	Scales       []int  // markets scales; default [1]
	// Progress, when set, is called after each replication with the number
	// done and the number this run will do.
	Progress func(done, total int)
	Stop     <-chan struct{}
}

// Replication is the record of one simulated data set.
type Replication struct {
	Index     int    `json:"index"`
	Scale     int    `json:"markets_scale"`
	Converged bool   `json:"converged"`
	Failure   string `json:"failure,omitempty"`
	// WithoutEquilibrium lists the drawn markets that had no Bertrand–Nash
	// equilibrium and were left out of this replication's data set.
	WithoutEquilibrium []string   `json:"markets_without_equilibrium,omitempty"`
	Estimates          []float64  `json:"estimates,omitempty"` // in the order of Study.Names
	SE                 []*float64 `json:"se,omitempty"`
	J                  *float64   `json:"j,omitempty"`
	JPValue            *float64   `json:"j_pvalue,omitempty"`
	Seconds            float64    `json:"seconds"`
}

// ParameterStats summarises one parameter over the replications.
type ParameterStats struct {
	Kind        string   `json:"kind"`
	Name        string   `json:"name"`
	Demographic string   `json:"demographic"`
	Truth       float64  `json:"truth"`
	Mean        *float64 `json:"mean"`
	Bias        *float64 `json:"bias"`
	RMSE        *float64 `json:"rmse"`
	SD          *float64 `json:"sd"`
	MedianSE    *float64 `json:"median_se"`
	SDRobust    *float64 `json:"sd_robust"` // IQR/1.349 of the estimates
	Coverage95  *float64 `json:"coverage95"`
	Used        int      `json:"replications_used"`
}

// Scale is the summary at one markets scale.
type Scale struct {
	Scale        int              `json:"markets_scale"`
	Markets      int              `json:"markets"`
	Observations int              `json:"observations"`
	Replications int              `json:"replications"`
	Failures     int              `json:"failures"`
	Parameters   []ParameterStats `json:"parameters"`
	RMSESqrtN    []*float64       `json:"rmse_sqrt_n"` // per parameter, RMSE·√(observations)
	JRejection5  *float64         `json:"j_rejection_5pct"`
}

// Shard says which part of the replications a file holds: the shard type
// of merger draws.
type Shard = merger.DrawShard

// RunInfo records the run.
type RunInfo struct {
	Version string  `json:"version"`
	Seconds float64 `json:"seconds"`
}

// Study is the output, written as rcdemand.study.v1.
type Study struct {
	Schema       string         `json:"schema"`
	ResultsFile  string         `json:"results_file"`
	Replications int            `json:"replications"`
	Seed         uint64         `json:"seed"`
	Failures     int            `json:"failures"`
	FailedBy     map[string]int `json:"failures_by_reason,omitempty"`
	// WithoutEquilibrium counts, over all replications, the drawn markets
	// left out of their data set for want of an equilibrium; Replications
	// with such markets says in how many replications that happened.
	WithoutEquilibrium  int              `json:"markets_without_equilibrium"`
	ReplicationsWithout int              `json:"replications_with_markets_left_out"`
	Parameters          []ParameterStats `json:"parameters"`
	JRejection5         *float64         `json:"j_rejection_5pct"`
	Scales              []Scale          `json:"scales"`
	Markets             int              `json:"markets"`      // of the user's design
	Observations        int              `json:"observations"` // of the user's design
	Verdicts            []string         `json:"verdicts"`
	Names               []string         `json:"parameter_names"`
	Shard               *Shard           `json:"shard,omitempty"`
	Runs                []Replication    `json:"replication_records"`
	Caution             string           `json:"caution"`
	Run                 RunInfo          `json:"run"`
}

// Caution goes with every study.
const Caution = "A trust study simulates data from the estimated model itself: it tells how the estimator " +
	"and its standard errors behave if the model is right, not whether the model is right."

// Run carries out the study of fitted results res (read from results).
func Run(res *demand.Results, fit *demand.Fitted, opt Options) (*Study, error) {
	if opt.Replications < 1 {
		return nil, fmt.Errorf("--replications %d: need at least 1", opt.Replications)
	}
	if opt.Shards < 1 {
		opt.Shards = 1
	}
	if len(opt.Scales) == 0 {
		opt.Scales = []int{1}
	}
	began := time.Now()
	d, err := newDesign(res, fit)
	if err != nil {
		return nil, err
	}
	var todo []Replication
	for _, k := range opt.Scales {
		for r := opt.Shard; r < opt.Replications; r += opt.Shards {
			todo = append(todo, Replication{Index: r, Scale: k})
		}
	}
	for i := range todo {
		select {
		case <-opt.Stop:
			return nil, ErrStopped
		default:
		}
		t0 := time.Now()
		d.replicate(&todo[i], opt.Seed, opt.Stop)
		todo[i].Seconds = time.Since(t0).Seconds()
		if opt.Progress != nil {
			opt.Progress(i+1, len(todo))
		}
	}
	st := &Study{Schema: Schema, Replications: opt.Replications, Seed: opt.Seed, Names: d.names, Runs: todo, Caution: Caution,
		Markets: d.markets(), Observations: fit.Model.N()}
	if opt.Shards > 1 {
		st.Shard = &Shard{Index: opt.Shard, Count: opt.Shards}
	}
	st.summarize(d.truth, d.kinds)
	st.Run.Seconds = time.Since(began).Seconds()
	return st, nil
}

// summarize computes the statistics and verdicts from the replication
// records (also when shards are gathered). truth and kinds describe the
// parameters of Names.
func (st *Study) summarize(truth []float64, kinds []paramKind) {
	markets, n := st.Markets, st.Observations
	sort.SliceStable(st.Runs, func(a, b int) bool {
		if st.Runs[a].Scale != st.Runs[b].Scale {
			return st.Runs[a].Scale < st.Runs[b].Scale
		}
		return st.Runs[a].Index < st.Runs[b].Index
	})
	st.Failures, st.FailedBy, st.Scales = 0, map[string]int{}, nil
	st.WithoutEquilibrium, st.ReplicationsWithout = 0, 0
	var scales []int
	for _, r := range st.Runs {
		if !slices.Contains(scales, r.Scale) {
			scales = append(scales, r.Scale)
		}
		if n := len(r.WithoutEquilibrium); n > 0 {
			st.WithoutEquilibrium += n
			st.ReplicationsWithout++
		}
		if r.Failure != "" {
			st.Failures++
			st.FailedBy[reasonOf(r.Failure)]++
		}
	}
	if len(st.FailedBy) == 0 {
		st.FailedBy = nil
	}
	for _, k := range scales {
		var runs []Replication
		for _, r := range st.Runs {
			if r.Scale == k {
				runs = append(runs, r)
			}
		}
		sc := summarizeScale(runs, truth, kinds)
		sc.Scale, sc.Markets, sc.Observations = k, k*markets, k*n
		for _, p := range sc.Parameters {
			var v *float64
			if p.RMSE != nil {
				v = ptr(*p.RMSE * math.Sqrt(float64(sc.Observations)))
			}
			sc.RMSESqrtN = append(sc.RMSESqrtN, v)
		}
		st.Scales = append(st.Scales, sc)
	}
	if len(st.Scales) > 0 {
		st.Parameters, st.JRejection5 = st.Scales[0].Parameters, st.Scales[0].JRejection5
	}
	st.Verdicts = verdicts(st)
	if st.Shard != nil {
		st.Verdicts = []string{fmt.Sprintf("shard %d of %d: the statistics cover this shard's replications only; the verdicts come with the gathered study (rcdemand gather)", st.Shard.Index, st.Shard.Count)}
	}
}

func ptr(x float64) *float64 { return &x }

// paramKind labels a parameter of Names.
type paramKind struct {
	Kind, Name, Demographic string
}

// label names the parameter as sym[name] or, for Π, sym[name×demographic]
// ("pi[price×income]" with sym the kind, as demand names parameters;
// "Π[price×income]" in verdicts).
func (k paramKind) label(sym string) string {
	if k.Demographic != "" {
		return sym + "[" + k.Name + "×" + k.Demographic + "]"
	}
	return sym + "[" + k.Name + "]"
}

// parameters returns the labels of res's estimates in the order of the
// covariance, and their names: the covariance's, or, when it has none,
// names built from the labels.
func parameters(res *demand.Results) ([]paramKind, []string) {
	var kinds []paramKind
	for _, e := range res.List() {
		kinds = append(kinds, paramKind{Kind: e.Kind, Name: e.Name, Demographic: e.Demographic})
	}
	names := res.Covariance.Names
	if len(names) != len(kinds) {
		names = nil
		for _, k := range kinds {
			names = append(names, k.label(k.Kind))
		}
	}
	return kinds, names
}

// markets returns the design's number of markets.
func (d *design) markets() int { return len(d.fit.Model.Products.Markets) }
