"""Fitting a baseline: :func:`fit_baseline` from any supported input, by one of three estimators.

Reading is :mod:`whiten.baseline.inputs`, cleaning :mod:`whiten.baseline.cleaning`,
the estimators live in :mod:`whiten.estimate`; dask input is handed whole to
the engine that claims it (:mod:`whiten._engines`).
"""

from __future__ import annotations

import math
from collections.abc import Callable, Iterator, Sequence
from typing import Any

import numpy as np

from .. import _validate
from .._engines import engine_for
from ..errors import InputError
from ..estimate.streaming import Block
from ..linalg.factor import Factor
from .cleaning import MISSING_POLICIES, Cleaner, Equilibrated
from .health import BaselineHealth, health_from_factor
from .inputs import Source
from .model import Baseline
from .modelfile import ESTIMATORS
from .record import call_words, provenance_of, settings_of

__all__ = ["fit_baseline"]


def _weights_array(weights: Any) -> tuple[np.ndarray | None, str | None]:
    if weights is None:
        return None, None
    if isinstance(weights, str):
        return None, weights
    w, _, _ = _validate.as_float_array(weights, name="weights", ndim=(1,), allow_nan=True)
    return w, None


def fit_baseline(data: Any, *, estimator: str = "sample", columns: Sequence[str] | None = None,
                 chunksize: int | None = None, weights: Any = None, missing: str = "drop",
                 index_column: str | None = None, method: str = "auto", shrinkage: str = "ledoit-wolf",
                 support_fraction: float | None = None, seed: int | None = None,
                 progress: bool | None = None, sep: str | None = None, decimal: str | None = None,
                 na_values: Any = None, call: str | None = None) -> Baseline:
    """Fit a Gaussian baseline (mean and covariance factor) from reference rows.

    Parameters
    ----------
    data : ndarray (N, p), DataFrame, str or PathLike, or iterable of DataFrames
        Rows of healthy operation. A path to a ``.csv``/``.tsv``/``.parquet``
        file is read in chunks of ``chunksize`` rows with bounded memory (a
        progress bar appears when stderr is a terminal). A list of chunks can
        be read twice; a one-shot iterator is read once.
    estimator : {"sample", "shrinkage", "robust"}
        ``"sample"``: unbiased sample covariance along the automatic numerical
        path (see Notes). ``"shrinkage"``: the correlation shrunk towards the
        identity (the covariance towards its own diagonal; Schafer & Strimmer
        2005), intensity by ``shrinkage`` on standardized rows, so the units
        of a column do not matter; defined for N <= p. ``"robust"``: Minimum Covariance
        Determinant (FastMCD) with consistency factor and one reweighting step;
        the reference rows it leaves out are in ``params["flagged_rows"]``.
    columns : sequence of str, optional
        Columns to use (DataFrame, file, chunks) or names for an array's
        columns (default ``x0, x1, ...``).
    chunksize : int, optional
        Rows per chunk for files (default 100000) and per block for arrays.
    weights : array_like (N,) or str, optional
        Frequency weights (a weight of 3 counts a row three times), or the
        name of a weight column. The mean is ``sum w x / sum w`` and the
        covariance divides the weighted scatter by ``sum(w) - 1``, which
        matches ``numpy.cov(..., fweights=w)``. ``"sample"`` only.
    missing : {"drop", "error"}
        ``"drop"`` leaves incomplete rows out, counts them in
        ``health.n_dropped`` and warns; ``"error"`` raises at the first,
        naming its row and column.
    index_column : str, optional
        Column holding row labels (files and DataFrames).
    method : {"auto", "gram", "tsqr"}
        Numerical route for ``"sample"`` (and the scatter of ``"shrinkage"``).
    shrinkage : {"ledoit-wolf", "oas"}
        Intensity rule for ``estimator="shrinkage"``.
    support_fraction : float, optional
        ``"robust"``: fraction h/N of rows the MCD subset covers (default
        ``(N + p + 1) / 2`` rows, the highest breakdown point).
    seed : int, optional
        ``"robust"``: seed of the random starting subsets (default a fixed
        internal seed, so fits are reproducible); for every baseline without
        an exact law (shrinkage, robust, weighted), also the seed of the
        simulated limit (:mod:`whiten.monitor.calibrated`, default
        ``LIMIT_SEED``).
    progress : bool, optional
        Force the progress bar on or off (default: when stderr is a terminal).
    sep, decimal : str, optional
        How a table file separates fields and writes decimals (see
        :func:`whiten.io.tables.open_table`), e.g. ``sep=";", decimal=","``.
    na_values : sequence of str, or str, optional
        Codes of a table file that mean "no reading" (e.g. ``"-9999,ERR,n/a"``);
        remembered in ``settings`` so scoring reads new rows the same way.
    call : str, optional
        How the fit was asked for, kept in ``provenance["call"]`` (the command
        line passes its own words; default: this call, its options spelled out).

    Returns
    -------
    Baseline

    Raises
    ------
    InputError
        Unknown option, unreadable or non-numeric data (row and column
        named), N <= p for ``"sample"`` (suggesting ``"shrinkage"``), constant
        columns, linearly dependent columns ("s4 is a linear combination of
        s1, s2"), an incomplete row with ``missing="error"``.

    Warns
    -----
    UserWarning
        Incomplete rows were left out (how many, and the first).
    ConditioningWarning
        The covariance loses more than ``digits_warn`` digits.
    WeakScreenWarning
        The new-row limit at alpha = 0.001 is more than 1.5 times the
        chi-square limit; the message gives the rows that would bring it
        within 10%.

    Notes
    -----
    The sample route accumulates, per row block, the scatter of rows moved to
    a pilot shift (the first block's mean) with exact pairwise merges (Chan,
    Golub & LeVeque, 1979): ``N p^2`` flops in BLAS-3 ``dsyrk`` calls and
    memory for one block. When the Gram factor loses more than
    ``whiten.current_settings().gram_digits_max`` digits (default 6), the factor is
    recomputed by a second pass from a tall-skinny QR of the centred data
    (``2 N p^2`` flops), whose error grows with cond(X) rather than
    cond(X)^2; ``health.method`` says which route ran. A one-shot iterator
    cannot be read twice, so ``"auto"`` takes the QR route from the start.

    Memory: ``"sample"`` holds one chunk and one block at a time.
    ``"shrinkage"`` (Ledoit-Wolf) reads the data twice, keeping the chunks of
    a one-shot iterator in memory for the second pass. ``"robust"`` holds all
    complete rows in memory (the MCD compares every row with every subset).

    Examples
    --------
    >>> import numpy as np, whiten
    >>> x = np.random.default_rng(7).normal(size=(200, 3)) @ [[1, .5, 0], [0, 1, .3], [0, 0, 1]]
    >>> b = whiten.fit_baseline(x, columns=["flow", "temp", "power"])
    >>> bool(np.allclose(b.cov, np.cov(x, rowvar=False)))
    True
    """
    if estimator not in ESTIMATORS:
        raise InputError(f"estimator: expected one of {ESTIMATORS}, got {estimator!r}")
    engine = engine_for(data)
    if engine is not None:  # e.g. a dask collection: per-block states reduced on the workers
        unused = [k for k, v in (("chunksize", chunksize), ("index_column", index_column)) if v is not None]
        if unused:
            raise InputError(f"{', '.join(unused)}: not used with dask input (dask's own partitions are the "
                             "chunks; labels are the collection's index)")
        if weights is not None and not isinstance(weights, str):
            raise InputError("weights: with dask input, pass the name of a weights column of the dask DataFrame "
                             "(an in-memory array could not be matched to the partitions' rows)")
        return engine.fit_baseline(data, estimator=estimator, columns=columns, missing=missing, method=method,
                                   weights=weights)
    if missing not in MISSING_POLICIES:
        raise InputError(f"missing: expected one of {MISSING_POLICIES}, got {missing!r}")
    wvals, wcol = _weights_array(weights)
    if (wvals is not None or wcol is not None) and estimator != "sample":
        raise InputError(f"weights: supported with estimator='sample' only, not {estimator!r}")
    src = Source(data, columns, chunksize, index_column, wcol, progress, sep=sep, decimal=decimal,
                 na_values=na_values)
    clean = Cleaner(src, missing, wvals)
    eq = Equilibrated(clean)  # columns at extreme scales reach the estimators as columns of order one
    if estimator == "sample":
        b = _fit_sample(src, clean, eq, method)
    elif estimator == "shrinkage":
        b = _fit_shrinkage(src, clean, eq, method, shrinkage)
    else:
        b = _fit_robust(src, clean, eq, support_fraction, seed)
    b = _in_data_units(b, eq)
    clean.report()
    b = _with_law(b, clean, src, seed)
    options = {"estimator": estimator, "columns": columns, "index_column": index_column, "missing": missing,
               "method": method, "shrinkage": shrinkage if estimator == "shrinkage" else None,
               "support_fraction": support_fraction, "seed": seed, "weights": weights if isinstance(weights, str)
               else None, "sep": sep, "decimal": decimal, "na_values": na_values}
    return _with_record(b, data, src, call or call_words(data, options), options)


def _with_record(b: Baseline, data: Any, src: Source, call: str, options: dict) -> Baseline:
    """The baseline with its settings and provenance (:mod:`whiten.baseline.record`)."""
    from ..io.modelfile import utc_now

    first, last = src.first_label, src.last_label
    keep = {k: v for k, v in options.items() if k in ("method", "shrinkage", "support_fraction", "seed", "weights")
            and v is not None}
    settings = settings_of(columns=b.columns, index_column=src.index_column, first=first, last=last,
                           na_values=src.na_values, missing=options["missing"], estimator=b.estimator, options=keep)
    h = b.health
    created = utc_now()
    prov = provenance_of(data, rows_read=h.n_rows_read, rows_used=b.n, first=first, last=last, call=call,
                         created_utc=created)
    return b.with_record(settings, prov, created_utc=created)


def _in_data_units(b: Baseline, eq: Equilibrated) -> Baseline:
    """A baseline fitted to equilibrated columns, mapped back to the data's units (exact)."""
    if not eq.active:
        return b
    assert eq.scale is not None
    prm = dict(b.params)
    if "raw_mean" in prm:  # robust: the raw MCD estimate's location and log-determinant
        prm["raw_mean"] = (np.asarray(prm["raw_mean"]) / eq.scale).tolist()
        prm["raw_logdet"] = float(prm["raw_logdet"]) - 2.0 * float(np.sum(np.log(eq.scale)))
    prm["equilibrated"] = {str(c): int(round(-math.log2(v))) for c, v in zip(b.columns, eq.scale) if v != 1.0}
    f = eq.factor_back(b.factor)
    h = b.health
    health = health_from_factor(f, method=h.method, gram_digits_lost=h.gram_digits_lost, n_rows_read=h.n_rows_read,
                                n_dropped=h.n_dropped, n_chunks=h.n_chunks, passes=h.passes)
    return Baseline(mean=eq.mean_back(b.mean), factor=f, n=b.n, columns=b.columns, estimator=b.estimator,
                    params=prm, health=health, weight_sum=b.weight_sum)


def _with_law(b: Baseline, clean: Cleaner, src: Source, seed: int | None) -> Baseline:
    """Attach the simulated law of a new row's d2 where no exact law exists, and check the screen."""
    from ..monitor.calibrated import asymptotic_serves, correlation_lower, simulate_law

    prm = b.params
    settings: dict = {}
    m = b.n
    need = b.estimator != "sample" or bool(prm.get("weighted"))
    if b.estimator == "shrinkage":
        settings["shrinkage"] = prm["shrinkage"]
    elif b.estimator == "robust":
        m = int(prm["n_total"])
        settings["support_fraction"] = prm["support_fraction"] if prm["support_fraction"] * m > (m + b.dim + 1) // 2 \
            else None
    elif need:
        if not src.reiterable:  # the weights cannot be read again: keep the asymptotic/approximate law
            need = False
        else:
            w = np.concatenate([blk.weights if blk.weights is not None else np.ones(blk.values.shape[0])
                                for blk in clean()])
            settings["weights"] = w[w > 0]
            m = int(settings["weights"].size)
    law = None
    if need and not asymptotic_serves(b.estimator, m, b.dim):
        law = simulate_law(b.estimator, correlation_lower(b.factor), m, settings=settings, seed=seed)
        if law.flagged_mean is not None:
            prm = dict(prm, flagged_expected_clean=law.flagged_mean, flagged_expected_se=law.flagged_se)
    out = Baseline(mean=b.mean, factor=b.factor, n=b.n, columns=b.columns, estimator=b.estimator, params=prm,
                   health=b.health, weight_sum=b.weight_sum, limit_law=law)
    _screen_warning(out)
    if law is not None:
        from .._warn import warn
        from ..errors import LimitAccuracyWarning
        from ..monitor.calibrated import ACCURATE_ROWS_PER_SENSOR, accuracy_note

        note = accuracy_note(b.estimator, m, b.dim)
        if note and m < ACCURATE_ROWS_PER_SENSOR * b.dim:
            warn(LimitAccuracyWarning, f"the {b.estimator} baseline's simulated alarm limit is {note}; prefer "
                 f"at least {ACCURATE_ROWS_PER_SENSOR * b.dim} reference rows, or the sample estimator (exact law)")
    return out


def _screen_warning(b: Baseline) -> None:
    """WeakScreenWarning when the default limit (alpha 0.001, new rows) is far above chi-square."""
    from .._warn import warn
    from ..errors import WeakScreenWarning
    from ..monitor.limits import screen_check, t2_limit

    alpha = 0.001
    if b.limit_law is not None:
        lim = b.limit_law.isf(alpha)
    elif b.n > b.dim:
        lim = float(t2_limit(alpha, b.dim, b.n, phase="new"))
    else:  # pragma: no cover - sample fits refuse m <= p
        return
    chk = screen_check(lim, alpha, b.dim, b.n)
    if chk is not None:
        warn(WeakScreenWarning, chk["message"] + " (checked at the default alpha of whiten score)")


def _common_health(f: Factor, clean: Cleaner, method: str, gram_digits: float | None, passes: int) -> BaselineHealth:
    return health_from_factor(f, method=method, gram_digits_lost=gram_digits, n_rows_read=clean.n_read,
                               n_dropped=clean.n_dropped, n_chunks=clean.n_blocks, passes=passes)


def _fit_sample(src: Source, clean: Cleaner, eq: Equilibrated, method: str) -> Baseline:
    from ..estimate.sample import covariance_factor, fit_scatter

    fit = fit_scatter(eq, src.names, method=method, reiterable=src.reiterable)
    f = covariance_factor(fit, src.names)
    st = fit.state
    weighted = clean.weights is not None or src.weight_column is not None
    params = {"divisor": "sum(w) - 1" if weighted else "n - 1", "weighted": weighted, "weight_sum": st.wsum}
    health = _common_health(f, clean, fit.method, fit.gram_digits_lost, fit.passes)
    return Baseline(mean=st.location, factor=f, n=st.n, columns=src.names, estimator="sample", params=params,
                    health=health, weight_sum=st.wsum)


def _cached(clean: Callable[[], Iterator[Block]], src: Source) -> tuple[Callable[[], Iterator[Block]], bool]:
    """Blocks readable twice: the source itself, or (one-shot iterators) a list in memory."""
    if src.reiterable:
        return clean, True
    blocks = list(clean())
    return (lambda: iter(blocks)), True


def _fit_shrinkage(src: Source, clean: Cleaner, eq: Equilibrated, route: str, rule: str) -> Baseline:
    from ..estimate.sample import check_scatter
    from ..estimate.shrinkage import (
        SHRINKAGE_METHODS,
        centred_fourth_moment,
        column_scales,
        shrinkage_intensity,
        shrunk_factor,
    )
    from ..estimate.streaming import accumulate

    if rule not in SHRINKAGE_METHODS:
        raise InputError(f"shrinkage: expected one of {SHRINKAGE_METHODS}, got {rule!r}")
    blocks, _ = _cached(eq, src)
    # the shrunk factor is built from R; take the QR route directly (one pass)
    st, nb = accumulate(blocks(), "qr")
    if st is None or st.n == 0:
        raise InputError(f"no complete rows to fit (columns {src.names})")
    if st.n < 2:
        raise InputError("shrinkage needs at least 2 complete rows")
    check_scatter(st, src.names, dependent=False)
    scales = column_scales(st.mat, st.n)
    norm4 = None
    passes = 1
    if rule == "ledoit-wolf":
        norm4 = centred_fourth_moment(blocks(), st.shift, st.mean, scales)
        passes = 2
    delta, _ = shrinkage_intensity(st.mat / scales, st.n, rule, norm4)
    f = shrunk_factor(st.mat, st.n, delta, scales, src.names)
    params = {"shrinkage": rule, "intensity": delta, "target": "diagonal (correlation towards identity)",
              "divisor": "n"}
    health = _common_health(f, clean, "tsqr", None, passes)
    return Baseline(mean=st.location, factor=f, n=st.n, columns=src.names, estimator="shrinkage",
                    params=params, health=health)


def _fit_robust(src: Source, clean: Cleaner, eq: Equilibrated, support_fraction: float | None,
                seed: int | None) -> Baseline:
    from ..estimate.robust import fast_mcd

    blocks = list(eq())
    if not blocks or sum(b.values.shape[0] for b in blocks) == 0:
        raise InputError(f"no complete rows to fit (columns {src.names})")
    x = np.vstack([b.values for b in blocks])
    pos = np.concatenate([b.positions for b in blocks])
    labels = None
    if any(b.labels is not None for b in blocks):
        labels = [lab for b in blocks for lab in (b.labels if b.labels is not None else b.positions)]
    res = fast_mcd(x, src.names, support_fraction=support_fraction, seed=seed)
    flagged = np.flatnonzero(~res.kept)
    params = dict(res.params)
    params["flagged_rows"] = [int(pos[k]) for k in flagged]
    if labels is not None:
        params["flagged_labels"] = [labels[k] for k in flagged]
    params["n_flagged"] = int(flagged.size)
    health = _common_health(res.factor, clean, "mcd", None, 1)
    return Baseline(mean=res.mean, factor=res.factor, n=int(res.kept.sum()), columns=src.names,
                    estimator="robust", params=params, health=health)
