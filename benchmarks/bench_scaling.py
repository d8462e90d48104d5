"""How the cost of scoring grows: time against N and against p, next to the N p^2 flop model.

Scoring one row is a triangular solve with the p x p factor (p^2 flops) plus
a sum of squares (2p), so N rows cost about N p^2 flops once the factor
(p^3 / 3 flops, done once) is amortized.
"""

from __future__ import annotations

import numpy as np

import whiten

try:
    from ._timing import best_of
except ImportError:  # run as a script
    from _timing import best_of


def _gaussian(p: int, seed: int = 1):
    rng = np.random.default_rng(seed)
    a = rng.standard_normal((p, p))
    return whiten.Gaussian(np.zeros(p), a @ a.T / p + np.eye(p)), rng


def scaling(quick: bool = False) -> list[dict]:
    rows = []
    ns = [10_000, 100_000] if quick else [10_000, 100_000, 1_000_000]
    for n in ns:
        g, rng = _gaussian(50)
        x = rng.standard_normal((n, 50))
        rows.append({"sweep": "N (p=50)", "n": n, "p": 50, "seconds": best_of(lambda: g.logpdf(x), 3)})
    ps = [10, 50, 200] if quick else [10, 50, 200, 800]
    n = 20_000 if quick else 100_000
    for p in ps:
        g, rng = _gaussian(p)
        x = rng.standard_normal((n, p))
        rows.append({"sweep": f"p (N={n:.0e})", "n": n, "p": p, "seconds": best_of(lambda: g.logpdf(x), 3)})
    for r in rows:
        r["model_flops"] = float(r["n"]) * r["p"] ** 2
        r["ns_per_model_flop"] = 1e9 * r["seconds"] / r["model_flops"]
    return rows


def run(quick: bool = False) -> list[dict]:
    return []  # this module only contributes the scaling table
