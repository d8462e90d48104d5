"""The baseline model file: format ``whiten.baseline/4`` (JSON payload + SHA-256, :mod:`whiten.io.modelfile`).

Payload fields: ``columns``, ``n``, ``weight_sum``, ``mean``, ``factor_lower``
(row ``i`` holds the ``i + 1`` entries of the lower factor's row), ``estimator``,
``params``, ``health`` (the :class:`BaselineHealth` fields), ``created_utc``,
``library_version``. Numbers follow the project's JSON rule (NaN as null,
infinities as ``"inf"``/``"-inf"``). Version 1 files (whose health record
named the numerical route ``path``) and version 2 files (no ``limit_law``)
are still read. Version 3 adds ``limit_law``: the simulated law of a new
row's d2 (:class:`whiten.monitor.calibrated.SimulatedLaw` as a dict) or null;
a version-2 reader would ignore it and use the wrong limit, hence the bump.
Version 4 adds ``settings`` (how the rows were read and fitted: index column
and its kind, sensors in order, missing-value codes, estimator and options;
``whiten score`` reads new rows the same way) and ``provenance`` (source file,
its size and SHA-256, rows read and used, first and last index label, whiten
version, creation time, the command or call); see :mod:`whiten.baseline.record`.
Files of versions 1-3 read with both empty.
"""

from __future__ import annotations

import dataclasses
import os
from typing import Any

import numpy as np

from .._numerics import from_json_number
from .._version import __version__
from ..errors import InputError, ModelFileError, NotPositiveDefiniteError
from ..io.modelfile import jsonable, read_model, utc_now, write_model
from ..linalg.factor import Factor
from ..linalg.health import health_of
from ..monitor.calibrated import SimulatedLaw
from .health import BaselineHealth

__all__ = ["MODEL_FORMAT", "ESTIMATORS", "payload_of", "save_payload", "read_payload"]

MODEL_FORMAT = "whiten.baseline/4"
_OLDER = ("whiten.baseline/1", "whiten.baseline/2", "whiten.baseline/3")
#: the estimators a model file may name
ESTIMATORS = ("sample", "shrinkage", "robust")
_FLOAT_FIELDS = ("rcond", "rcond_scaled", "digits_lost", "jitter", "jitter_relative")


def payload_of(baseline: Any) -> dict:
    """The model-file payload of a baseline (plain JSON values, without the checksum)."""
    low = baseline.factor.lower
    return jsonable({
        "columns": baseline.columns,
        "n": baseline.n,
        "weight_sum": baseline.weight_sum,
        "mean": baseline.mean.tolist(),
        "factor_lower": [low[i, : i + 1].tolist() for i in range(low.shape[0])],
        "estimator": baseline.estimator,
        "params": baseline.params,
        "health": dataclasses.asdict(baseline.health),
        "created_utc": baseline.created_utc,
        "library_version": __version__,
        "limit_law": None if getattr(baseline, "limit_law", None) is None else baseline.limit_law.to_dict(),
        "settings": dict(getattr(baseline, "settings", None) or {}),
        "provenance": dict(getattr(baseline, "provenance", None) or {}),
    })


def save_payload(payload: dict, path: str | os.PathLike, *, force: bool = False):
    """Write a payload atomically (stamping ``created_utc`` if unset); returns the path."""
    if payload["created_utc"] is None:
        payload = dict(payload, created_utc=utc_now())
    return write_model(path, MODEL_FORMAT, payload, force=force)


#: the largest row count a model file may state: every count up to it is exact in float64
MAX_ROWS = 2**53


def _row_count(value: Any, bad) -> int:
    """The ``n`` of a payload: a whole number of rows from 1 to :data:`MAX_ROWS`."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise bad(f"n (the number of reference rows) must be a whole number, got {value!r:.40}")
    if isinstance(value, float) and not (np.isfinite(value) and value == int(value)):
        raise bad(f"n (the number of reference rows) must be a whole number, got {value!r:.40}")
    n = int(value)
    if not 1 <= n <= MAX_ROWS:
        shown = str(n) if len(str(n)) <= 20 else f"a {len(str(n))}-digit number"
        raise bad(f"n (the number of reference rows) is {shown}, outside 1 to 2**53; the file was edited or "
                  "damaged: fit the baseline again")
    return n


def _weight_sum(value: Any, n: int, bad) -> float:
    """The ``weight_sum`` of a payload: a finite positive number."""
    try:
        w = float(value)
    except (TypeError, ValueError, OverflowError):
        raise bad(f"weight_sum must be a number, got {value!r:.40}") from None
    if not (np.isfinite(w) and 0 < w <= 1e300):
        raise bad(f"weight_sum is {w:g}, not a finite positive number; the file was edited or damaged: fit the "
                  "baseline again")
    return w


def read_payload(path: str | os.PathLike) -> dict:
    """The keyword arguments of ``Baseline(...)`` read back from a model file, checked.

    Raises
    ------
    ModelFileError
        Missing, damaged, edited, another format, or an inconsistent payload.
    """
    source = os.fspath(path)
    digest: dict = {}
    payload, fmt = read_model(path, MODEL_FORMAT, older=_OLDER, digest_to=digest)

    def bad(msg: str) -> ModelFileError:
        return ModelFileError(f"model file {source!r}: {msg}")

    try:
        cols = [str(c) for c in payload["columns"]]
        p = len(cols)
        mean = np.asarray(payload["mean"], dtype=np.float64)
        rows = payload["factor_lower"]
        low = np.zeros((p, p))
        if len(rows) != p or mean.shape != (p,):
            raise bad(f"mean/factor sizes do not match the {p} columns")
        for i, r in enumerate(rows):
            if len(r) != i + 1:
                raise bad(f"factor row {i} has {len(r)} entries, expected {i + 1}")
            low[i, : i + 1] = np.asarray(r, dtype=np.float64)
        hd = dict(payload["health"])
        if fmt == "whiten.baseline/1" and "path" in hd:
            hd["method"] = hd.pop("path")
        known = {f.name for f in dataclasses.fields(BaselineHealth)}
        if set(hd) != known:
            raise bad(f"health fields {sorted(set(hd) ^ known)} missing or unknown")
        for k in _FLOAT_FIELDS:
            hd[k] = from_json_number(hd[k])
        if hd["gram_digits_lost"] is not None:
            hd["gram_digits_lost"] = from_json_number(hd["gram_digits_lost"])
        health = BaselineHealth(**hd)
        n = _row_count(payload["n"], bad)
        est = str(payload["estimator"])
        law = payload.get("limit_law")
        law = None if law is None else SimulatedLaw.from_dict(law)
        settings = payload.get("settings") or {}
        provenance = payload.get("provenance") or {}
        if not isinstance(settings, dict) or not isinstance(provenance, dict):
            raise bad("settings and provenance must be JSON objects")
    except ModelFileError:
        raise
    except InputError as exc:
        raise bad(str(exc)) from None
    except (KeyError, TypeError, ValueError) as exc:
        raise bad(f"payload is incomplete or malformed ({type(exc).__name__}: {exc})") from None
    if est not in ESTIMATORS:
        raise bad(f"unknown estimator {est!r}")
    if not np.isfinite(mean).all() or not np.isfinite(low).all():
        raise bad("mean or factor holds non-finite values")
    try:
        f0 = Factor.from_lower(low, columns=cols, jitter=health.jitter)
    except (InputError, NotPositiveDefiniteError) as exc:
        raise bad(f"the factor is not a valid Cholesky factor ({exc})") from None
    f = Factor(low, health_of(low, health.jitter, health.jitter_relative, f0.health.method), cols)
    return dict(mean=mean, factor=f, n=n, columns=cols, estimator=est, params=dict(payload.get("params") or {}),
                health=health, weight_sum=_weight_sum(payload.get("weight_sum", n), n, bad),
                created_utc=payload.get("created_utc"),
                limit_law=law, settings=settings, provenance=provenance, checksum=digest.get("sha256"),
                model_format=fmt)
