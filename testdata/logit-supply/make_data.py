#!/usr/bin/python3
"""Draw an invented data set from a known plain logit with a log marginal-cost
equation and multi-product Bertrand-Nash prices.

Run:  /usr/bin/python3 make_data.py      (from this folder; needs numpy, scipy)
Writes products.csv, truth.json, truth_products.csv.

Model
  delta_j = b0 + b_x1 x1 + b_x2 x2 + alpha p_j + xi_j,  alpha < 0
  s_j = exp(delta_j) / (1 + sum_k exp(delta_k))
  ln c_j = g0 + g_x1 x1 + g_w1 w1 + omega_j
  (xi, omega) bivariate normal, correlated
Bertrand-Nash with multi-product firms: in the plain logit every product of
firm f carries the same markup
  eta_f = 1 / (-alpha (1 - S_f)),  S_f = sum of f's inside shares,
so p_j = c_j + eta_f(j). Solved per market for the firm markups with
scipy.optimize.root to a residual below 1e-13.
"""
import json
import numpy as np
import scipy
from scipy.optimize import root

SEED = 7031
T = 200
FIRMS = ["Harbor", "Kestrel", "Lumen", "Northgate"]

TRUE = {
    "beta_const": 0.5,
    "beta_x1": 1.0,
    "beta_x2": 0.6,
    "alpha_price": -1.5,
    "gamma_const": 0.0,
    "gamma_x1": 0.3,
    "gamma_w1": 0.6,
    "sd_xi": 0.3,
    "sd_omega": 0.15,
    "corr_xi_omega": 0.4,
}


def logit_shares(delta):
    mx = max(0.0, delta.max())
    e = np.exp(delta - mx)
    return e / (np.exp(-mx) + e.sum())


def main():
    rng = np.random.default_rng(SEED)
    t = TRUE
    a = t["alpha_price"]
    rows, truth_rows = [], []
    max_res = 0.0
    for mkt in range(1, T + 1):
        J = int(rng.integers(6, 11))          # 6..10 products
        F = int(rng.integers(3, 5))           # 3 or 4 firms present
        firms_here = rng.choice(len(FIRMS), size=F, replace=False)
        # every present firm owns at least one product; the rest at random
        firm = np.concatenate([firms_here, rng.choice(firms_here, size=J - F)])
        rng.shuffle(firm)
        x1 = rng.uniform(0.0, 2.0, size=J)
        x2 = rng.normal(0.0, 1.0, size=J)
        w1 = rng.uniform(0.0, 1.0, size=J)
        e1 = rng.standard_normal(J)
        e2 = rng.standard_normal(J)
        r = t["corr_xi_omega"]
        xi = t["sd_xi"] * e1
        omega = t["sd_omega"] * (r * e1 + np.sqrt(1 - r * r) * e2)
        cost = np.exp(t["gamma_const"] + t["gamma_x1"] * x1 + t["gamma_w1"] * w1 + omega)
        dbar = t["beta_const"] + t["beta_x1"] * x1 + t["beta_x2"] * x2 + xi
        fidx = [np.flatnonzero(firm == f) for f in firms_here]

        def prices(eta):
            p = cost.copy()
            for k, idx in enumerate(fidx):
                p[idx] += eta[k]
            return p

        def resid(eta):
            s = logit_shares(dbar + a * prices(eta))
            Sf = np.array([s[idx].sum() for idx in fidx])
            return eta - 1.0 / (-a * (1.0 - Sf))

        sol = root(resid, np.full(F, 1.0 / -a), method="hybr", tol=1e-15)
        res = np.abs(resid(sol.x)).max()
        if res > 1e-12:
            raise RuntimeError(f"market {mkt}: no equilibrium ({res})")
        max_res = max(max_res, res)
        p = prices(sol.x)
        delta = dbar + a * p
        s = logit_shares(delta)
        Sf = {f: s[firm == f].sum() for f in firms_here}
        for j in range(J):
            own = (firm == firm[j]) & (np.arange(J) != j)
            rival = firm != firm[j]
            rows.append({
                "market": mkt,
                "product": j + 1,
                "firm": FIRMS[firm[j]],
                "share": s[j],
                "price": p[j],
                "x1": x1[j],
                "x2": x2[j],
                "w1": w1[j],
                "own_n": int(own.sum()),
                "own_sum_x1": x1[own].sum(),
                "own_sum_x2": x2[own].sum(),
                "rival_n": int(rival.sum()),
                "rival_sum_x1": x1[rival].sum(),
                "rival_sum_x2": x2[rival].sum(),
            })
            truth_rows.append({
                "market": mkt, "product": j + 1, "xi": xi[j], "omega": omega[j],
                "cost": cost[j], "markup": p[j] - cost[j], "delta": delta[j],
                "firm_share": Sf[firm[j]],
            })

    def fmt(v):
        return repr(float(v)) if isinstance(v, (float, np.floating)) else str(v)

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
        "firms": FIRMS,
        "parameters": TRUE,
        "beta_names": ["1", "x1", "x2", "price"],
        "beta": [t["beta_const"], t["beta_x1"], t["beta_x2"], t["alpha_price"]],
        "gamma_names": ["1", "x1", "w1"],
        "gamma": [t["gamma_const"], t["gamma_x1"], t["gamma_w1"]],
        "forms": {
            "delta": "beta_const + beta_x1*x1 + beta_x2*x2 + alpha_price*price + xi",
            "shares": "plain logit, outside good utility 0",
            "cost": "ln c = gamma_const + gamma_x1*x1 + gamma_w1*w1 + omega",
            "unobservables": "xi = sd_xi*e1; omega = sd_omega*(corr*e1 + sqrt(1-corr^2)*e2); e1, e2 iid N(0,1)",
            "prices": "multi-product Bertrand-Nash: p_j = c_j + 1/(-alpha (1 - S_f(j)))",
        },
        "max_equilibrium_residual": max_res,
        "inside_share_sum": {"min": ins.min(), "mean": ins.mean(), "max": ins.max()},
        "versions": {"numpy": np.__version__, "scipy": scipy.__version__},
    }
    with open("truth.json", "w") as f:
        json.dump(truth, f, indent=1)
    print(f"rows {len(rows)}, max residual {max_res:.3e}, inside share sum "
          f"min {ins.min():.3f} mean {ins.mean():.3f} max {ins.max():.3f}")


if __name__ == "__main__":
    main()
