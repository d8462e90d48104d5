"""Score a table file too large for memory: read, score, write and forget, one chunk at a time.

:func:`score_file` is :func:`whiten.monitor.score` for files: the same rows
give the same score columns, written to a CSV file instead of returned, and
what a summary, a chart or a report needs is kept in a bounded
:class:`~whiten.monitor.ScoreDigest`.
"""

from __future__ import annotations

import os
from collections.abc import Sequence
from typing import Any

import numpy as np

from ..errors import InputError
from ..io.atomic import check_writable, same_file
from ..io.tables import Table, na_list, open_table, rename_map, table_progress
from ..io.writers import open_output, output_format
from .digest import ScoreDigest
from .drift import DriftRules
from .fdr import add_fdr, bh_adjust
from .limits import check_alpha
from .scorer import Scorer

__all__ = ["score_file"]


def score_file(baseline: Any, data_path: str | os.PathLike | Table, output_path: str | os.PathLike, *,
               alpha: float = 0.001, missing: str = "marginalize", phase: str = "new",
               fdr: float | None = None, order: Sequence[str] | None = None,
               index_column: str | None = None, chunksize: int | None = None, force: bool = False,
               chart_points: int = 20_000, worst: int = 5, progress: bool | None = False,
               ewma: float | None = None, ewma_arl: float | None = None, persist: Any = None,
               sep: str | None = None, decimal: str | None = None, gap: int = 2,
               episodes_path: str | os.PathLike | None = None, na_values: Any = None,
               rename: Any = None) -> ScoreDigest:
    """Score every row of a table file against a baseline and write the score table in the format of its name.

    Parameters
    ----------
    baseline : Baseline or Gaussian
        As for :func:`whiten.monitor.score`.
    data_path : str, PathLike or whiten.io.tables.Table
        CSV/TSV (maybe compressed) or Parquet file of sensor rows; columns are
        matched to the baseline's sensors by name, other columns are ignored.
    output_path : str or PathLike
        Where the score table goes; its name chooses the format (``.csv``,
        ``.tsv``, ``.csv.gz``, ``.tsv.gz``, ``.parquet``; see
        :func:`whiten.io.writers.output_format`). Written to a temporary
        sibling and renamed into place when complete; never the input file.
    alpha, missing, phase, fdr, order
        As for :func:`whiten.monitor.score`. With ``fdr`` the file is read
        twice: the first pass collects every p-value, so the Benjamini-Hochberg
        step sees the whole file, as :func:`~whiten.monitor.score` sees its batch.
    index_column : str, optional
        Column that labels the rows; it is the output's first column. Default:
        the model's own (``baseline.settings["index_column"]``) when the file
        has that column; else the first column is ``row``, the 0-based
        data-row number (and ``digest.notes`` says why).
    chunksize : int, optional
        Rows read, scored and written at a time (default 100000).
    force : bool
        Replace ``output_path`` if it exists.
    chart_points, worst : int
        Passed to the :class:`~whiten.monitor.ScoreDigest` returned.
    progress : bool or None
        Progress on stderr, bytes read of the file's size and the time left
        (:mod:`whiten.io.progress`): True a bar, False nothing, ``None`` a bar
        on a terminal and otherwise a plain line about every 10 s.
    ewma, ewma_arl, persist
        The drift rules, as for :func:`whiten.monitor.score`: the smoothed
        vector and the persistence window carry from one chunk to the next,
        so the columns equal those of one in-memory call on the whole file.
    sep, decimal : str, optional
        How the file separates fields and writes decimals (see
        :func:`whiten.io.tables.open_table`).
    gap : int
        The episode rule (:mod:`whiten.monitor.episodes`): quiet rows that may
        separate two runs of alarms in one episode (default 2).
    episodes_path : str or PathLike, optional
        Also write the episode table there (format by its name, atomically).
    na_values : sequence of str, or str, optional
        Codes read as missing (see :func:`whiten.io.tables.open_table`);
        default: the model's (``baseline.settings["na_values"]``).
    rename : dict or str, optional
        File columns renamed onto the model's sensor names,
        ``{"name in the file": "sensor"}`` or ``"P1=suction,P2=discharge"``.
        A mismatch left lists the missing and the extra columns.

    Returns
    -------
    ScoreDigest
        Counts, the worst rows whole, the control-chart trace and the alarm
        episodes (:meth:`ScoreDigest.episodes`); also
        ``source`` (the file read) and ``ignored_columns`` (its columns not in
        the model, the index column aside); with ``ewma``/``persist``,
        ``drift`` holds per rule the alarms, the 0-based data row of the
        first (None if none) and, for the EWMA, the rows held for a missing
        reading; the settings and limits are in ``attrs``.

    Raises
    ------
    InputError
        As :func:`whiten.monitor.score` and :func:`whiten.io.tables.open_table`;
        an existing output without ``force``; an output naming the input; an
        output name whose format whiten does not write (or ``.parquet``
        without pyarrow); a
        non-finite value (or NaN with ``missing="error"``) with its row and column.

    Notes
    -----
    Memory is one chunk of rows and its scores, plus the digest (bounded by
    ``chart_points`` and ``worst``); with ``fdr``, one float per row for the
    adjusted p-values.

    Examples
    --------
    >>> import os, tempfile, numpy as np, pandas as pd, whiten
    >>> g = whiten.Gaussian([0.0, 0.0], [[1.0, 0.5], [0.5, 1.0]], columns=["a", "b"])
    >>> d = tempfile.mkdtemp(); src = os.path.join(d, "rows.csv")
    >>> pd.DataFrame({"a": [0.1, 4.0, -0.2], "b": [0.0, -4.0, 0.3]}).to_csv(src, index=False)
    >>> dig = whiten.monitor.score_file(g, src, os.path.join(d, "scores.csv"), phase="known", chunksize=2)
    >>> dig.n_rows, dig.n_alarm, list(pd.read_csv(os.path.join(d, "scores.csv")).columns[:3])
    (3, 1, ['row', 'd2', 'p_value'])
    """
    import pandas as pd

    scorer = Scorer(baseline, alpha=alpha, missing=missing, phase=phase, order=order)
    drift = DriftRules(scorer, ewma=ewma, ewma_arl=ewma_arl, persist=persist)
    if fdr is not None:
        fdr = check_alpha(fdr, "fdr")
    output_format(output_path)  # an ending whiten cannot write is refused before any work
    if episodes_path is not None:
        output_format(episodes_path, option="--episodes")
        check_writable(episodes_path, force=force, what="episodes")
    remembered = dict(getattr(baseline, "settings", None) or {})
    if na_values is None and remembered.get("na_values"):
        na_values = remembered["na_values"]
    mapping = rename_map(rename)
    table = data_path if isinstance(data_path, Table) else open_table(data_path, sep=sep, decimal=decimal,
                                                                       na_values=na_values)
    if isinstance(data_path, Table) and na_values is not None and not table.na_values:
        import copy

        table = copy.copy(table)  # the caller's Table is left as it was
        table.na_values = na_list(na_values)
    table = table.rename(mapping)
    out = check_writable(output_path, force=force, what="output")
    if same_file(out, table.path):
        raise InputError(f"output: {str(out)!r} names the data file being read; write the scores elsewhere")
    notes: list[str] = []
    if index_column is None and remembered.get("index_column"):
        if remembered["index_column"] in table.columns:
            index_column = remembered["index_column"]
        else:
            notes.append(f"the model's index column {remembered['index_column']!r} is not in {table.where}; "
                         "rows are labelled by their 0-based number")
    try:
        cols = table.select(scorer.columns, index_column=index_column, what="the model")
    except InputError as exc:
        if "missing columns" not in str(exc):
            raise
        raise InputError(f"{exc}; map file columns onto the model's sensor names with --rename old=new,... "
                         "(rename={'old': 'new'} in Python)") from None
    digest = ScoreDigest(scorer.columns, attrs={**scorer.attrs(fdr), **drift.attrs()}, worst=worst,
                         chart_points=chart_points, gap=gap)
    digest.source = str(table.path)
    digest.notes = notes
    digest.index_column = index_column
    digest.ignored_columns = [c for c in table.columns if c not in scorer.columns and c != index_column]

    def passes(desc: str):
        chunks = table.chunks(cols, chunksize=chunksize, index_column=index_column)
        return table_progress(table, chunks, progress, desc)

    adjusted = None
    if fdr is not None:
        # pass 1: every p-value, so the step-up threshold sees the whole file
        ps = [scorer.score_array(_values(ch, scorer, table, k))["p_value"] for k, ch in _numbered(passes("pass 1/2"))]
        adjusted = bh_adjust(np.concatenate(ps)) if ps else np.empty(0)
    n_rows = 0
    with open_output(out, force=force, what="output") as writer:
        for k, chunk in _numbered(passes("scoring" if adjusted is None else "pass 2/2")):
            x = _values(chunk, scorer, table, k)
            scores = scorer.score_array(x)
            drift.add(x, scores)
            m = len(chunk)
            if adjusted is not None and fdr is not None:
                if n_rows + m > adjusted.shape[0]:
                    raise InputError(f"{table.where} changed while it was read twice for fdr; score it again")
                add_fdr(scores, fdr, adjusted[n_rows:n_rows + m])
            frame = pd.DataFrame(scores, index=chunk.index)
            if index_column is None:
                frame.index.name = "row"
            writer.write(frame)
            digest.add(scores, index=frame.index)
            n_rows += m
        if adjusted is not None and n_rows != adjusted.shape[0]:
            raise InputError(f"{table.where} changed while it was read twice for fdr; score it again")
    digest.drift = drift.summary()
    if episodes_path is not None:
        with open_output(episodes_path, force=force, what="episodes", option="--episodes") as writer:
            writer.write(digest.episodes())
    return digest


def _numbered(chunks):
    """(first data row, chunk) pairs."""
    first = 0
    for ch in chunks:
        yield first, ch
        first += len(ch)


def _values(chunk: Any, scorer: Scorer, table: Table, first: int) -> np.ndarray:
    """The chunk's float64 block, refused when a value is infinite (or missing, with missing='error')."""
    x = chunk.to_numpy()
    # one cheap pass first: the sum is finite exactly when every entry is (barring overflow)
    if x.size and not np.isfinite(np.add.reduce(x, axis=None)):
        bad = np.isinf(x) if scorer.missing == "marginalize" else ~np.isfinite(x)
        if bad.any():
            r, c = (int(v) for v in np.argwhere(bad)[0])
            label = chunk.index[r] if chunk.index.name is not None else None
            hint = "" if scorer.missing == "marginalize" else " (missing='error' allows no missing value)"
            raise InputError(f"{table.where}: {table.at(first + r, label)}, column "
                             f"{scorer.columns[c]!r} is {x[r, c]}{hint}; every value must be a finite number"
                             + (" (leave a reading empty if it is missing)" if not hint else ""))
    return x

