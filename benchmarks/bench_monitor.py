"""Monitoring: scoring many rows with contributions, against inverse-based numpy/scipy peers.

whiten's score computes d2, exact p-values, drop/chain contributions and plain
deviations with two BLAS-3 triangular solves per row block. The peers form
the precision matrix explicitly (what whiten never does) and compute
  - "scipy cdist": only the Mahalanobis distances (scipy.spatial.distance.cdist);
  - "numpy precision": d2 and the drop contributions (P d)_j^2 / P_jj with P = inv(S).
"""

from __future__ import annotations

import numpy as np
from scipy.spatial.distance import cdist

import whiten

try:
    from ._timing import best_of
except ImportError:  # run as a script
    from _timing import best_of


def _problem(n: int, p: int, seed: int = 3):
    rng = np.random.default_rng(seed)
    a = rng.standard_normal((p, p))
    ref = rng.standard_normal((max(20 * p, 2000), p)) @ a.T
    b = whiten.fit_baseline(ref, columns=[f"s{j}" for j in range(p)])
    x = rng.standard_normal((n, p)) @ a.T
    return b, x


def _numpy_precision(mean, cov, x):
    prec = np.linalg.inv(cov)  # peer only: explicit inverse
    d = x - mean
    w = d @ prec
    d2 = np.einsum("ij,ij->i", w, d)
    return d2, w * w / np.diag(prec)


def run(quick: bool = False) -> list[dict]:
    sizes = [(50_000, 20)] if quick else [(200_000, 20), (200_000, 100)]
    out = []
    for n, p in sizes:
        b, x = _problem(n, p)
        sc = whiten.monitor.Scorer(b)
        cov = b.cov
        ours = best_of(lambda: sc.score_array(x), 3)
        frame = best_of(lambda: whiten.monitor.score(b, x), 3)
        peer1 = best_of(lambda: cdist(x, b.mean[None, :], "mahalanobis", VI=np.linalg.inv(cov)), 3)
        peer2 = best_of(lambda: _numpy_precision(b.mean, cov, x), 3)
        note = f"N={n}, p={p}; ours = d2+p-value+drop+chain+dev"
        out.append({"case": f"score arrays N={n} p={p}", "ours_s": ours, "peer": "scipy cdist (d only, inverse)",
                    "peer_s": peer1, "note": note})
        out.append({"case": f"score arrays N={n} p={p}", "ours_s": ours, "peer": "numpy precision (d2 + drop)",
                    "peer_s": peer2, "note": note})
        out.append({"case": f"score DataFrame N={n} p={p}", "ours_s": frame, "peer": "numpy precision (d2 + drop)",
                    "peer_s": peer2, "note": note + ", as a DataFrame"})
    return out


if __name__ == "__main__":
    for r in run(quick=True):
        print(f"{r['case']:<32} ours {r['ours_s']:.3f}s  {r['peer']:<32} {r['peer_s']:.3f}s  {r['note']}")
