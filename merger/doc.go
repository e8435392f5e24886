// Package merger simulates mergers and other changes of ownership or cost
// with an estimated demand system: counterfactual equilibria, welfare,
// concentration and pricing-pressure screens, and parameter draws.
//
// The supply side it starts from lives in package demand (demand.Pricing,
// demand.Market, demand.Markups): firms set prices in a static
// Bertrand–Nash equilibrium with constant marginal costs, Δ_jl = −Ω_jl
// ∂s_l/∂p_j, markups η = Δ⁻¹s and costs c = p − η. Here the Lerner index
// is η/p and per-capita variable profit η·s; the first-order-condition
// residual s − Δη is reported. Synthetic data drawn from a known model are
// in the sub-package synth.
//
// Counterfactual prices solve p = c + Δ(p)⁻¹ s(p) with ξ and c fixed. The
// solver is the ζ fixed point of Morrow & Skerlos (2011): writing
// D = Λ − Γ with Λ = diag(Σ_i w_i α_i s_ij) and Γ_jl = Σ_i w_i α_i s_ij s_il,
//
//	ζ(p) = Λ⁻¹(Ω∘Γ)(p − c) − Λ⁻¹ s,   p ← c + ζ(p),
//
// from the pre-merger prices until max|Δp| < 1e-12. When it does not
// converge within 5000 iterations, damped Newton steps on the first-order
// conditions with a finite-difference Jacobian take over. Prices enter utility
// through the price column of X1 (δ_j(p) = δ_j + β_price (p_j − p⁰_j)) and,
// when price has a random coefficient, through X2.
//
// Welfare: per-capita consumer surplus is Σ_i w_i ln(1 + Σ_j exp(δ_j + μ_ij))
// / (−α_i) (Small & Rosen 1981, agent by agent); its change is post minus pre.
// Producer surplus per capita is Σ_j (p_j − c_j) s_j.
//
// Concentration: HHI per market on inside shares in percent,
// Σ_f (100·S_f/Σ_j s_j)². The 2023 US Merger Guidelines presume a merger
// that yields HHI > 1,800 with ΔHHI > 100, or a merged share above 30% with
// ΔHHI > 100, to substantially lessen competition. The merger output gives
// hhi_post at the post-merger ownership and equilibrium shares (so delta_hhi
// includes the share shifts the merger causes) and, for the presumption,
// hhi_post_at_pre_shares and delta_hhi_at_pre_shares, which combine the
// parties' pre-merger shares as the Guidelines do.
//
// Compensating marginal-cost changes (Werden 1996) are the costs that make
// the pre-merger prices an equilibrium under the post-merger ownership:
// c* = p − Δ_post(p)⁻¹ s(p) at observed prices; only the merging parties'
// costs change.
//
// Uncertainty of the effects: parameters are drawn from N(θ̂, V̂), the
// estimated asymptotic distribution of the GMM estimator (σ through its
// absolute value); for each draw δ is re-inverted, costs recovered and the
// post-merger equilibrium solved; percentiles 2.5, 50 and 97.5 of the
// effects are reported. Draws are seeded and processed in order (each
// draw's markets on the worker pool), so results are reproducible whatever
// the number of cores.
//
// Screening without estimation: UPP_j = Σ_k D_jk (p_k − c_k) − E c_j over the
// partner's products k, for efficiency credit E (Farrell & Shapiro 2010), and
// GUPPI_j = Σ_k D_jk m_k p_k / p_j
// with margins m = (p − c)/p; diversion proportional to shares
// D_jk = s_k / (1 − s_j) unless a table is given. The calibrated logit
// (Werden & Froeb 1994) sets the price coefficient −α of each market from the
// logit markup of the products with observed margins, m_j p_j = 1/(α(1 −
// S_f(j))), averaged with share weights, takes δ_j = ln s_j − ln s_0 and costs
// from the logit markups at α, and solves the post-merger logit equilibrium
// with the same ζ fixed point.
package merger
