// Package instruments builds the excluded instruments of a demand model,
// decides which of them to admit, and judges their strength.
//
// # Built instruments
//
// Build makes the sets of Sets for every market in parallel. For a market
// with products j, owners f(j) and an exogenous characteristic x:
//
//	own_sum_x_j   = Σ_{k≠j, f(k)=f(j)} x_k        rival_sum_x_j = Σ_{k: f(k)≠f(j)} x_k
//	n_own_j       = #{k≠j: f(k)=f(j)}             n_rival_j     = #{k: f(k)≠f(j)}
//
// (Berry, Levinsohn & Pakes 1995). The differentiation instruments of Gandhi
// & Houde (2019), with d_jk = x_k − x_j and sd the standard deviation of x
// over the whole sample (population form, 1/N):
//
//	local_own_x_j  = #{k≠j, f(k)=f(j): |d_jk| < sd}   local_rival_x_j  = #{k: f(k)≠f(j), |d_jk| < sd}
//	sqdiff_own_x_j = Σ_{k≠j, f(k)=f(j)} d_jk²          sqdiff_rival_x_j = Σ_{k: f(k)≠f(j)} d_jk²
//
// A characteristic with two distinct values or fewer (binary) is skipped by
// the differentiation sets, with a note.
//
// Nest instruments (for the nesting parameter ρ of a nested logit; Berry
// 1994 suggests characteristics of the other products of the same nest),
// with nest(j) the nest of j:
//
//	n_nest_j     = #{k≠j: nest(k)=nest(j)}              nest_sum_x_j       = Σ_{k≠j, nest(k)=nest(j)} x_k
//	n_nest_rival_j = #{k: nest(k)=nest(j), f(k)≠f(j)}   nest_rival_sum_x_j = Σ_{k: nest(k)=nest(j), f(k)≠f(j)} x_k
//
// (the rival columns only when the design has owners; the own products of
// the nest are the difference, so they add no column).
//
// Hausman-style instruments: hausman_price_j = the mean price of the same
// product in all other markets (leave-one-out), defined only for products
// seen in at least two markets.
//
// Names follow one scheme: <construction>_<column>, lower case, with the
// construction one of own_sum, rival_sum, local_own, local_rival, sqdiff_own,
// sqdiff_rival, hausman, nest_sum, nest_rival_sum, and the counts n_own,
// n_rival, n_nest and n_nest_rival.
//
// # Admitting instruments
//
// Admit drops, with a note, each built column that is constant (or all zero
// to within 1e-10, as a column constant within absorbed fixed-effect groups
// arrives once the effects are removed), that equals an earlier column, or
// that is a linear combination of the columns before it, so a redundant
// instrument never surfaces later as a singular matrix. Collinear is that
// test on a whole matrix: each column is scaled to unit length and passed
// twice through Gram–Schmidt against the earlier ones; a remainder of norm
// below 1e-9 marks it. The message names the earlier columns whose
// coefficient in the least-squares fit of the marked column on them (unit
// columns) is at least 1e-6 of the largest.
//
// # First stage
//
// FirstStageOf regresses an endogenous column y on Z = [exogenous, excluded]
// (M columns, q excluded) and on the exogenous columns alone. With RSS_U and
// RSS_R the residual sums of squares of the two fits:
//
//	F = ((RSS_R − RSS_U)/q) / (RSS_U/(N−M)),  df (q, N−M)
//	partial R² = (RSS_R − RSS_U)/RSS_R
//	robust F = b_q' V_q⁻¹ b_q / q,  V = (Z'Z)⁻¹ (Σ_n e_n² z_n z_n') (Z'Z)⁻¹  (HC0)
//
// with b_q the excluded coefficients and V_q their block of V. The strength
// (Verdict gives its reason in words) compares the homoskedastic F with the
// Stock & Yogo (2005, table 5.2) critical value for 10% maximal size of a
// nominal 5% 2SLS Wald test with one endogenous regressor, for q = 1..10
// excluded instruments. Those ten values
// are from memory of the table, not copied from it; check them against the
// table before citing them. For more than 10 instruments no value is held
// here (the table goes further) and the rule of thumb F > 10 (Staiger &
// Stock 1997) is used instead. F at or below the value is Weak.
//
// # Optimal instruments
//
// Optimal builds the approximate optimal instruments of Chamberlain (1987)
// as used by Reynaert & Verboven (2014):
//
//	Z* = [exogenous columns of X1, p̂, ∂δ/∂θ2 at (δ̂, θ2, p̂)],
//
// p̂ the least-squares fit of price on Z, δ̂ = X1(p̂)β with ξ = 0. The share
// model stays with the caller, which supplies ∂δ/∂θ2 = −(∂s/∂δ)⁻¹∂s/∂θ2;
// this package runs the regression and lays out the columns. Z* has as many
// columns as there are parameters.
package instruments
