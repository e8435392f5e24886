// Package instruments builds excluded instruments for demand estimation and
// computes first-stage style helpers. Every builder works on one market at a
// time (the caller runs markets in parallel) and writes into caller-owned
// slices.
//
// For a market with products j, owners f(j) and an exogenous characteristic x:
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
// Hausman-style instruments: hausman_price_j = the mean price of the same
// product in all other markets (leave-one-out), defined only for products
// seen in at least two markets.
//
// Names follow one scheme: <construction>_<column>, lower case, with the
// construction one of own_sum, rival_sum, local_own, local_rival, sqdiff_own,
// sqdiff_rival, hausman, and the counts n_own and n_rival.
//
// Before use, built columns that are constant or exact duplicates of an
// earlier column are dropped with a note (Prune), so a redundant instrument
// never surfaces later as a singular matrix.
package instruments
