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
// Counterfactual prices solve p = c + Δ(p)⁻¹ s(p) with ξ and c fixed, that
// is the first-order conditions r(p) = s(p) − Δ(p)(p − c) = 0. Prices enter
// utility through the price column of X1 (δ_j(p) = δ_j + β_price (p_j −
// p⁰_j)) and, when price has a random coefficient, through X2. Equilibrium
// runs three stages, each from the prices with the smallest ζ step so far
// (below), and never more than their iteration limits:
//
//  1. "zeta": the fixed point of Morrow & Skerlos (2011). Writing ∂s/∂p =
//     diag(Λ) − Γ with Λ_j = Σ_i w_i α_i s_ij and Γ_jl = Σ_i w_i α_i s_ij s_il,
//
//     ζ(p) = Λ⁻¹(Ω∘Γ)(p − c) − Λ⁻¹ s,   p ← c + ζ(p),
//
//     from the starting prices (the pre-merger prices), at most 1000 times.
//
//  2. "newton": Newton steps on the first-order conditions in their markup
//     form R(p) = p − c − Δ(p)⁻¹s(p) = −Δ⁻¹r, at most 100. R has the roots
//     of r but is measured in prices: ‖r‖ also falls towards zero as every
//     price grows without bound and every share vanishes (a false root at
//     infinity), ‖R‖ does not. Its
//     Jacobian is analytic, ∂R/∂p = −Δ⁻¹M with M_jm = ∂s_j/∂p_m + Ω_jm
//     ∂s_m/∂p_j + Σ_l Ω_jl η_l ∂²s_l/∂p_j∂p_m (demand.Market.FOCJacobian at
//     costs p − η, the second derivatives from the share model's
//     PriceHessian), so a step solves M d = −r. Safeguards: no price moves
//     by more than half of max(|p_j|, |c_j|) in a step; the step is halved
//     (down to 1e-10) until ½‖R‖² falls by the Armijo condition (factor
//     1e-4); when M is singular (condition above 1e14) or the line search
//     fails, the steepest-descent direction of ½‖R‖² is tried; when that
//     fails too the stage stops at a stationary point of ‖R‖ that is not a
//     root.
//
//  3. "damped": p ← p + ω(c + ζ(p) − p) for ω = ½, ¼, ⅛, 1/16, each until
//     its step has not reached a new minimum for 200 iterations, 1000 in
//     all.
//
// A stage converges when max|Δp| (ζ and damped) or a full Newton step falls
// below the tolerance — 1e-12 by default, or four units in the last place
// of the largest price when that is larger: quoted in dollars, prices of
// 10⁴ cannot be resolved to 1e-12 in doubles, and a fixed absolute
// tolerance made such markets fail. The prices found must then pass the
// second-order conditions: each firm's profit Σ_{l∈f}(p_l − c_l)s_l must be
// at a local maximum in its own prices, i.e. the f×f block of ∂r/∂p
// (the firm's profit Hessian) must be negative definite. A root of the
// first-order conditions at a profit minimum or saddle — which arises when
// a few agents are nearly price-insensitive — is not an equilibrium. The
// check is local: a firm may still gain from a large price change.
//
// A market where no stage converges, or whose prices fail the second-order
// conditions, is reported, never hidden (and so is one whose pre-merger
// markup equations are singular): Solution.Converged is false,
// Method names the stage that came closest, Residual is the largest FOC
// residual there, and Reason says why in words — most often some agents'
// price coefficients are ≥ 0 (a normal random coefficient puts a little
// mass there), so their demand rises with price and a firm's profit need
// not have a maximum at all. "Closest" is measured by the ζ step
// max_j |r_j/Λ_j|, a residual in prices. Simulate keeps going: such markets
// are listed in Result.FailedMarkets with their residuals and reasons,
// their rows stay in the output marked converged = false, and the summary
// figures leave them out (the Guidelines count, which uses pre-merger
// shares only, keeps them). Simulations are per market on the worker
// pool, so the results do not depend on the number of cores.
//
// Ownership: Scenario.Combine merges whole firms into one (Into); an
// Ownership table (ReadOwnership: product, firm_after, optional market)
// moves single products, after the combination, so it serves multi-firm
// mergers and divestitures. Names match exactly after trimming spaces
// (which the table readers do). The parties are the firms that gain products; a product is
// "merging" when its owner after the change is a party, and the cost change
// applies to those products.
//
// Welfare: per-capita consumer surplus is Σ_i w_i ln(1 + Σ_j exp(δ_j + μ_ij))
// / (−α_i) (Small & Rosen 1981, agent by agent); its change is post minus pre.
// Producer surplus per capita is Σ_j (p_j − c_j) s_j. Both are per consumer,
// in the currency of prices: the summary averages them over markets (a sum
// of per-capita figures over markets means nothing). With market sizes M_t
// (demand.Model.MarketSize) they are also money: M_t·ΔCS_t per market and
// Σ_t M_t·ΔCS_t in total.
//
// Concentration: HHI per market on inside shares in percent,
// Σ_f (100·S_f/Σ_j s_j)². The 2023 US Merger Guidelines presume a merger
// that yields HHI > 1,800 with ΔHHI > 100, or a merged share above 30% with
// ΔHHI > 100, to substantially lessen competition. Each figure has one name
// (MarketRow): hhi_post at the post-merger ownership and equilibrium shares
// (so delta_hhi includes the share shifts the merger causes), and, for the
// presumption, hhi_post_at_pre_shares and delta_hhi_at_pre_shares, which
// combine the parties' pre-merger shares as the Guidelines do; the merged
// share is the largest pre-merger share of a party after the change. The
// screen, having no equilibrium, gives the pre-merger-share figures under
// both names.
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
// effects are reported. A draw is set aside, and counted by reason, when
// some agent's price coefficient is ≥ 0 (the supply side is not defined for
// that agent), the share inversion fails, or some market has no post-merger
// equilibrium; the output says what share of the draws was kept, and the
// intervals are conditional on the draws kept. At least MinDraws = 100
// draws must be asked for, and intervals are built only from at least 100
// kept draws: with fewer, the 2.5 and 97.5 percentiles rest on the two or
// three most extreme draws, so the counts and reasons are written with a
// note and no intervals. Draws are seeded and processed in order (each
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
