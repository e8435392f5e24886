// Package synth draws synthetic data sets from a known demand model, with
// prices that solve each market's Bertrand–Nash equilibrium.
//
// A truth file (TOML) gives the design (markets, products per market, firms
// — product j belongs to firm j mod firms —, agents per market), the true
// β, σ and Π, normal distributions of the characteristics and demographics,
// the log marginal cost ln c = constant + Σ γ_z z + Σ γ_x x + ω with standard
// normal cost shifters z, and the shocks: ξ ~ N(0, xi_sd²) and ω ~ N(0,
// omega_sd²) with correlation. Agents have equal weights and standard normal
// taste draws. Prices solve p = c + Δ(p)⁻¹s(p) market by market from p⁰ =
// 1.5·c (package merger's equilibrium solver), markets in parallel.
// Everything random comes from one seeded source in a fixed order, so a
// seed gives the same data on any machine with the same kernels.
//
// Correlated tastes (random_covariance = "full"): the tastes are Lν_i with
// L lower triangular. As in the spec's start_cholesky, whose diagonal comes
// from start, [cholesky] gives entries of L by row and column, a diagonal
// entry it leaves out is [sigma]'s, and an entry below the diagonal it
// leaves out is 0; a diagonal entry given twice, or not at all, is an
// error. truth.json (schema rcdemand.truth.v2) records the process used
// under "truth", with the truth file's own keys (v1 used Go's field names):
// every entry of L, and σ = √diag(LLᵀ) as the results file's sigma.
//
// Markets without an equilibrium. With a normal price coefficient a few
// agents may draw one ≥ 0; their demand rises with price, a firm's profit
// then need not have a maximum, and the market has no Bertrand–Nash
// equilibrium (in the cold-brew design with 20 products and 500 agents,
// 13 of 40,000 markets drawn with seeds 1–20, about one in 3,000). An
// economist using synthetic data wants every market in it to be an
// equilibrium of the true model, so such a market is left out of the
// tables, not written with prices no firm would set: Synthetic.Dropped
// (and truth.json, dropped_markets) lists it with the solver's residual
// and reason, and the other markets are written unchanged. On request
// (Options.Retries) the market is redrawn instead: replaced by the same
// market of the data set drawn with seed+1, then seed+2, …;
// Synthetic.Redrawn (truth.json, redrawn_markets) records the seed each
// such market comes from. Either way the other markets are those of the
// seed asked for.
package synth
