// Package study runs a trust study of an estimate on the user's own design:
// it draws data sets from the estimated model, re-estimates each, and says
// how well the estimator and its standard errors behave there.
//
// Each replication r (and markets scale K) keeps the design — markets,
// products, characteristics, instruments, agents — and draws:
//
//	ξ*_jt = v_t ξ̂_jt,  v_t = ±1 with probability ½ per market (a wild
//	bootstrap of the demand shocks by market);
//	c*_jt = ĉ_jt, the costs recovered from the Bertrand–Nash first-order
//	conditions at the estimates, or with an estimated cost equation
//	c* = f⁻¹(wγ̂ + v_t ω̂) (f the identity or ln), the same v_t;
//	p* solving the Bertrand–Nash first-order conditions under the firm
//	column's ownership (package merger's equilibrium solver, from the
//	observed prices), and s* = s(p*).
//
// With a markets scale K > 1 the design itself is resampled first: K·T
// markets drawn with replacement from the T markets (with their agents),
// so the study shows how the estimates behave as the sample grows. Each
// data set is estimated with the same spec, starting from the estimates
// (the truth of the study). Replication r draws from its own seeded stream
// (seed, r, K), so a shard of the replications gives exactly the draws the
// whole run would, and shards gathered give the whole run's study.
//
// Per parameter: the truth (the estimate), the mean, bias, RMSE, standard
// deviation (n − 1) of the estimates over the replications that converged,
// the median reported standard error, and the coverage of the 95% intervals
// x ± 1.96·SE; the rejection rate of Hansen's J test at 5%; and RMSE·√N
// across scales (constant when the estimator is √N-consistent). Failures
// (no market with an equilibrium, an estimation error, no convergence) are
// counted by reason and left out of the statistics. A drawn market without
// a Bertrand–Nash equilibrium (package merger's solver reports it, most
// often because some agents' price coefficients are ≥ 0 at the estimates)
// does not cost the replication: it is left out of that data set, which is
// estimated on the other markets, and the replication lists it
// (markets_without_equilibrium); the study counts such markets and the
// replications they occurred in, and a verdict says so.
//
// Choices where the design is silent: the replications (and the starts of
// each estimation) run one after another, each spreading its markets over
// the one pool, so a replication's draws and its estimate are the same
// whether the study runs whole or in shards; the verdicts compare the
// bias and the coverage with their Monte Carlo error (and with a robust
// spread, IQR/1.349, where a few replications stray far), so a short study
// does not condemn an estimator for noise; the verdicts state the
// thresholds actually used (82% rather than 20% for standard errors at 4
// replications) and say so when so few replications make the checks weak,
// and a change of RMSE·√N across scales within two Monte Carlo standard
// errors of the ratio is reported as too few replications to tell.
package study
