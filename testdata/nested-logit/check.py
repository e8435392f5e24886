#!/usr/bin/python3
"""Independent numpy re-computation of expected.json (run after estimate.R).

Run:  /usr/bin/python3 check.py      (from this folder)
1. Two-step GMM, its sandwich SEs and Hansen J redone in numpy (lstsq-free
   normal equations, the same conventions) and compared with expected.json.
2. The market-1 elasticity matrix redone WITHOUT the closed form: central
   finite differences of the nested-logit share function in the prices
   (delta recovered from the observed shares by the nested-logit inversion at
   the true rho), compared with the closed form in expected.json.
Prints the largest relative differences; exits 1 if they exceed 1e-9 (GMM)
or 1e-6 (finite differences).
"""
import csv
import json
import sys
import numpy as np

exp = json.load(open("expected.json"))
rows = list(csv.DictReader(open("products.csv")))
N = len(rows)
col = lambda c: np.array([float(r[c]) for r in rows])
mkt = np.array([int(r["market"]) for r in rows])
seg = np.array([r["segment"] for r in rows])
s = col("share")
inside = {}
segsum = {}
for m, g, v in zip(mkt, seg, s):
    inside[m] = inside.get(m, 0.0) + v
    segsum[(m, g)] = segsum.get((m, g), 0.0) + v
s0 = np.array([1.0 - inside[m] for m in mkt])
sg = np.array([segsum[(m, g)] for m, g in zip(mkt, seg)])
y = np.log(s) - np.log(s0)
X = np.column_stack([np.ones(N), col("x1"), col("x2"), col("price"), np.log(s / sg)])
Z = np.column_stack([np.ones(N), col("x1"), col("x2")] + [col(c) for c in exp["excluded"]])


def lin(W):
    A = X.T @ Z @ W @ Z.T @ X
    return np.linalg.solve(A, X.T @ Z @ W @ Z.T @ y)


W1 = np.linalg.inv(Z.T @ Z / N)
b1 = lin(W1)
e1 = y - X @ b1
W2 = np.linalg.inv((Z * e1[:, None] ** 2).T @ Z / N)
b2 = lin(W2)
e2 = y - X @ b2
g2 = Z.T @ e2 / N
J = N * g2 @ W2 @ g2
G = -Z.T @ X / N
S2 = (Z * e2[:, None] ** 2).T @ Z / N
B = np.linalg.inv(G.T @ W2 @ G)
V = B @ G.T @ W2 @ S2 @ W2 @ G @ B / N
se = np.sqrt(np.diag(V))
rd = lambda a, b: float(np.max(np.abs(np.asarray(a) - np.asarray(b)) / np.abs(np.asarray(b))))
d_gmm = max(rd(b1, exp["step1_coef"]), rd(b2, exp["coef"]), rd(se, exp["se_sandwich"]),
            rd([J], [exp["j"]]))
print(f"numpy vs R matrix algebra: step-1 coef {rd(b1, exp['step1_coef']):.2e}, "
      f"step-2 coef {rd(b2, exp['coef']):.2e}, sandwich se {rd(se, exp['se_sandwich']):.2e}, "
      f"J {rd([J], [exp['j']]):.2e}")

# ---- elasticities by finite differences of the share function
el = exp["elasticities_market1"]
a, rho = el["alpha"], el["rho"]
m1 = mkt == 1
sh, p = s[m1], col("price")[m1]
nest = seg[m1]
s0_1 = 1.0 - sh.sum()


def shares(delta):
    v = delta / (1 - rho)
    out = np.empty_like(delta)
    D = {g: np.exp(v[nest == g]).sum() for g in set(nest)}
    den = 1.0 + sum(Dg ** (1 - rho) for Dg in D.values())
    for g, Dg in D.items():
        mm = nest == g
        out[mm] = np.exp(v[mm]) / Dg * Dg ** (1 - rho) / den
    return out


# nested-logit inversion at the true rho: delta = ln s - ln s0 - rho ln s_{j|g}
sjg = np.array([sh[k] / sh[nest == nest[k]].sum() for k in range(len(sh))])
delta = np.log(sh) - np.log(s0_1) - rho * np.log(sjg)
assert np.max(np.abs(shares(delta) - sh) / sh) < 1e-12
h = 1e-5
E = np.empty((len(sh), len(sh)))
for k in range(len(sh)):
    dp = np.zeros(len(sh))
    dp[k] = h
    ds = (shares(delta + a * dp) - shares(delta - a * dp)) / (2 * h)
    E[:, k] = ds * p[k] / sh
d_el = rd(E, el["matrix"])
print(f"finite-difference elasticities vs closed form: max rel diff {d_el:.2e}")
ok = d_gmm < 1e-9 and d_el < 1e-6
print("OK" if ok else "MISMATCH")
sys.exit(0 if ok else 1)
