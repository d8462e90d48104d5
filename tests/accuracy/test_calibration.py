"""Calibration of the two accuracy statements of whiten.fit_linear against mpmath (60 digits).

Reference: mpmath (Johansson et al.) at 60 significant digits, from the exact double inputs.
* actual accuracy: the exact solution of the problem as given (normal equations in mpmath; at 60 digits
  their squared condition costs nothing), compared with whiten's coefficients -> ``digits_solved``;
* actual sensitivity: the exact first-order worst case over a change of one unit (eps relative) in every
  input (X entries, y, weights, error-covariance entries, symmetric pairs changed together), from the
  exact derivatives in mpmath -> ``digits_trusted``.
Both in the max-norm of the coefficients times power-of-two column norms of the whitened design.
Rule (issue 13): the claim never exceeds the actual by more than 0.5 digit, and is within 1.5 digits of it
in at least 90% of the problems.
"""

from __future__ import annotations

import math
import warnings

import mpmath as mp
import numpy as np
import pytest

import whiten

EPS = 2.0 ** -52
CAP = -math.log10(EPS)
mp.mp.dps = 60


def _ar1(n, rho):
    i = np.arange(n)
    return rho ** np.abs(i[:, None] - i[None, :])


def _problems():
    rng = np.random.default_rng(20240613)
    out = []
    for k in range(3):  # plain OLS
        x = rng.standard_normal((30, 3))
        out.append((f"ols-random-{k}", x, x @ [1, -2, 3] + 0.1 * rng.standard_normal(30), {}))
    for deg, off in [(2, 10.0), (3, 100.0), (4, 100.0), (5, 30.0)]:
        t = off + np.linspace(0, 1, 40)
        x = np.column_stack([t ** j for j in range(1, deg + 1)])
        out.append((f"ols-poly{deg}-offset{off:g}", x, np.cos(t) + 1e-3 * rng.standard_normal(40), {}))
    for deg, off in [(3, 10.0), (4, 100.0), (4, 30.0), (2, 1000.0)]:
        t = off + np.linspace(0, 1, 40)
        x = np.column_stack([t ** j for j in range(1, deg + 1)])
        w = np.exp(rng.uniform(-3, 3, 40))
        out.append((f"wls-poly{deg}-offset{off:g}", x, np.sin(t) + 1e-2 * rng.standard_normal(40),
                    {"weights": w}))
    for d in [1e-3, 1e-6, 1e-9]:
        x1 = rng.standard_normal(40)
        x = np.column_stack([x1, x1 + d * rng.standard_normal(40), rng.standard_normal(40)])
        out.append((f"ols-nearduplicate-{d:g}", x, x1 + 0.5 * x[:, 2] + 0.01 * rng.standard_normal(40), {}))
    x1 = rng.standard_normal(40)
    x = np.column_stack([x1, x1 + 1e-6 * rng.standard_normal(40)])
    out.append(("wls-nearduplicate-1e-6", x, x1 + 0.01 * rng.standard_normal(40),
                {"weights": rng.uniform(0.1, 10, 40)}))
    for rho in [0.5, 0.9, 0.99, 0.999, 0.9999, 0.999999]:
        t = np.linspace(0, 1, 40)
        x = np.column_stack([t, t ** 2])
        out.append((f"gls-ar1-{rho:g}", x, 1 + t + 0.1 * rng.standard_normal(40), {"error_cov": _ar1(40, rho)}))
    for lc in [2, 5, 8, 10]:
        u, _ = np.linalg.qr(rng.standard_normal((30, 30)))
        cov = (u * np.logspace(0, -lc, 30)) @ u.T
        cov = (cov + cov.T) / 2
        x = rng.standard_normal((30, 3))
        out.append((f"gls-random-cond1e{lc}", x, x @ [1, 1, 1] + rng.standard_normal(30) * 0.1,
                    {"error_cov": cov}))
    for k in range(3):  # many-row (blocked) path on small data
        x = rng.standard_normal((60, 4)) + [0, 5, 0, 0]
        out.append((f"ols-blocked-{k}", x, x @ [1, 2, 3, 4] + 0.1 * rng.standard_normal(60),
                    {"method": "blocked"}))
    for k in range(2):
        x = rng.standard_normal((60, 3))
        out.append((f"wls-blocked-{k}", x, x @ [1, 2, 3] + 0.1 * rng.standard_normal(60),
                    {"method": "blocked", "weights": rng.uniform(0.5, 2, 60)}))
    for k in range(2):  # exact fits on integers
        x = rng.integers(-9, 10, (25, 3)).astype(float)
        out.append((f"ols-integer-exact-{k}", x, x @ [1.0, -2.0, 5.0] + 7.0, {}))
    for k in range(3):  # large residuals
        x = rng.standard_normal((50, 5))
        out.append((f"ols-noisy-{k}", x, x @ np.ones(5) * 1e-3 + 10 * rng.standard_normal(50), {}))
    for k, off in enumerate([3.0, 20.0]):
        t = off + np.linspace(0, 1, 50)
        x = np.column_stack([t, t ** 2, t ** 3])
        out.append((f"wls-poly3-wide-weights-{k}", x, t + 1e-4 * rng.standard_normal(50),
                    {"weights": np.exp(rng.uniform(-8, 8, 50))}))
    for k in range(2):
        t = np.linspace(0, 1, 40)
        x = np.column_stack([t, np.sin(3 * t)])
        cov = 0.5 * _ar1(40, 0.95) + 0.5 * np.diag(rng.uniform(0.1, 1.0, 40))
        out.append((f"gls-structured-{k}", x, t + 0.01 * rng.standard_normal(40), {"error_cov": cov}))
    t = 30.0 + np.linspace(0, 1, 40)
    xp = np.column_stack([t ** j for j in range(1, 5)])
    out.append(("wls-poly4-unrefined", xp, np.sin(t), {"weights": np.exp(rng.uniform(-3, 3, 40)), "refine": False}))
    tt = np.linspace(0, 1, 40)
    out.append(("gls-ar1-0.9999-unrefined", np.column_stack([tt, tt ** 2]), 1 + tt + 0.1 * rng.standard_normal(40),
                {"error_cov": _ar1(40, 0.9999), "refine": False}))
    x1 = rng.standard_normal(40)
    xd = np.column_stack([x1, x1 + 1e-6 * rng.standard_normal(40)])
    out.append(("ols-nearduplicate-unrefined", xd, x1 + 0.01 * rng.standard_normal(40), {"refine": False}))
    # ridge at a fixed penalty on the predictors (issue 13 item 4): same sums with G = A^T S^-1 A + lambda P
    rr = np.random.default_rng(7391)
    for lam in [1e-6, 1e-2, 1.0, 100.0]:
        t = 10.0 + np.linspace(0, 1, 40)
        x = np.column_stack([t ** j for j in range(1, 4)])
        out.append((f"ridge-poly3-offset10-lam{lam:g}", x, np.cos(t) + 1e-3 * rr.standard_normal(40), {"ridge": lam}))
    for lam in [1e-8, 1e-3]:
        x1 = rr.standard_normal(40)
        x = np.column_stack([x1, x1 + 1e-6 * rr.standard_normal(40), rr.standard_normal(40)])
        out.append((f"ridge-nearduplicate-lam{lam:g}", x, x1 + 0.01 * rr.standard_normal(40), {"ridge": lam}))
    x = rr.standard_normal((40, 3))
    out.append(("ridge-wls-lam0.5", x, x @ [1, 2, 3] + 0.1 * rr.standard_normal(40),
                {"ridge": 0.5, "weights": np.exp(rr.uniform(-3, 3, 40))}))
    tt = np.linspace(0, 1, 40)
    out.append(("ridge-gls-ar1-0.99-lam0.1", np.column_stack([tt, tt ** 2]), 1 + tt + 0.1 * rr.standard_normal(40),
                {"ridge": 0.1, "error_cov": _ar1(40, 0.99)}))
    return out


def _mpm(a):
    return mp.matrix([[mp.mpf(float(v)) for v in row] for row in np.atleast_2d(a)])


def _reference(x, y, opts):
    """(scaled exact coefficients z, actual worst first-order change per eps of z (max-norm), scale)."""
    n = x.shape[0]
    a = np.column_stack([np.ones(n), x])
    p = a.shape[1]
    A, b = _mpm(a), _mpm(y[:, None])
    if "error_cov" in opts:
        S = _mpm(opts["error_cov"])
    elif "weights" in opts:
        S = mp.diag([1 / mp.mpf(float(w)) for w in opts["weights"]])
    else:
        S = mp.eye(n)
    Si = S ** -1 if "error_cov" in opts else mp.diag([1 / S[i, i] for i in range(n)])
    SiA = Si * A
    G = A.T * SiA
    if "ridge" in opts:  # the penalty on the predictors (never the intercept), in the units given
        G = G + mp.mpf(float(opts["ridge"])) * mp.diag([0] + [1] * (p - 1))
    Gi = G ** -1
    M = Gi * SiA.T                      # p x n map from b to x
    xx = M * b
    r = b - A * xx
    v = Si * r
    # scale: power-of-two norms of the whitened columns (as the library's equilibration)
    if "error_cov" in opts:
        aw = np.linalg.solve(np.linalg.cholesky(opts["error_cov"]), a)
    elif "weights" in opts:
        aw = a * np.sqrt(opts["weights"])[:, None]
    else:
        aw = a
    s = np.exp2(np.round(np.log2(np.linalg.norm(aw, axis=0))))  # z = beta * s
    sens = []
    for k in range(p):
        tot = mp.mpf(0)
        for i in range(n):
            tot += abs(M[k, i] * b[i])
            for j in range(1, p):
                tot += abs((-M[k, i] * xx[j] + Gi[k, j] * v[i]) * A[i, j])
        if "weights" in opts:
            for i in range(n):
                tot += abs(M[k, i] * v[i] * S[i, i])
        elif "error_cov" in opts:
            for i in range(n):
                for j in range(i, n):
                    d = M[k, i] * v[j] + (M[k, j] * v[i] if j != i else 0)
                    tot += abs(d * S[i, j])
        sens.append(tot * s[k])
    z = [xx[k] * s[k] for k in range(p)]
    zn = max(abs(t) for t in z)
    return z, float(max(sens) / zn), s


def _digits(rel):
    return CAP if rel <= 0 else min(CAP, max(0.0, -math.log10(rel)))


def _rows():
    rows = []
    for name, x, y, opts in _problems():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            with whiten.settings(block_rows=16):
                fit = whiten.fit_linear(x, y, **opts)
        z, sens, s = _reference(x, y, {k: v for k, v in opts.items() if k not in ("method", "refine")})
        zn = max(abs(t) for t in z)
        err = max(abs(mp.mpf(float(c)) * s[k] - z[k]) for k, c in enumerate(fit.coef)) / zn
        rows.append((name, fit.health.digits_solved, _digits(float(err)), fit.health.digits_trusted,
                     _digits(EPS * sens)))
    return rows


@pytest.mark.slow
def test_calibration_of_both_statements():
    rows = _rows()
    print("\n{:<32} {:>8} {:>8} {:>9} {:>9}".format("problem", "solved", "actual", "trusted", "actual"))
    for r in rows:
        print("{:<32} {:>8.1f} {:>8.1f} {:>9.1f} {:>9.1f}".format(*r))
    assert len(rows) >= 40
    for kind, (ci, ai) in {"computed": (1, 2), "data": (3, 4)}.items():
        over = [(r[0], r[ci], r[ai]) for r in rows if r[ci] > r[ai] + 0.5]
        assert not over, f"{kind}: claims above the actual digits by more than 0.5: {over}"
        close = sum(abs(r[ci] - r[ai]) <= 1.5 for r in rows)
        assert close >= 0.9 * len(rows), f"{kind}: only {close} of {len(rows)} claims within 1.5 digits"
