"""Gaussian log-density of many rows: whiten vs scipy.stats and an inverse-based matmul."""

from __future__ import annotations

import numpy as np
from scipy import stats

import whiten

try:
    from ._timing import best_of, paired
except ImportError:  # run as a script
    from _timing import best_of, paired


def _problem(n: int, p: int, seed: int = 0):
    rng = np.random.default_rng(seed)
    a = rng.standard_normal((p, p))
    cov = a @ a.T / p + np.eye(p)
    mean = rng.standard_normal(p)
    x = rng.standard_normal((n, p)) @ np.linalg.cholesky(cov).T + mean
    return mean, cov, x


def _inverse_logpdf(mean, cov, x):
    # the textbook way, for comparison only: forms the precision matrix explicitly
    prec = np.linalg.inv(cov)
    d = x - mean
    q = np.einsum("ij,jk,ik->i", d, prec, d, optimize=True)
    return -0.5 * (x.shape[1] * np.log(2 * np.pi) + np.linalg.slogdet(cov)[1] + q)


def run(quick: bool = False) -> list[dict]:
    n = 100_000 if quick else 1_000_000
    p = 50
    mean, cov, x = _problem(n, p)

    def ours():
        return whiten.Gaussian(mean, cov).logpdf(x)

    def peer():
        return stats.multivariate_normal(mean, cov).logpdf(x)

    def inv():
        return _inverse_logpdf(mean, cov, x)

    err = float(np.max(np.abs(ours() - peer())))
    t_ours, t_peer = paired(ours, peer, 5)  # alternated: both under the same machine conditions
    rows = [
        {"case": f"logpdf N={n:.0e} p={p} (factor + evaluate)", "ours_s": t_ours,
         "peer": "scipy.stats.multivariate_normal(...).logpdf", "peer_s": t_peer,
         "note": f"max |difference| {err:.1e}"},
        {"case": f"logpdf N={n:.0e} p={p} (factor + evaluate)", "ours_s": t_ours,
         "peer": "inverse + einsum (textbook)", "peer_s": best_of(inv, 3), "note": ""},
    ]
    return rows
