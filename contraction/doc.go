// Package contraction computes market shares of a demand family, their
// Jacobians, and inverts observed shares market by market.
//
// The package has three parts. Market is the share model of one market at
// a time — the seam through which every caller reaches shares: set up a
// market at θ2, shares from δ, the inversion's damping, ∂s/∂δ and ∂s/∂θ2,
// ∂s/∂p given each agent's price coefficient, and the log-inclusive value.
// A Family makes the Markets of a Problem; RCLogit is the first (rclogit.go)
// and the random-coefficients nested logit (Nested, nested.go) the second,
// and a new family is a new type, not edits in the callers. Worker wraps a
// Market with the family-independent algorithms: the damped SQUAREM
// inversion, chord Newton steps from a warm start, and ∂δ/∂θ2 by the
// implicit function theorem. Pool is the one worker pool: Solver, the
// post-estimation and counterfactual code of packages demand and merger all
// dispatch their markets through it.
//
// In market t with products j = 1..J and agents i = 1..I of weight w_i,
//
//	μ_ij = Σ_p θ_p x2_j,k(p) v_i,l(p)
//	s_ij = exp(δ_j + μ_ij) / (1 + Σ_l exp(δ_l + μ_il)),   s_j = Σ_i w_i s_ij,
//
// where each parameter p of θ2 multiplies one random characteristic column
// k(p) of X2 and one agent variable l(p) (a taste draw ν for a σ, a
// demographic D for a Π entry).
//
// Speed comes from factoring the exponential: exp(δ_j + μ_ij) =
// exp(δ_j − d)·exp(μ_ij − m_i)·exp(d + m_i) with d = max(0, max_j δ_j) and m_i
// an upper bound of max(0, max_j μ_ij) (Σ_k of the largest x_jk·a_ik over the
// market, which needs no pass over products). The matrix E_ji = exp(μ_ij −
// m_i) ≤ 1 and the outside terms o_i = exp(−m_i) ≤ 1 are computed once per θ2
// and market; an iteration of the share map then costs J exponentials, J
// axpy and J dot products over agents instead of J·I exponentials. Every
// exponentiated quantity is shifted by its maximum including the outside
// good (log-sum-exp), so nothing overflows:
//
//	s_ij = e_j E_ji / (exp(−d) o_i + Σ_l e_l E_li),   e_j = exp(δ_j − d).
//
// On amd64 with AVX2 and FMA the exponentials of E and o and the dot and axpy
// kernels run in Go assembly (exp_amd64.s, kernels_amd64.s), four values per
// instruction; elsewhere gonum's kernels and a table-driven scalar exp are
// used. Shifted arguments below −700 are treated as −700: their exponential
// (< 1e-304) only ever meets terms of order one. The two paths agree to a few
// units in the last place, so results are reproducible on one machine but
// may differ in the last digits between machines with and without AVX2.
//
// Inversion (Berry 1994; Berry, Levinsohn & Pakes 1995) iterates the map
// f(δ) = δ + ln s_obs − ln s(δ) from the logit start δ_j = ln s_j − ln s_0 (or
// from the last converged δ of the market, a warm start) until
// max_j |f(δ)_j − δ_j| < tolerance (default 1e-14, Dubé, Fox & Su 2012);
// a family may damp the map and supply its own start (nested logit below).
// The accelerated variant is SQUAREM (Varadhan & Roland 2008) with the S3
// step length α = −‖r‖/‖v‖, r = f(δ) − δ, v = f(f(δ)) − 2f(δ) + δ, and the
// safeguards of the authors' reference implementation as we recall them
// (from memory): α is clipped to [−αmax, −1], αmax starts at 1 and is
// multiplied by 4 each time the clip binds; each extrapolation δ − 2αr + α²v
// is followed by one stabilising map evaluation; an extrapolation that yields
// a non-finite share falls back to f(f(δ)) and resets αmax to 1. Iterations
// count map evaluations. A market that has not converged within the cap, or
// whose shares became non-finite, is reported as failed, never hidden.
//
// Jacobians at the converged δ:
//
//	∂s_j/∂δ_l = s_j 1[j=l] − Σ_i w_i s_ij s_il,
//	∂s_j/∂θ_p = Σ_i w_i s_ij v_i,l(p) (x2_j,k(p) − Σ_m s_im x2_m,k(p)),
//	∂δ/∂θ2   = −(∂s/∂δ)⁻¹ ∂s/∂θ2   (implicit function theorem).
//
// ∂s/∂δ is symmetric in every additive random-utility model (shares are the
// gradient of the expected maximum utility in δ); Worker.DeltaJacobian
// factors it by Cholesky and falls back to LU when that fails (negative
// sparse-grid weights can make it indefinite).
//
// Warm starts. Solver keeps each market's last δ. Given ∂δ/∂θ2 from a nearby
// solve, Predict moves δ to its first-order prediction at the new θ2. When
// the last solve also factored ∂s/∂δ by Cholesky, the
// next solve first tries chord Newton steps δ ← δ + (∂s/∂δ)⁻¹(s∘(ln s_obs −
// ln s(δ))) with that fixed factor, one share evaluation each, stopping on the
// same criterion max|damping∘(ln s_obs − ln s(δ))| < tolerance; if the residual fails
// to halve in a step it falls back to SQUAREM from where it started. The
// fixed point, and so the result, is the same either way.
//
// Markets are independent: Solver runs them on a Pool of GOMAXPROCS
// workers, each owning one Worker whose buffers grow to the largest market
// it has seen, so a market solve allocates nothing once the buffers are
// sized. The pool creates workers when a dispatch needs them, so a solver
// made under GOMAXPROCS = 1 also runs under 2. Each market writes only its
// own rows and callers reduce in market order, so results do not depend on
// scheduling. A θ2 that is not finite fails every market without an
// inversion (a line search that wanders to NaN must see +Inf, not a
// converged NaN).
//
// Log-normal coefficients. Problem.LogNormal marks columns of X2 whose
// coefficient is −exp(Σ_p θ_p v_ip) instead of the sum (price under a
// log-normal price sensitivity: α_i = −exp(β + σν_i + Σ_d Π_d D_id), with β
// a taste parameter on an agent variable of ones). The transform is applied
// once per θ2 and market in Set, so the share map is unchanged, and
// ∂a_ik/∂θ_p = a_ik v_ip enters ∂s/∂θ2 in place of v_ip.
//
// Nested logit (Nested; Berry 1994, Grigolon & Verboven 2014). Products are
// grouped into nests g, the outside good alone; u_ij = δ_j + μ_ij + ζ_ig +
// (1−ρ_g)ε_ij and
//
//	D_ig = Σ_{j∈g} exp((δ_j+μ_ij)/(1−ρ_g)),
//	s_ij = exp((δ_j+μ_ij)/(1−ρ_g))/D_ig · D_ig^(1−ρ_g)/(1 + Σ_h D_ih^(1−ρ_h)).
//
// The nesting parameters follow the taste parameters in θ2
// (Family.Params; Problem.NumParams counts them): one ρ for all nests, or
// one per nest in the order of the nest indices (Nested.ByNest). A ρ
// outside [0, 1) (or NaN) is not a model: Set marks the market, and Shares
// and Jacobians report false, so an optimiser that tries one sees a failed
// evaluation (+Inf), never a number. Numerical safety: the within-nest sum
// is a log-sum-exp with the 1/(1−ρ) scaling inside, E_ji = exp((μ_ij −
// b_gi)/(1−ρ_g)) with b_gi = max_{l∈g} μ_il computed once per θ2 and e_j =
// exp((δ_j − d_g)/(1−ρ_g)) with d_g = max_{l∈g} δ_l per evaluation, so each
// nest has a term of order one however large 1/(1−ρ) is; the outer sum is
// shifted by each agent's largest log inclusive value (and 0 for the
// outside good). ln D̃ comes from logVec (log.go), G·I of them per
// evaluation: on amd64 with AVX2 the algorithm of FreeBSD's e_log.c (as Go's
// math/log.go ports it) four lanes at a time, bit for bit that algorithm's
// result and within one unit in the last place of math.Log; elsewhere a
// table-driven scalar logarithm. Near ρ = 1 the shares react to δ with a factor
// 1/(1−ρ); δ cannot carry more digits than that, so the inversion's
// criterion is on its step, below.
//
// The nested inversion is the damped map δ ← δ + (1−ρ_g)(ln s_obs − ln s(δ))
// (Market.Damping), stopped when the step max_j |Δδ_j| < tolerance (for the
// logit the step is the residual in log shares), started at the family's own
// point (Starter): δ_j = ln s_j − ln s_0 − ρ_g ln s_{j|g}, the exact inversion
// when σ = 0, so the plain nested logit inverts in one evaluation. Per agent,
// with s_ij|g the within-nest share,
//
//	∂s_ij/∂δ_l = s_ij (1[j=l]/(1−ρ_g) − 1[l∈g] ρ_g/(1−ρ_g) s_il|g − s_il),
//	∂s_j/∂θ_p  = Σ_i w_i s_ij v_ip (x_jk/(1−ρ_g) − ρ_g/(1−ρ_g) x̄_gik − x̄_ik),
//	∂s_j/∂ρ_h  = Σ_i w_i s_ij (1[j∈h](ln s_ij|h + ρ_h H_ih)/(1−ρ_h) + s_ih H_ih),
//
// with x̄_gik the within-nest mean of x_k, s_ih the nest share and H_ih =
// −Σ_{l∈h} s_il|h ln s_il|h the within-nest entropy. ∂s/∂δ is symmetric. For
// prices, Λ_j = Σ_i w_i α_i s_ij/(1−ρ_g): ∂s/∂p = diag(Λ) − Γ with Γ
// symmetric, so the ζ fixed point keeps the Bertrand–Nash prices as its
// fixed point. The log-inclusive value is ln(1 + Σ_g D_ig^(1−ρ_g)).
//
// ∂s/∂p (PriceJacobian) at agents' price coefficients α_i:
//
//	∂s_j/∂p_l = Σ_i w_i α_i s_ij (1[j=l] − s_il),   Λ_j = Σ_i w_i α_i s_ij,
//
// so ∂s/∂p = diag(Λ) − Γ with Γ_jl = Σ_i w_i α_i s_ij s_il (symmetric,
// J(J+1)/2 products over agents), the split of the ζ fixed point (Morrow &
// Skerlos 2011). α_i = β_price + the agent's taste deviation on the price
// column of X2 (PriceCol), if any. The second derivatives (PriceHessian, an
// optional method of a family's Market, reached through
// Worker.PriceHessian), differentiating once more agent by agent,
//
//	∂²s_l/∂p_j∂p_m = Σ_i w_i α_i² s_il [(1[l=j] − s_ij)(1[l=m] − s_im) − s_ij(1[j=m] − s_im)],
//
// are returned contracted row by row with a J×J matrix u, dst_jm = Σ_l u_jl
// ∂²s_l/∂p_j∂p_m = Σ_i w_i α_i² s_ij [1[j=m](u_jj − ū_ij) + s_im(2ū_ij −
// u_jj − u_jm)] with ū_ij = Σ_l u_jl s_il (3J² products over agents): with
// u_jl = Ω_jl(p_l − c_l) this is the curvature term of the Jacobian of the
// Bertrand–Nash first-order conditions, which is all the equilibrium solver
// needs, so no J³ tensor is formed. The log-inclusive value is
// ln(1 + Σ_j exp(δ_j + μ_ij)) = ln(den_i) + d + m_i.
//
// Shares are not recomputed when asked again at the same δ before Set or
// Reprice changes the market (∂s/∂p after the shares at the same prices).
package contraction
