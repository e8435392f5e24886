// Package demand specifies and estimates random-coefficients logit demand by
// GMM and computes post-estimation quantities and the supply side.
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
// Estimator. Z = [exogenous X1 columns, excluded and built instruments].
// For each θ2 the shares are inverted (package contraction) and β is
// concentrated out: β̂ = (X1'ZWZ'X1)⁻¹X1'ZWZ'δ, ξ = δ − X1β̂, ḡ = Z'ξ/N,
// Q = N ḡ'Wḡ. Step 1 uses W1 = (Z'Z/N)⁻¹; step 2 W2 = S⁻¹ with the
// uncentered S = (1/N)Σ ξ_n² z_n z_n' at the step-1 residuals (or its
// clustered or homoskedastic version) and re-optimises from the step-1 θ2.
// The gradient is dQ/dθ2 = 2 (∂δ/∂θ2)'Z W ḡ (the dependence through β̂ drops
// out by its first-order condition). σ enters through |σ|, so no bounds are
// needed; reported σ are ≥ 0, and a σ at 0 with dQ/d|σ| > 0 is a corner
// minimum that is reported as such rather than as non-convergence.
//
// Optimisation: gonum's BFGS (More–Thuente line search) with the analytic
// gradient to ‖g‖∞ < 1e-7, then Newton steps from the central
// finite-difference Hessian of the analytic gradient, updated by BFGS from
// the steps taken and recomputed when an updated one fails, to ‖g‖∞ <
// 1e-10·max(1, Q). Step 2 tries these Newton steps first, since it starts next
// to its optimum. The last evaluation is remembered, so asking again at the
// same θ2 and weighting matrix costs nothing; each new evaluation starts the
// inversion from a first-order prediction of δ (see package contraction). A
// stage counts as converged when ‖g‖∞ ≤ gradient_tolerance·max(1, Q)
// (default 1e-6). A trial θ2 at which some market's inversion fails has Q =
// +Inf, which the line search treats as too long a step; inner failures are
// counted per market. The eigenvalues of the finite-difference Hessian at the
// optimum are reported; a non-positive one marks the result as not converged.
//
// Covariance at the final estimates: G = Z'[−X1, ∂δ/∂θ2]/N, S at the final
// residuals, V = (G'WG)⁻¹G'WSWG(G'WG)⁻¹/N with W the last weighting matrix.
// Hansen J = Q at step 2 with df = M − dim θ and a χ² p-value.
//
// Multi-start (Knittel & Metaxoglou 2014): step 1 runs from the spec's start
// and from N−1 seeded random starts (σ uniform on [0, 3], Π standard normal),
// one after the other, each with its own share solver whose markets use the
// whole worker pool; the best step-1 objective
// proceeds to step 2, and the number of starts within 1e-6 (relative) of it
// is reported.
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
// conditions s − Δ(p − c) = 0.
//
// Post-estimation (Fitted): α_i = β_price + Σ_{p on price} θ_p v_ip per agent;
// ∂s_j/∂p_l = Σ_i w_i α_i s_ij(1[j=l] − s_il); elasticities e_jl =
// (∂s_j/∂p_l)p_l/s_j; diversion D_jl = −(∂s_l/∂p_j)/(∂s_j/∂p_j) with the
// outside good 1 − Σ_{l≠j} D_jl; the aggregate elasticity of inside demand
// to a uniform proportional price rise Σ_jl (∂s_j/∂p_l)p_l / Σ_j s_j; and
// consumer surplus Σ_i w_i ln(1 + Σ_j exp(δ_j + μ_ij))/(−α_i).
package demand
