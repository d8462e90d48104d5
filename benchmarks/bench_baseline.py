"""Fitting a baseline: whiten.fit_baseline against numpy.cov, for speed and for accuracy.

Cases
-----
* well-conditioned N x 50 rows: the automatic path stays on the blocked,
  shifted Gram route (one pass, dsyrk per cache-sized block);
* ill-conditioned N x 50 rows (pairs of nearly collinear gauges near 1e8):
  the automatic path notices the digits the Gram route would lose and redoes
  the factor by TSQR (two passes);
* accuracy on an ill-conditioned case small enough for a 40-digit mpmath
  reference: relative error of the Mahalanobis metric,
  ``||L_ref^-1 Sigma L_ref^-T - I||_F``, for whiten (TSQR route), whiten
  forced onto the Gram route, and numpy.cov.
"""

from __future__ import annotations

import warnings

import numpy as np

import whiten

try:
    from ._timing import best_of, paired
except ImportError:  # run as a script
    from _timing import best_of, paired


def _well(n: int, p: int, seed: int = 0) -> np.ndarray:
    rng = np.random.default_rng(seed)
    a = 0.3 * rng.standard_normal((p, p)) / np.sqrt(p) + np.eye(p)  # singular values ~0.7..1.3
    return rng.standard_normal((n, p)) @ a.T + rng.standard_normal(p) * 5


def _ill(n: int, p: int, seed: int = 1) -> np.ndarray:
    """p/2 independent gauges and, for each, a twin reading the same quantity to 1e-4, all near 1e8."""
    rng = np.random.default_rng(seed)
    h = p // 2
    base = rng.standard_normal((n, h)) * 3
    twin = base + 1e-4 * rng.standard_normal((n, h))
    x = np.empty((n, 2 * h))
    x[:, 0::2] = base
    x[:, 1::2] = twin
    return 1e8 + x


def _metric_error(l_ref, lower=None, sigma=None) -> float:
    import mpmath

    if lower is not None:
        low = mpmath.matrix(lower.tolist())
        sig = low * low.T
    else:
        sig = mpmath.matrix(sigma.tolist())
    p = sig.rows

    def fwd(b):
        out = mpmath.matrix(p, p)
        for c in range(p):
            for i in range(p):
                out[i, c] = (b[i, c] - mpmath.fsum(l_ref[i, k] * out[k, c] for k in range(i))) / l_ref[i, i]
        return out

    e = fwd(fwd(sig).T) - mpmath.eye(p)
    return float(mpmath.sqrt(mpmath.fsum(e[i, j] ** 2 for i in range(p) for j in range(p))))


def _accuracy(n: int = 2000, p: int = 4) -> str:
    import mpmath

    mpmath.mp.dps = 40
    x = _ill(n, p, seed=5)
    cols = [[mpmath.mpf(float(v)) for v in x[:, j]] for j in range(p)]
    mu = [mpmath.fsum(c) / n for c in cols]
    cen = [[v - mu[j] for v in cols[j]] for j in range(p)]
    s = mpmath.matrix(p, p)
    for a in range(p):
        for b in range(a, p):
            s[a, b] = s[b, a] = mpmath.fsum(u * v for u, v in zip(cen[a], cen[b])) / (n - 1)
    l_ref = mpmath.cholesky(s)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", whiten.NumericalWarning)
        auto = whiten.fit_baseline(x)
        gram = whiten.fit_baseline(x, method="gram")
    e_auto = _metric_error(l_ref, lower=auto.factor.lower)
    e_gram = _metric_error(l_ref, lower=gram.factor.lower)
    e_np = _metric_error(l_ref, sigma=np.cov(x, rowvar=False))
    return (f"metric error vs 40-digit mpmath (N={n}, p={p}, offset 1e8): whiten {auto.health.method} "
            f"{e_auto:.1e}, whiten gram {e_gram:.1e}, numpy.cov {e_np:.1e}")


def run(quick: bool = False) -> list[dict]:
    n = 100_000 if quick else 1_000_000
    p = 50
    rows = []

    x = _well(n, p)
    b = whiten.fit_baseline(x)
    ref = np.cov(x, rowvar=False)
    diff = float(np.max(np.abs(b.cov - ref)) / np.max(np.abs(ref)))
    t_ours, t_peer = paired(lambda: whiten.fit_baseline(x), lambda: np.cov(x, rowvar=False), 5)
    rows.append({"case": f"fit N={n:.0e} p={p} well-conditioned", "ours_s": t_ours, "peer": "numpy.cov",
                 "peer_s": t_peer, "note": f"route {b.health.method}; max rel diff vs numpy.cov {diff:.1e}"})
    del x

    x = _ill(n, p)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", whiten.NumericalWarning)
        b = whiten.fit_baseline(x)
        t_ours = best_of(lambda: whiten.fit_baseline(x), 2)
    t_peer = best_of(lambda: np.cov(x, rowvar=False), 2)
    rows.append({"case": f"fit N={n:.0e} p={p} ill-conditioned (offset 1e8)", "ours_s": t_ours,
                 "peer": "numpy.cov", "peer_s": t_peer,
                 "note": f"route {b.health.method} (Gram would lose {b.health.gram_digits_lost:.1f} digits); "
                         + _accuracy()})
    return rows


if __name__ == "__main__":  # pragma: no cover
    import sys

    for r in run(quick="--quick" in sys.argv):
        print(r)
