package study

import (
	"fmt"
	"math"
	"rcdemand/demand"
	"sort"
	"strings"

	"gonum.org/v1/gonum/stat"
)

// summarizeScale computes the statistics of one scale's replications.
func summarizeScale(runs []Replication, truth []float64, kinds []paramKind) Scale {
	sc := Scale{Replications: len(runs)}
	var ok []Replication
	for _, r := range runs {
		if r.Failure != "" || len(r.Estimates) != len(truth) {
			sc.Failures++
			continue
		}
		ok = append(ok, r)
	}
	for k := range truth {
		ps := ParameterStats{Kind: kinds[k].Kind, Name: kinds[k].Name, Demographic: kinds[k].Demographic, Truth: truth[k], Used: len(ok)}
		if len(ok) > 0 {
			var x, se []float64
			covered, withSE := 0, 0
			for _, r := range ok {
				x = append(x, r.Estimates[k])
				if s := r.SE[k]; s != nil {
					se = append(se, *s)
					withSE++
					if math.Abs(r.Estimates[k]-truth[k]) <= demand.NormalQuantile975**s {
						covered++
					}
				}
			}
			mean, sd, rmse := moments(x, truth[k])
			ps.Mean, ps.Bias, ps.RMSE = ptr(mean), ptr(mean-truth[k]), ptr(rmse)
			if len(x) > 1 {
				ps.SD = ptr(sd)
			}
			if len(x) >= 4 {
				ps.SDRobust = ptr(robustSpread(x))
			}
			if withSE > 0 {
				ps.MedianSE = ptr(median(se))
				ps.Coverage95 = ptr(float64(covered) / float64(withSE))
			}
		}
		sc.Parameters = append(sc.Parameters, ps)
	}
	var rej, withJ int
	for _, r := range ok {
		if r.JPValue != nil && r.J != nil {
			withJ++
			if *r.JPValue < 0.05 {
				rej++
			}
		}
	}
	if withJ > 0 {
		sc.JRejection5 = ptr(float64(rej) / float64(withJ))
	}
	return sc
}

// moments returns the mean, the sample standard deviation (n − 1) and the
// root mean squared error around truth.
func moments(x []float64, truth float64) (mean, sd, rmse float64) {
	n := float64(len(x))
	for _, v := range x {
		mean += v / n
		rmse += (v - truth) * (v - truth) / n
	}
	if len(x) > 1 {
		for _, v := range x {
			sd += (v - mean) * (v - mean)
		}
		sd = math.Sqrt(sd / (n - 1))
	}
	return mean, sd, math.Sqrt(rmse)
}

// robustSpread returns the interquartile range over 1.349 (the standard
// deviation of a normal sample, insensitive to a few outlying replications).
func robustSpread(x []float64) float64 {
	s := append([]float64(nil), x...)
	sort.Float64s(s)
	return (stat.Quantile(0.75, stat.LinInterp, s, nil) - stat.Quantile(0.25, stat.LinInterp, s, nil)) / 1.349
}

func median(x []float64) float64 {
	s := append([]float64(nil), x...)
	sort.Float64s(s)
	n := len(s)
	if n%2 == 1 {
		return s[n/2]
	}
	return (s[n/2-1] + s[n/2]) / 2
}

// reasonOf returns the reason of a failure message: its first words up to
// the colon ("equilibrium", "estimation", "not converged").
func reasonOf(msg string) string {
	if r, _, ok := strings.Cut(msg, ":"); ok {
		return r
	}
	return msg
}

// label names a parameter for verdicts: "σ[price]", "β[x1]", "Π[price×income]".
func (p ParameterStats) label() string {
	sym := map[string]string{"beta": "β", "gamma": "γ", "sigma": "σ", "pi": "Π", "rho": "ρ", "cholesky": "L"}[p.Kind]
	if sym == "" {
		sym = p.Kind
	}
	return paramKind{Kind: p.Kind, Name: p.Name, Demographic: p.Demographic}.label(sym)
}

// verdicts says in words what the statistics mean for a reader of the
// estimates. Thresholds (common practice for Monte Carlo studies, stated
// in each verdict): coverage below 90%, standard errors that miss the
// spread of the estimates by more than 20%, a bias above half a standard
// deviation, J rejecting in more than 10% of replications at 5%, RMSE·√N
// that grows by more than 50% from the smallest to the largest scale.
func verdicts(st *Study) []string {
	var v []string
	if len(st.Scales) == 0 {
		return v
	}
	base := st.Scales[0]
	used := 0
	if len(base.Parameters) > 0 {
		used = base.Parameters[0].Used
	}
	if used < base.Replications {
		v = append(v, fmt.Sprintf("%d of %d replications failed (%s) and are left out of the statistics below", base.Replications-used, base.Replications, formatReasons(st.FailedBy)))
	}
	if st.WithoutEquilibrium > 0 {
		v = append(v, fmt.Sprintf("%d drawn markets in %d replications had no Bertrand–Nash equilibrium and were left out of their data sets "+
			"(see markets_without_equilibrium in the replication records)", st.WithoutEquilibrium, st.ReplicationsWithout))
	}
	notes := len(v)
	if used < 2 {
		return append(v, "too few replications succeeded to judge the estimates")
	}
	for _, p := range base.Parameters {
		v = append(v, parameterVerdicts(p, used)...)
	}
	if j := base.JRejection5; j != nil && *j > math.Max(0.10, 0.05+2*math.Sqrt(0.05*0.95/float64(used))) {
		v = append(v, fmt.Sprintf("Hansen's J test rejects the (true) model in %.0f%% of replications at the 5%% level: its p-value is not to be taken at face value here", 100**j))
	}
	v = append(v, scaleVerdicts(st)...)
	if len(v) == notes {
		cov, se, bias := allowances(used)
		v = append(v, fmt.Sprintf("no warning signs in %d replications: coverage of the 95%% intervals is at least %.0f%% for every parameter, "+
			"standard errors match the spread of the estimates within %.0f%%, and biases are below %.2g standard deviations", used, 100*cov, 100*se, bias))
		if se > 0.2 {
			v = append(v, fmt.Sprintf("with %d replications these checks allow for their Monte Carlo error and are weak (they would be 90%%, 20%% and 0.5 with enough replications): run more to judge the standard errors", used))
		}
	}
	return v
}

// allowances returns the thresholds of parameterVerdicts for n
// replications: the lowest coverage not flagged, the relative difference
// between reported standard errors and the spread of the estimates not
// flagged, and the largest bias not flagged, in standard deviations of the
// estimates. Each is the common-practice threshold (90%, 20%, 0.5) widened
// to two Monte Carlo standard errors of its statistic when n is small.
func allowances(n int) (coverage, se, bias float64) {
	mc := math.Sqrt(0.95 * 0.05 / float64(n))
	return math.Min(0.90, 0.95-2*mc), math.Max(0.2, 2/math.Sqrt(2*float64(n-1))), math.Max(0.5, 2/math.Sqrt(float64(n)))
}

// parameterVerdicts checks one parameter's coverage, standard errors and
// bias over n replications, allowing for the Monte Carlo error of each
// statistic: coverage is flagged below 90% when that is also more than two
// Monte Carlo standard errors (√(0.95·0.05/n)) below 95%; the median
// reported SE against the robust spread of the estimates (IQR/1.349, so one
// outlying replication does not decide) when they differ by more than 20%
// and by more than two Monte Carlo errors of a spread (√(1/(2(n−1))),
// relative); a bias above half a standard deviation that is also more than
// two standard errors of the mean (sd/√n) from 0.
func parameterVerdicts(p ParameterStats, n int) []string {
	var v []string
	name := p.label()
	mc := math.Sqrt(0.95 * 0.05 / float64(n))
	covTol, tol, biasTol := allowances(n)
	if p.Coverage95 != nil && *p.Coverage95 < covTol {
		v = append(v, fmt.Sprintf("intervals for %s cover the truth in %.0f%% of replications (±%.0f points of Monte Carlo error): do not rely on them", name, 100**p.Coverage95, 200*mc))
	}
	if p.SDRobust != nil && p.MedianSE != nil && *p.SDRobust > 0 {
		r := *p.MedianSE / *p.SDRobust
		switch {
		case r < 1-tol:
			v = append(v, fmt.Sprintf("reported standard errors of %s understate the spread of the estimates by %.0f%%", name, 100*(1-r)))
		case r > 1/(1-tol):
			v = append(v, fmt.Sprintf("reported standard errors of %s overstate the spread of the estimates by %.0f%%", name, 100*(r-1)))
		}
	}
	if p.Bias != nil && p.SD != nil && math.Abs(*p.Bias) > biasTol**p.SD {
		v = append(v, fmt.Sprintf("estimates of %s are biased by %.3g (%.1f standard deviations of the estimates)", name, *p.Bias, math.Abs(*p.Bias) / *p.SD))
	}
	return v
}

// scaleVerdicts compares RMSE·√N across scales. A change counts when it
// exceeds 50% (common practice) and two Monte Carlo standard errors of the
// ratio of two RMSEs, √(1/(2n₁) + 1/(2n₂)) relative; with fewer
// replications than that allows, the verdict says it cannot tell.
func scaleVerdicts(st *Study) []string {
	if len(st.Scales) < 2 {
		return nil
	}
	first, last := st.Scales[0], st.Scales[len(st.Scales)-1]
	var v []string
	for k, p := range first.Parameters {
		a, b := first.RMSESqrtN[k], last.RMSESqrtN[k]
		n1, n2 := p.Used, last.Parameters[k].Used
		if a == nil || b == nil || *a == 0 || n1 < 2 || n2 < 2 {
			continue
		}
		ratio := *b / *a
		noise := 2 * math.Sqrt(1/(2*float64(n1))+1/(2*float64(n2)))
		tol := math.Max(0.5, noise)
		change := fmt.Sprintf("from %d to %d markets (RMSE·√N changes by %+.0f%%", first.Markets, last.Markets, 100*(ratio-1))
		switch {
		case ratio-1 > tol:
			v = append(v, fmt.Sprintf("the RMSE of %s falls more slowly than 1/√N %s): the data identify it weakly", p.label(), change))
		case 1-ratio > tol:
			v = append(v, fmt.Sprintf("the RMSE of %s falls faster than 1/√N %s): at the smaller scale its estimates are worse than large-sample theory says (small-sample bias or outlying replications)", p.label(), change))
		case noise > 0.5:
			v = append(v, fmt.Sprintf("too few replications to tell how the RMSE of %s scales %s, within the Monte Carlo error of ±%.0f%%)", p.label(), change, 100*noise))
		default:
			v = append(v, fmt.Sprintf("the RMSE of %s falls like 1/√N %s), as √N-consistency predicts", p.label(), change))
		}
	}
	return v
}

func formatReasons(by map[string]int) string {
	keys := make([]string, 0, len(by))
	for k := range by {
		keys = append(keys, k)
	}
	sort.Strings(keys)
	var parts []string
	for _, k := range keys {
		parts = append(parts, fmt.Sprintf("%s %d", k, by[k]))
	}
	return strings.Join(parts, ", ")
}
