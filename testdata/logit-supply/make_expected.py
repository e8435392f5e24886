#!/usr/bin/python3
"""Joint two-step GMM of plain logit demand and a log marginal-cost equation
on products.csv, by numpy/scipy, under the conventions of ../../DESIGN.md
("Supply side and joint estimation").  Writes expected.json.

Run:  /usr/bin/python3 make_expected.py      (from this folder)

theta = (beta for [1, x1, x2, price], gamma for [1, x1, w1]); alpha = beta_price.
  xi    = y - X1 beta,              y = ln s_j - ln s_0
  eta_j = 1 / (-alpha (1 - S_f(j)))  (S_f = firm's inside share in the market, observed)
  c     = p - eta,  omega = ln c - Wc gamma
  g_n   = [xi_n z_d,n ; omega_n z_s,n],  gbar = sum_n g_n / N,  Q = N gbar' W gbar
The linear parameters (beta without price, gamma) are concentrated out for
each alpha by the stacked linear IV; alpha is found by bounded 1-D
minimisation of the concentrated Q, then polished by Newton steps on the
analytic derivative dQ/dalpha = 2N gbar' W dgbar/dalpha (envelope theorem).
"""
import csv
import json
import sys
import numpy as np
import scipy
from scipy.optimize import minimize_scalar
from scipy.stats import chi2

DEMAND_EXCLUDED = ["w1", "own_sum_x1", "own_sum_x2", "rival_sum_x1", "rival_sum_x2"]
SUPPLY_EXCLUDED = ["x2", "own_sum_x1", "own_sum_x2"]
BETA_NAMES = ["1", "x1", "x2", "price"]
GAMMA_NAMES = ["1", "x1", "w1"]

rows = list(csv.DictReader(open("products.csv")))
N = len(rows)
col = lambda c: np.array([float(r[c]) for r in rows])
mkt = np.array([int(r["market"]) for r in rows])
firm = np.array([r["firm"] for r in rows])
s = col("share")
p = col("price")
one = np.ones(N)
inside, fshare = {}, {}
for m, f, v in zip(mkt, firm, s):
    inside[m] = inside.get(m, 0.0) + v
    fshare[(m, f)] = fshare.get((m, f), 0.0) + v
s0 = np.array([1.0 - inside[m] for m in mkt])
Sf = np.array([fshare[(m, f)] for m, f in zip(mkt, firm)])
y = np.log(s) - np.log(s0)

X1b = np.column_stack([one, col("x1"), col("x2")])          # demand, without price
Wc = np.column_stack([one, col("x1"), col("w1")])            # cost columns
Zd = np.column_stack([one, col("x1"), col("x2")] + [col(c) for c in DEMAND_EXCLUDED])
Zs = np.column_stack([one, col("x1"), col("w1")] + [col(c) for c in SUPPLY_EXCLUDED])
Md, Ms = Zd.shape[1], Zs.shape[1]
M = Md + Ms
Kb, Kg = X1b.shape[1], Wc.shape[1]
K = Kb + 1 + Kg


def eta_of(alpha):
    return 1.0 / (-alpha * (1.0 - Sf))


# alpha must keep every implied cost positive: eta_j < p_j
ALPHA_MAX = -np.max(1.0 / (p * (1.0 - Sf)))


def moments_lin(alpha):
    """ZX (M x 6) and ZY (M) so that gbar = (ZY - ZX theta_lin)/N."""
    eta = eta_of(alpha)
    c = p - eta
    if np.any(c <= 0):
        raise ValueError("non-positive cost")
    ZX = np.zeros((M, Kb + Kg))
    ZX[:Md, :Kb] = Zd.T @ X1b
    ZX[Md:, Kb:] = Zs.T @ Wc
    ZY = np.concatenate([Zd.T @ (y - alpha * p), Zs.T @ np.log(c)])
    return ZX, ZY, eta, c


def concentrated(alpha, W):
    ZX, ZY, eta, c = moments_lin(alpha)
    A = ZX.T @ W @ ZX
    lin = np.linalg.solve(A, ZX.T @ W @ ZY)
    gbar = (ZY - ZX @ lin) / N
    Q = N * gbar @ W @ gbar
    dg = np.concatenate([Zd.T @ (-p), Zs.T @ ((eta / alpha) / c)]) / N
    dQ = 2 * N * gbar @ W @ dg
    return Q, dQ, lin, gbar


def full_theta(alpha, lin):
    beta = np.concatenate([lin[:Kb], [alpha]])
    gamma = lin[Kb:]
    return beta, gamma


def residuals(beta, gamma):
    xi = y - X1b @ beta[:Kb] - beta[Kb] * p
    eta = eta_of(beta[Kb])
    c = p - eta
    omega = np.log(c) - Wc @ gamma
    return xi, omega, eta, c


def gmat(xi, omega):
    return np.column_stack([Zd * xi[:, None], Zs * omega[:, None]])   # N x M


def jacobian(beta, gamma):
    """G = d gbar / d theta (M x K), theta = (beta incl. price, gamma)."""
    alpha = beta[Kb]
    eta = eta_of(alpha)
    c = p - eta
    G = np.zeros((M, K))
    X1 = np.column_stack([X1b, p])
    G[:Md, :Kb + 1] = -Zd.T @ X1 / N
    G[Md:, Kb] = Zs.T @ ((eta / alpha) / c) / N
    G[Md:, Kb + 1:] = -Zs.T @ Wc / N
    return G


def solve_alpha(W, start, label):
    lo, hi = -6.0, ALPHA_MAX - 1e-6
    f = lambda a: concentrated(a, W)[0]
    # coarse grid to bracket the global minimum, then bounded Brent inside it
    grid = np.linspace(lo, hi, 400)
    vals = np.array([f(a) for a in grid])
    k = int(np.argmin(vals))
    a_lo, a_hi = grid[max(k - 1, 0)], grid[min(k + 1, len(grid) - 1)]
    r = minimize_scalar(f, bounds=(a_lo, a_hi), method="bounded",
                        options={"xatol": 1e-14, "maxiter": 1000})
    a = r.x
    # Newton polish on the analytic derivative; second derivative by central differences
    hist = []
    for it in range(50):
        Q, dQ, _, _ = concentrated(a, W)
        hist.append((a, Q, dQ))
        # the derivative's round-off floor here is about 1e-10 (alpha then
        # resolved to ~3e-14); stop once below the 1e-10 target
        if abs(dQ) < 1e-10 and it > 0:
            break
        h = 1e-6
        d2 = (concentrated(a + h, W)[1] - concentrated(a - h, W)[1]) / (2 * h)
        a = a - dQ / d2
    Q, dQ, lin, gbar = concentrated(a, W)
    print(f"{label}: grid min at {grid[k]:.4f}, brent {r.x:.15f}, newton {a:.17g}, "
          f"Q {Q:.17g}, dQ/dalpha {dQ:.3e}, newton steps {len(hist)}", file=sys.stderr)
    if abs(dQ) >= 1e-10:
        raise RuntimeError(f"{label}: |dQ/dalpha| = {abs(dQ)} not below 1e-10")
    return a, Q, dQ, lin, gbar, d2


def to_json(x, ind=""):
    """JSON with every float printed as %.17g (round-trips exactly)."""
    ind2 = ind + " "
    if isinstance(x, dict):
        items = [ind2 + json.dumps(k) + ": " + to_json(v, ind2) for k, v in x.items()]
        return "{\n" + ",\n".join(items) + "\n" + ind + "}"
    if isinstance(x, (list, tuple, np.ndarray)):
        x = list(x)
        if all(not isinstance(v, (dict, list, tuple, np.ndarray)) for v in x):
            return "[" + ", ".join(to_json(v, ind2) for v in x) + "]"
        return "[\n" + ",\n".join(ind2 + to_json(v, ind2) for v in x) + "\n" + ind + "]"
    if isinstance(x, (bool, np.bool_)):
        return "true" if x else "false"
    if isinstance(x, (int, np.integer)):
        return str(int(x))
    if isinstance(x, (float, np.floating)):
        return "%.17g" % float(x)
    return json.dumps(x)


def main():
    # ---- step 1
    W1 = np.zeros((M, M))
    W1[:Md, :Md] = np.linalg.inv(Zd.T @ Zd / N)
    W1[Md:, Md:] = np.linalg.inv(Zs.T @ Zs / N)
    a1, Q1, dQ1, lin1, _, curv1 = solve_alpha(W1, None, "step 1")
    beta1, gamma1 = full_theta(a1, lin1)
    xi1, om1, _, _ = residuals(beta1, gamma1)
    g1 = gmat(xi1, om1)
    S1 = g1.T @ g1 / N
    W2 = np.linalg.inv(S1)
    # ---- step 2 (re-optimised; the bracket search covers the step-1 alpha)
    a2, Q2, dQ2, lin2, gbar2, curv2 = solve_alpha(W2, a1, "step 2")
    beta2, gamma2 = full_theta(a2, lin2)
    xi2, om2, eta2, c2 = residuals(beta2, gamma2)
    g2 = gmat(xi2, om2)
    assert np.allclose(g2.mean(axis=0), gbar2, rtol=0, atol=1e-13)
    S2 = g2.T @ g2 / N
    G = jacobian(beta2, gamma2)
    grad_full = 2 * N * G.T @ W2 @ gbar2
    B = np.linalg.inv(G.T @ W2 @ G)
    V = B @ G.T @ W2 @ S2 @ W2 @ G @ B / N
    se = np.sqrt(np.diag(V))
    V_eff = np.linalg.inv(G.T @ np.linalg.inv(S2) @ G) / N
    se_eff = np.sqrt(np.diag(V_eff))
    # check G against central differences of gbar
    theta2 = np.concatenate([beta2, gamma2])

    def gbar_theta(th):
        xi, om, _, _ = residuals(th[:Kb + 1], th[Kb + 1:])
        return gmat(xi, om).mean(axis=0)

    Gfd = np.empty_like(G)
    for k in range(K):
        h = 1e-6 * max(1.0, abs(theta2[k]))
        e = np.zeros(K)
        e[k] = h
        Gfd[:, k] = (gbar_theta(theta2 + e) - gbar_theta(theta2 - e)) / (2 * h)
    g_fd_err = float(np.max(np.abs(Gfd - G)) / np.max(np.abs(G)))
    J = Q2
    df = M - K
    # ---- market 1 markups at the truth
    truth = json.load(open("truth.json"))
    a_true = truth["parameters"]["alpha_price"]
    m1 = mkt == 1
    eta_true_m1 = 1.0 / (-a_true * (1.0 - Sf[m1]))

    out = {
        "source": ("make_expected.py in this folder (numpy " + np.__version__ + ", scipy "
                   + scipy.__version__ + "), an independent implementation of the joint "
                   "demand-and-supply GMM conventions of ../../DESIGN.md; cross-checked by "
                   "check.R (R base, gmm, numDeriv), see r_crosscheck.json"),
        "observations": N,
        "markets": int(len(np.unique(mkt))),
        "beta_names": BETA_NAMES,
        "gamma_names": GAMMA_NAMES,
        "theta_names": ["beta[" + n + "]" for n in BETA_NAMES] + ["gamma[" + n + "]" for n in GAMMA_NAMES],
        "cost_form": "log",
        "demand_instruments": ["1", "x1", "x2"] + DEMAND_EXCLUDED,
        "demand_excluded": DEMAND_EXCLUDED,
        "supply_instruments": ["1", "x1", "w1"] + SUPPLY_EXCLUDED,
        "supply_excluded": SUPPLY_EXCLUDED,
        "moments": M,
        "moments_demand": Md,
        "moments_supply": Ms,
        "alpha_upper_bound_positive_costs": ALPHA_MAX,
        "step1": {
            "beta": beta1.tolist(), "gamma": gamma1.tolist(),
            "objective": Q1, "dq_dalpha": dQ1, "d2q_dalpha2": curv1,
        },
        "step2": {
            "beta": beta2.tolist(), "gamma": gamma2.tolist(),
            "objective": Q2, "dq_dalpha": dQ2, "d2q_dalpha2": curv2,
            "gradient_full_theta": grad_full.tolist(),
        },
        "beta": beta2.tolist(),
        "gamma": gamma2.tolist(),
        "se_beta": se[:Kb + 1].tolist(),
        "se_gamma": se[Kb + 1:].tolist(),
        "se_sandwich": se.tolist(),
        "se_efficient": se_eff.tolist(),
        "se_note": ("se_sandwich (also se_beta, se_gamma) = sqrt diag (G'WG)^-1 G'WSWG (G'WG)^-1 / N, "
                    "G = d gbar/d theta at step 2, W = W2 (from step-1 residuals), S = (1/N) sum g_n g_n' "
                    "at the step-2 residuals; se_efficient = (G'S^-1 G)^-1/N with the same S"),
        "covariance": V.tolist(),
        "j": J,
        "j_df": df,
        "j_pvalue": float(chi2.sf(J, df)),
        "objective": Q2,
        "w2": W2.tolist(),
        "jacobian_check_max_rel_error_central_differences": g_fd_err,
        "truth": {"beta": truth["beta"], "gamma": truth["gamma"],
                  "beta_names": truth["beta_names"], "gamma_names": truth["gamma_names"],
                  "all": truth["parameters"]},
        "markups_market1_truth": {
            "note": "eta_j = 1/(-alpha (1 - S_f(j))) at the TRUE alpha and the OBSERVED shares of market 1; S_f = inside share of j's firm",
            "alpha": a_true,
            "product": [int(r["product"]) for r, m in zip(rows, m1) if m],
            "firm": firm[m1].tolist(),
            "share": s[m1].tolist(),
            "firm_share": Sf[m1].tolist(),
            "price": p[m1].tolist(),
            "markup": eta_true_m1.tolist(),
            "cost": (p[m1] - eta_true_m1).tolist(),
        },
        "markups_market1_estimate": {
            "note": "the same at the step-2 estimate of alpha",
            "alpha": a2,
            "markup": eta2[m1].tolist(),
            "cost": c2[m1].tolist(),
        },
        "versions": {"numpy": np.__version__, "scipy": scipy.__version__,
                     "python": sys.version.split()[0]},
    }
    text = to_json(out)
    with open("expected.json", "w") as f:
        f.write(text + "\n")
    print("step1 beta", beta1, "gamma", gamma1, "Q1", Q1)
    print("step2 beta", beta2, "gamma", gamma2)
    print("se", se)
    print("J %.17g df %d p %.6g" % (J, df, chi2.sf(J, df)))
    print("|grad full| %.3e, G vs finite differences %.2e" % (np.max(np.abs(grad_full)), g_fd_err))
    print("sandwich vs efficient max rel %.2e" % np.max(np.abs(se - se_eff) / se_eff))


if __name__ == "__main__":
    main()
