#!/usr/bin/python3
"""Draw an invented bottled-water data set from a true nested logit
(Berry 1994) with multi-product Bertrand-Nash prices.

Run:  /usr/bin/python3 make_data.py      (from this folder; needs numpy, scipy)
Writes products.csv, truth.json, truth_products.csv.

Model (one nesting parameter rho for both nests; the outside good is alone):
  u_ij = delta_j + zeta_ig + (1 - rho) eps_ij
  delta_j = b0 + b_x1 x1 + b_x2 x2 + alpha p_j + xi_j,   alpha < 0
  D_g = sum_{k in g} exp(delta_k / (1 - rho))
  s_{j|g} = exp(delta_j / (1 - rho)) / D_g
  s_g = D_g^(1 - rho) / (1 + sum_h D_h^(1 - rho))
  s_j = s_{j|g} s_g
Marginal cost c_j = exp(g0 + g_z z_cost + g_x1 x1 + omega_j).
Prices solve the multi-product Bertrand-Nash first-order conditions
  s_j + sum_{k owned by f(j)} (p_k - c_k) ds_k/dp_j = 0
i.e. p = c + Delta(p)^-1 s(p), Delta_jk = -Omega_jk ds_k/dp_j, solved per
market with scipy.optimize.root to a residual below 1e-13.
"""
import json
import numpy as np
from scipy.optimize import root

SEED = 20240611
T = 150
NESTS = ["still", "sparkling"]
FIRMS = ["Alder", "Birchfield", "Copperleaf", "Dunmore", "Elmstead"]

TRUE = {
    "beta_const": 1.0,
    "beta_x1": 1.0,
    "beta_x2": 0.5,
    "alpha_price": -2.0,
    "rho": 0.5,
    "gamma_const": 0.0,
    "gamma_z_cost": 0.5,
    "gamma_x1": 0.2,
    "sd_xi": 0.3,
    "sd_omega": 0.1,
    "corr_xi_omega": 0.3,
}


def nl_shares(delta, nest, rho):
    """Nested-logit shares, conditional shares; nest is an int array (0/1)."""
    v = delta / (1.0 - rho)
    s = np.empty_like(delta)
    sjg = np.empty_like(delta)
    logD = {}
    for g in np.unique(nest):
        m = nest == g
        vm = v[m]
        mx = vm.max()
        e = np.exp(vm - mx)
        D = e.sum()
        sjg[m] = e / D
        logD[g] = mx + np.log(D)
    # inclusive terms (1 - rho) log D_g, with the outside good (0) in the log-sum-exp
    iv = np.array([(1.0 - rho) * logD[g] for g in sorted(logD)])
    mx = max(0.0, iv.max())
    den = np.exp(-mx) + np.exp(iv - mx).sum()
    sg = {g: np.exp((1.0 - rho) * logD[g] - mx) / den for g in logD}
    for g in logD:
        m = nest == g
        s[m] = sjg[m] * sg[g]
    return s, sjg


def ds_ddelta(s, sjg, nest, rho):
    """J[j, k] = ds_j / d delta_k (closed form, Berry 1994)."""
    same = nest[:, None] == nest[None, :]
    J = -np.outer(s, s) - same * (rho / (1.0 - rho)) * np.outer(s, sjg)
    J[np.diag_indices_from(J)] += s / (1.0 - rho)
    return J


def main():
    rng = np.random.default_rng(SEED)
    t = TRUE
    rows = []
    truth_rows = []
    max_foc = 0.0
    for mkt in range(1, T + 1):
        nj = [rng.integers(3, 7) for _ in NESTS]  # 3..6 products per nest
        nest = np.concatenate([np.full(n, g) for g, n in enumerate(nj)])
        J = len(nest)
        firm = rng.integers(0, len(FIRMS), size=J)
        x1 = rng.uniform(0.0, 2.0, size=J)
        x2 = rng.normal(0.0, 1.0, size=J)
        z = rng.uniform(0.0, 1.0, size=J)
        e1 = rng.standard_normal(J)
        e2 = rng.standard_normal(J)
        xi = t["sd_xi"] * e1
        r = t["corr_xi_omega"]
        omega = t["sd_omega"] * (r * e1 + np.sqrt(1 - r * r) * e2)
        cost = np.exp(t["gamma_const"] + t["gamma_z_cost"] * z + t["gamma_x1"] * x1 + omega)
        dbar = t["beta_const"] + t["beta_x1"] * x1 + t["beta_x2"] * x2 + xi
        a, rho = t["alpha_price"], t["rho"]
        own = (firm[:, None] == firm[None, :]).astype(float)

        def foc(p):
            s, sjg = nl_shares(dbar + a * p, nest, rho)
            dsdp = a * ds_ddelta(s, sjg, nest, rho)  # [j,k] = ds_j/dp_k
            Delta = -own * dsdp.T
            return p - cost - np.linalg.solve(Delta, s)

        p0 = cost + (1 - rho) / (-a)
        sol = root(foc, p0, method="hybr", tol=1e-15)
        p = sol.x
        res = np.abs(foc(p)).max()
        if not sol.success and res > 1e-12:
            raise RuntimeError(f"market {mkt}: FOC not solved ({res})")
        max_foc = max(max_foc, res)
        delta = dbar + a * p
        s, sjg = nl_shares(delta, nest, rho)
        markup = p - cost
        for j in range(J):
            same_nest = (nest == nest[j]) & (np.arange(J) != j)
            rival = firm != firm[j]
            rows.append({
                "market": mkt,
                "product": j + 1,
                "firm": FIRMS[firm[j]],
                "segment": NESTS[nest[j]],
                "share": s[j],
                "price": p[j],
                "x1": x1[j],
                "x2": x2[j],
                "z_cost": z[j],
                "n_nest": int(same_nest.sum()),
                "nest_sum_x1": x1[same_nest].sum(),
                "nest_sum_x2": x2[same_nest].sum(),
                "rival_sum_x1": x1[rival].sum(),
                "rival_sum_x2": x2[rival].sum(),
            })
            truth_rows.append({
                "market": mkt, "product": j + 1, "xi": xi[j], "omega": omega[j],
                "cost": cost[j], "markup": markup[j], "delta": delta[j],
                "share_within_nest": sjg[j],
            })

    def fmt(v):
        if isinstance(v, (float, np.floating)):
            return repr(float(v))
        return str(v)

    for fname, rr in (("products.csv", rows), ("truth_products.csv", truth_rows)):
        cols = list(rr[0].keys())
        with open(fname, "w") as f:
            f.write(",".join(cols) + "\n")
            for r_ in rr:
                f.write(",".join(fmt(r_[c]) for c in cols) + "\n")

    inside = {}
    for r_ in rows:
        inside[r_["market"]] = inside.get(r_["market"], 0.0) + r_["share"]
    ins = np.array(list(inside.values()))
    truth = {
        "seed": SEED,
        "generator": "make_data.py (numpy default_rng)",
        "markets": T,
        "observations": len(rows),
        "nests": NESTS,
        "firms": FIRMS,
        "parameters": TRUE,
        "forms": {
            "delta": "beta_const + beta_x1*x1 + beta_x2*x2 + alpha_price*price + xi",
            "cost": "exp(gamma_const + gamma_z_cost*z_cost + gamma_x1*x1 + omega)",
            "unobservables": "xi = sd_xi*e1; omega = sd_omega*(corr*e1 + sqrt(1-corr^2)*e2); e1, e2 iid N(0,1)",
            "shares": "nested logit, one rho, outside good alone in its own nest (Berry 1994)",
            "prices": "multi-product Bertrand-Nash, p = c + Delta^-1 s",
        },
        "max_foc_residual": max_foc,
        "inside_share_sum": {"min": ins.min(), "mean": ins.mean(), "max": ins.max()},
        "versions": {"numpy": np.__version__, "scipy": __import__("scipy").__version__},
    }
    with open("truth.json", "w") as f:
        json.dump(truth, f, indent=1)
    print(f"rows {len(rows)}, max FOC residual {max_foc:.3e}, inside share sum "
          f"min {ins.min():.3f} mean {ins.mean():.3f} max {ins.max():.3f}")


if __name__ == "__main__":
    main()
