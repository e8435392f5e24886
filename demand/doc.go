// Package demand specifies and estimates random-coefficients logit demand
// (and its nested, log-normal-price and correlated-taste variants) by GMM and
// computes post-estimation quantities and the supply side.
//
// Layout. spec.go reads the spec file; model.go binds it to the data
// (X1, Z, X2, the share model's contraction.Problem); param.go holds the
// typed parameter kinds (Beta, Sigma, Pi, Rho, Cholesky, Gamma), each with
// its bounds; gmm.go is the stacked linear IV engine; objective.go,
// optimize.go and estimate.go are the estimator, steered by Settings and
// watched through a Monitor; results.go is the results file and the
// reconciliation of a results file with its model (LoadFitted, ThetaOf:
// parameters are matched by kind and name, never by position); post.go,
// market.go and supply.go are post-estimation and the supply side shared by
// estimation and counterfactuals. Everything reaches shares through the
// share-model interface of package contraction, and every loop over markets
// runs on its worker pool.
//
// Utility (notation of the project's design notes): u_ijt = x_jt'β + ξ_jt +
// Σ_k x2_jtk (σ_k ν_ik + Σ_d Π_kd D_id) + ε_ijt. X1 holds the linear columns
// ("1" is the constant; price is an ordinary column), X2 the columns with a
// random coefficient followed by columns that only interact with
// demographics; θ2 = (σ for each random column, Π for each interaction).
//
// Model families (families.go, spec_families.go, results_families.go).
//
// Nested logit ([demand] nests, nesting; Berry 1994, Grigolon & Verboven
// 2014): the share model is contraction.Nested, with the nests numbered in
// order of first appearance in the products table. θ2 = (taste parameters,
// then ρ): one "rho[all]", or with nesting = "by-nest" one "rho[<nest>]"
// per nest in that order; each ρ is bounded to [0, 1 − 1e-6] (Param.Bounds),
// and a ρ outside [0, 1) is a failed evaluation of the share model. The
// inversion is damped by 1 − ρ and starts at ln s_j − ln s_0 − ρ ln s_{j|g},
// the exact inversion at σ = 0, so with no random columns δ(ρ) is affine in
// ρ, Q is quadratic in it and the estimate is the linear IV of ln s_j −
// ln s_0 on (X1, ln s_{j|g}) with ρ its coefficient. The diagnostics add a
// first stage for ln s_{j|g}, whose instruments are built by "nest-counts"
// and "nest-sums" (package instruments). Consumer surplus uses the log-sum
// ln(1 + Σ_g D_ig^(1−ρ_g)).
//
// Log-normal price sensitivity (price_distribution = "lognormal"):
// α_i = −exp(β_price + σ_price ν_i + Σ_d Π_price,d D_id). Price leaves X1 (it
// is not in δ) and becomes an X2 column whose taste the share model
// exponentiates (contraction.Problem.LogNormal); β_price is the first taste
// parameter of θ2, "beta[price]", on an agent variable of ones. The results
// list it in beta with "nonlinear": true and a note, and price_sensitivity
// gives −exp(β_price) with its delta-method standard error and the mean and
// median α over the sample's agents. Pricing.BetaPrice is 0: prices move
// demand through the tastes alone. Its start is start_price_location, or
// ln(−α̂) with α̂ the plain logit's 2SLS price coefficient (0 when α̂ ≥ 0).
// The first stage for price regresses the products-table column.
//
// Correlated tastes (random_covariance = "full"): the taste deviations are
// Lν_i with L lower triangular in the order of [demand] random, so each
// entry L_kl is a taste parameter on column k and draw ν_l
// ("cholesky[k,l]", row by row); L_kk ≥ 0 is a bound. With L diagonal the
// model is the diagonal one with σ_k = L_kk. The results list L under
// cholesky; sigma holds σ_k = √(LLᵀ)_kk and correlations (LLᵀ)_kl/(σ_k σ_l),
// with delta-method standard errors √(g'Vg) from ∂(LLᵀ)_kl/∂L_am = 1[a=k]
// L_lm + 1[a=l] L_km. The diagonal starts from [estimation] start, the rest
// from start_cholesky (default 0).
//
// Results are matched to a model by kind and name (ThetaOf): ρ by nest, L
// by row and column, a nonlinear β by column; σ implied by L is not a
// parameter. The covariance matrix is in the order of Results.Estimates:
// linear β, γ, then θ2 in the model's order.
//
// Estimator. Z = [exogenous X1 columns, excluded and built instruments].
// For each θ2 the shares are inverted (package contraction) and β is
// concentrated out: β̂ = (X1'ZWZ'X1)⁻¹X1'ZWZ'δ, ξ = δ − X1β̂, ḡ = Z'ξ/N,
// Q = N ḡ'Wḡ. Step 1 uses W1 = (Z'Z/N)⁻¹; step 2 W2 = S⁻¹ with the
// uncentered S = (1/N)Σ ξ_n² z_n z_n' at the step-1 residuals (or its
// clustered or homoskedastic version) and re-optimises from the step-1 θ2.
// The gradient is dQ/dθ2 = 2 (∂δ/∂θ2)'Z W ḡ (the dependence through β̂ drops
// out by its first-order condition). The objective is smooth in every
// parameter; bounds (σ ≥ 0, 0 ≤ ρ < 1, a diagonal Cholesky entry ≥ 0) belong
// to the optimiser, which never folds |σ| into Q.
//
// Optimisation (optimize.go) uses the GMM structure. With G = dḡ/dθ2 the
// Jacobian of the concentrated moments (ḡ = Z'(δ − X1β̂)/N, so G = (Z'J −
// Z'X1·P·Z'J)/N with J = ∂δ/∂θ2 and β̂ = P·Z'δ), the Hessian of Q is
// 2N·G'WG plus a residual term Σ_m (2N·Wḡ)_m ∇²ḡ_m. Each iteration solves
// (B + λ·diag B) d = −g over the free parameters with B = 2N·G'WG + S, S
// the structured secant estimate of the residual term (Dennis, Gay &
// Welsch 1981, with their sizing), and takes the projected trial point
// P(θ + d) (Bertsekas 1982: parameters within ε of a bound with the
// gradient pointing out are held on it). A trial is accepted when Q falls
// by more than 1e-4 of the model's prediction; λ then shrinks (Nielsen's
// rule), otherwise it grows and the trial is repeated, so every accepted
// step lowers Q. Near the minimum, where Q no longer resolves the predicted
// decrease (below 1e-13·max(1, Q)), a trial is accepted when it keeps Q and
// lowers the projected gradient. A trial at which some market's inversion
// fails (or a non-finite θ2) has Q = +Inf and only enlarges λ. A step ends
// when ‖x − P(x − g)‖∞ (the projected gradient) ≤ 1e-10·max(1, Q), or at
// max_iterations, max_objective_calls (counted over the whole run, all
// starts) or time_limit, or when no step lowers Q any more. It counts as
// converged when the projected gradient is ≤ gradient_tolerance·max(1, Q)
// (default 1e-6); a parameter on its bound with the gradient pointing out
// is converged and listed under on_bound. The estimate is converged when the
// last step is; each step's status is recorded. When the shares cannot be
// inverted at the start, the start is moved halfway towards the lower
// bounds (or 0) up to eight times, with a note. The last evaluation is
// remembered, so asking again at the same θ2 and weighting matrix costs
// nothing; each new evaluation starts the inversion from a first-order
// prediction of δ (see package contraction). The eigenvalues of the Hessian
// at the estimate (forward differences of the analytic gradient over the
// parameters off their bounds) are reported as the curvature; a
// non-positive one marks the estimate as not converged. A parameter on its
// bound is listed as such (no usual standard error applies); one off its
// bound whose 95% Wald interval reaches past it is named in a note, the
// interval itself left as the normal approximation gives it.
//
// Supply side and joint estimation ([supply], costs.go). Under
// Bertrand–Nash pricing with the firm column's ownership, η = Δ⁻¹s at the
// observed shares and c = p − η; the cost equation is c = wγ + ω
// ("linear") or ln c = wγ + ω ("log"). The price coefficient becomes a
// nonlinear parameter, placed first in θ (it is not a parameter of the
// share model); the other β and γ are concentrated out by the stacked
// linear IV: rows 1..N are demand (δ − p·β_price on X1 without price, with
// Z), rows N+1..2N the cost equation (y_s = c or ln c on the cost columns,
// with Z_s = [cost columns, supply excluded, the spec's built sets applied
// to the exogenous cost columns]), so g_n = [ξ_n z_d,n ; ω_n z_s,n] and ḡ =
// Σ_n g_n / N. Step 1 uses W = (Z̃'Z̃/N)⁻¹ = blockdiag((Z_d'Z_d/N)⁻¹,
// (Z_s'Z_s/N)⁻¹); step 2 S⁻¹ with S = (1/N)Σ g_n g_n' (cross blocks
// included; clustered: summed within clusters first; unadjusted: σ_ef Z_e'Z_f/N
// blocks). The Jacobian of y_s: ∂η/∂θ_k = −Δ⁻¹(∂Δ/∂θ_k)η (the shares are
// held at their observed values, so ∂s/∂θ = 0), with ∂Δ from the share
// model's d(∂s/∂p)/dθ2 along ∂δ/∂θ2 (contraction.Worker.PriceJacobianTheta)
// and d(∂s/∂p)/dβ_price = ∂s/∂p at α_i = 1; ∂c = −∂η, ∂ln c = −∂η/c. The
// joint estimation starts from the step-1 estimate of demand alone; when
// some implied cost is not positive there under "log", the price
// coefficient is moved away from zero by factors of 1.25 (up to 20 times)
// with a note, and an error names the market and product when that does
// not help. During the search a trial θ with such a cost counts as a failed
// step. Under "linear" the count of negative implied costs is a warning.
//
// Covariance at the final estimates: G = Z'[−X1, ∂δ/∂θ2]/N, S at the final
// residuals, V = (G'WG)⁻¹G'WSWG(G'WG)⁻¹/N with W the last weighting matrix.
// Hansen J = Q at step 2 with df = M − dim θ and a χ² p-value.
//
// Multi-start (Knittel & Metaxoglou 2014): step 1 runs from the spec's start
// and from Starts−1 seeded random starts (σ and diagonal Cholesky entries
// uniform on [0, 3·max(1, start)], ρ uniform on [0, 0.9], the others start +
// N(0, 1)), one after the other, each with its own share solver whose
// markets use the whole worker pool. The results are grouped into distinct
// local minima (objectives within 1e-6 and parameters within 1e-4,
// relative); W2 is set at the residuals of the lowest, and step 2 runs from
// each of the best three under that one W2 so that their objectives
// compare. The lowest step-2 objective is the estimate; the minima, the
// step-2 results and a plain statement of whether the starts agree are
// recorded under multi_start.
//
// When G'WG cannot be inverted (Cholesky fails, or its smallest eigenvalue
// is below 1e-13 of the largest), the estimates are still reported, with
// null standard errors and, under diagnostics.unidentified, the eigenvector
// of its smallest eigenvalue by parameter name: the combination the moments
// do not pin down.
//
// Integration when there is no agents table: "monte-carlo" draws seeded
// standard normals (PCG, stream = market index); "halton" uses the radical
// inverse in prime bases 2, 3, 5, … (one per random coefficient, in the order
// of [demand] random), unscrambled, discards the first 1,000 points and gives
// each market the next block of draws, mapped to normals by the inverse CDF
// (the seed is not used); "gauss-hermite" is the tensor product of n-point
// rules (Golub–Welsch); "sparse-grid" is the Smolyak grid of Heiss & Winschel
// (2008) on non-nested Gauss–Hermite rules, exact for total degree 2k−1.
// Demographics require an agents table.
//
// Fixed effects ([demand] absorb) are removed from δ, X1 and Z by
// alternating projections (one pass for a single set); the constant is then
// dropped. Built instruments (see package instruments) are computed from the
// raw exogenous characteristics; those that are constant, duplicated or
// exactly collinear with earlier instruments are dropped with a note.
//
// Optimal instruments ("optimal" in [instruments] generate; Chamberlain
// 1987, Reynaert & Verboven 2014): after a first two-step estimate, price is
// predicted by OLS on all of Z, δ̂ = X1(p̂)β̂ with ξ = 0, and the instruments
// become [exogenous X1, p̂, ∂δ/∂θ2 at δ̂, p̂, θ̂2]; the model is re-estimated
// with them (exactly identified) and the first estimate is kept under
// "preliminary" in the results.
//
// Diagnostics: ranks of Z and Z'X1 (deficiency is an error naming the
// offending column and the columns it depends on); the first stage of price
// on Z with the homoskedastic F of the excluded instruments (df q, N − M),
// partial R² and an HC0 Wald F, compared with the Stock & Yogo (2005) 10%
// maximal-size critical value for one endogenous regressor (values recalled
// from memory, 1 to 10 instruments; beyond that the rule of thumb F > 10);
// the weighting matrix's Cholesky factorisation and 2-norm condition number;
// the singular values of G (a smallest/largest ratio below 1e-8 is a
// warning); and a verdict on Hansen J at 5%. With absorbed fixed effects the
// first-stage degrees of freedom do not subtract the effects.
//
// Supply side (Pricing, Market, Markups): a market's demand as a function of
// its prices, δ(p) = δ⁰ + β_price(p − p⁰) with the tastes repriced where
// price has a random coefficient; Δ_jl = −Ω_jl ∂s_l/∂p_j with Ω_jl = 1 when
// j and l share an owner; markups η = Δ⁻¹s; costs c = p − η; first-order
// conditions r = s − Δ(p − c) = 0 and their Jacobian (FOCJacobian)
// ∂r_j/∂p_m = ∂s_j/∂p_m + Ω_jm ∂s_m/∂p_j + Σ_l Ω_jl (p_l − c_l)
// ∂²s_l/∂p_j∂p_m, whose f×f block is firm f's profit Hessian.
//
// Post-estimation (Fitted): α_i = β_price + Σ_{p on price} θ_p v_ip per agent;
// ∂s_j/∂p_l = Σ_i w_i α_i s_ij(1[j=l] − s_il); elasticities e_jl =
// (∂s_j/∂p_l)p_l/s_j; diversion D_jl = −(∂s_l/∂p_j)/(∂s_j/∂p_j) with the
// outside good 1 − Σ_{l≠j} D_jl; the aggregate elasticity of inside demand
// to a uniform proportional price rise Σ_jl (∂s_j/∂p_l)p_l / Σ_j s_j; and
// consumer surplus Σ_i w_i ln(1 + Σ_j exp(δ_j + μ_ij))/(−α_i).
package demand
