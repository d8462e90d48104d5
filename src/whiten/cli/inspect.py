"""``whiten inspect``: describe a saved baseline: size, sensors, health, redundancy, correlations."""

from __future__ import annotations

import argparse
import dataclasses
import math
import warnings

import numpy as np

from .._numerics import column_norms
from ..errors import NumericalWarning

EPILOG = """\
examples:
  whiten inspect pump_baseline.json
  whiten inspect pump_baseline.json --tol 1e-4 --top 10

Near-redundant sensors are found by a pivoted Cholesky factorization of the
correlation matrix: a sensor is listed when less than TOL of its variance is
left unexplained by the sensors chosen before it. The model file is verified
(format, version, SHA-256) before anything is printed.
"""


def add_parser(sub) -> None:
    p = sub.add_parser(
        "inspect", help="describe a baseline model file",
        description="Describe a baseline written by `whiten baseline`: rows, sensors, estimator, condition, "
                    "jitter, near-redundant sensors and the strongest correlations.",
        epilog=EPILOG, formatter_class=argparse.RawDescriptionHelpFormatter)
    p.add_argument("model", metavar="MODEL.json", help="model file from `whiten baseline`")
    p.add_argument("--tol", type=float, default=1e-6,
                   help="unexplained-variance fraction below which a sensor counts as redundant (default 1e-6)")
    p.add_argument("--top", type=int, default=5, help="how many correlations to list (default 5)")
    p.set_defaults(func=run)


def correlation(b) -> np.ndarray:
    low = b.factor.lower
    sd = column_norms(low.T)
    # rows of L scaled to unit length give the correlation as their Gram matrix
    u = low / sd[:, None]
    return u @ u.T


class _WithHealth:
    """The baseline seen with another health record (everything else passed through)."""

    def __init__(self, b, health):
        self._b = b
        self.health = health

    def __getattr__(self, name):
        return getattr(self._b, name)


def recomputed_health(b):
    """The baseline's health with the condition recomputed from the stored factor, and a note if they disagree.

    The condition fields of a model file's health block are only a record; what a
    distance loses is decided by the factor itself, so that is what is shown.
    """
    fh = b.factor.health
    h = b.health
    new = dataclasses.replace(h, rcond=float(fh.rcond), rcond_scaled=float(fh.rcond_scaled),
                              digits_lost=float(fh.digits_lost))

    def differs(a: float, c: float) -> bool:
        if not (math.isfinite(a) and math.isfinite(c)):
            return not (math.isnan(a) and math.isnan(c)) and a != c
        return abs(a - c) > 0.05 + 1e-6 * abs(c)

    if differs(h.digits_lost, new.digits_lost) or differs(
            math.log10(max(h.rcond_scaled, 1e-320)) if h.rcond_scaled > 0 else -math.inf,
            math.log10(max(new.rcond_scaled, 1e-320)) if new.rcond_scaled > 0 else -math.inf):
        note = (f"note: the file's stored health block disagrees: it says about {h.digits_lost:.1f} digits lost "
                f"(rcond {h.rcond_scaled:.3g}), the stored factor gives {new.digits_lost:.1f} "
                f"(rcond {new.rcond_scaled:.3g}); shown above is the factor's. Fit the baseline again to "
                "refresh the file")
        return new, note
    return new, None


def provenance_lines(b) -> list[str]:
    """Where the model came from and how it reads rows (format 4 model files), in plain words."""
    prov, st = getattr(b, "provenance", {}) or {}, getattr(b, "settings", {}) or {}
    if not prov and not st:
        fmt = getattr(b, "model_format", None)
        return [f"provenance: none recorded (format {fmt}); fit the baseline again to record it"] if fmt else []
    out = []
    if getattr(b, "checksum", None):
        out.append(f"model checksum (SHA-256): {b.checksum}")
    if prov:
        src = prov.get("source")
        if prov.get("source_sha256"):
            src = f"{src} ({prov.get('source_bytes')} bytes, SHA-256 {prov['source_sha256']})"
        out.append(f"source: {src}")
        out.append(f"rows: {prov.get('rows_read')} read, {prov.get('rows_used')} used")
        if prov.get("first_index") is not None:
            out.append(f"training period: {prov['first_index']} .. {prov['last_index']}")
        out.append(f"made by: whiten {prov.get('whiten_version')} at {prov.get('created_utc')}")
        out.append(f"call: {prov.get('call')}")
        if prov.get("windowed"):
            out.append("note: updated or downdated by a sliding window after the fit; the source is the first fit's")
    if st:
        opts = ", ".join(f"{k}={v}" for k, v in (st.get("options") or {}).items())
        out.append(f"settings: estimator {st.get('estimator')}" + (f" ({opts})" if opts else "")
                   + f"; missing rows: {st.get('missing')}")
        idx = st.get("index_column")
        out.append(f"index column: {idx!r} ({st.get('index_kind')}); `whiten score` uses it by default" if idx
                   else "index column: none (rows labelled by number)")
        if st.get("na_values"):
            out.append(f"missing-value codes: {', '.join(st['na_values'])}")
    return out


def inspect_lines(b, *, tol: float = 1e-6, top: int = 5) -> list[str]:
    from .. import pivoted_cholesky
    from ..errors import InputError
    from .baseline import health_lines

    if not tol > 0:
        raise InputError(f"--tol: expected a positive number, got {tol}")
    out = []
    if b.created_utc:
        out.append(f"written: {b.created_utc}")
    out.extend(provenance_lines(b))
    recomputed, note = recomputed_health(b)
    out += health_lines(_WithHealth(b, recomputed))
    if note:
        out.append(note)
    corr = correlation(b)
    rep = pivoted_cholesky(corr, tol=tol, columns=b.columns)
    if rep.full_rank:
        out.append(f"near-redundant sensors: none (each keeps more than {tol:g} of its variance unexplained "
                   "by the others)")
    else:
        out.append(f"near-redundant sensors (tolerance {tol:g}):")
        for d, sentence in zip(rep.dependent, rep.describe()):
            out.append(f"  {sentence} (unexplained variance {rep.residual_variance[d]:.2g})")
    # 1 / VIF_j = share of sensor j's variance not explained by all the others; the precision
    # diagonal comes from triangular solves with the factor and is only reported
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", NumericalWarning)
        sd_prec = column_norms(b.factor.lower.T) * b.factor.inv_sd()
        own = 1.0 / sd_prec ** 2  # inverse-ok: reported share of variance, not an operator
    order = np.argsort(own)[: min(3, b.dim)]
    out.append("least independent sensors: " + ", ".join(
        f"{b.columns[k]} ({100 * own[k]:.3g}% of its variance its own)" for k in order))
    if b.dim > 1:
        iu = np.triu_indices(b.dim, 1)
        r = corr[iu]
        idx = np.argsort(-np.abs(r))[: max(0, top)]
        out.append("strongest correlations:")
        for k in idx:
            i, j = iu[0][k], iu[1][k]
            out.append(f"  {b.columns[i]} ~ {b.columns[j]}: r = {r[k]:+.3f}")
    return out


def run(args) -> int:
    from .. import load_baseline

    b = load_baseline(args.model)
    print(f"model {args.model}")
    for line in inspect_lines(b, tol=args.tol, top=args.top):
        print(f"  {line}")
    return 0
