"""Least squares with standard errors: whiten.fit_linear vs statsmodels OLS and numpy.linalg.lstsq.

Invented problem: n rows of 50 process signals, two of them nearly redundant
(a pressure and its transmitter's second reading), response linear plus noise.
"""

from __future__ import annotations

import numpy as np

import whiten

try:
    from ._timing import best_of, paired
except ImportError:  # run as a script
    from _timing import best_of, paired


def _problem(n: int, p: int, seed: int = 0):
    rng = np.random.default_rng(seed)
    x = rng.standard_normal((n, p))
    x[:, 1] = x[:, 0] + 1e-3 * rng.standard_normal(n)
    beta = rng.standard_normal(p)
    y = 3.0 + x @ beta + rng.standard_normal(n)
    return x, y


def run(quick: bool = False) -> list[dict]:
    import statsmodels.api as sm

    n = 100_000 if quick else 1_000_000
    p = 50
    x, y = _problem(n, p)
    a = sm.add_constant(x)  # statsmodels and numpy get the constant column ready-made (not timed)

    def ours():
        f = whiten.fit_linear(x, y)
        return f.coef, f.std_error

    def peer_sm():
        r = sm.OLS(y, a).fit()
        return r.params, r.bse

    def peer_np():
        return np.linalg.lstsq(a, y, rcond=None)[0]

    coef, se = ours()
    ref_c, ref_se = peer_sm()
    path = whiten.fit_linear(x, y).health.method
    dc = float(np.max(np.abs(coef - ref_c) / np.abs(ref_c)))
    ds = float(np.max(np.abs(se - ref_se) / ref_se))
    k = 3 if quick else 2
    t_ours, t_sm = paired(ours, peer_sm, k)
    return [
        {"case": f"linear fit + std errors n={n:.0e} p={p}", "ours_s": t_ours,
         "peer": "statsmodels OLS(...).fit().bse", "peer_s": t_sm,
         "note": f"path {path}; max rel. diff coef {dc:.1e}, stderr {ds:.1e}"},
        {"case": f"linear fit + std errors n={n:.0e} p={p}", "ours_s": t_ours,
         "peer": "numpy.linalg.lstsq (coefficients only)", "peer_s": best_of(peer_np, k),
         "note": "lstsq gives no standard errors"},
    ]


if __name__ == "__main__":  # pragma: no cover
    import sys

    for row in run(quick="--quick" in sys.argv):
        print(f"{row['case']:<40} ours {row['ours_s']:.3f} s  {row['peer']:<40} {row['peer_s']:.3f} s  "
              f"x{row['peer_s'] / row['ours_s']:.1f}  {row['note']}")
