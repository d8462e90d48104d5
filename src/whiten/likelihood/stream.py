"""Per-row Gaussian log-likelihood of a table file, streamed chunk by chunk into a CSV file.

:func:`loglik_file` reads the file with :func:`whiten.io.tables.open_table`,
evaluates every chunk with :meth:`whiten.Gaussian.evaluate` (missing values
marginalized) and writes one line per input row, so memory is one chunk
however long the file.
"""

from __future__ import annotations

import dataclasses
import os
from collections.abc import Sequence
from typing import Any

import numpy as np

from ..errors import InputError
from ..io.atomic import check_writable, same_file
from ..io.tables import Table, open_table, table_progress
from ..io.writers import open_output, output_format

__all__ = ["loglik_file", "LoglikFileSummary"]


@dataclasses.dataclass(frozen=True)
class LoglikFileSummary:
    """What :func:`loglik_file` found.

    Attributes
    ----------
    total : float
        Sum of the log-likelihoods of the rows evaluated.
    rows : int
        Data rows read (every one has a line in the output).
    evaluated : int
        Rows with at least one value observed.
    partial : int
        Evaluated rows with some values missing (evaluated on their marginal).
    empty : int
        Rows with no value observed (empty cells in the output).
    variables : int
        Variables of the model.
    evaluation : RowEvaluation or None
        Every row's d2, log-density and number observed, with ``keep_rows=True``.
    """

    total: float
    rows: int
    evaluated: int
    partial: int
    empty: int
    variables: int
    evaluation: Any = None


def loglik_file(model: Any, data_path: str | os.PathLike | Table, output_path: str | os.PathLike, *,
                columns: Sequence[str] | None = None, chunksize: int | None = None, force: bool = False,
                keep_rows: bool = False, sep: str | None = None, decimal: str | None = None,
                progress: bool | None = False) -> LoglikFileSummary:
    """Write ``row,loglik,d2,n_observed`` for every row of a table file under a Gaussian.

    Parameters
    ----------
    model : whiten.Gaussian
        The mean and covariance; its ``columns`` pick the file's columns.
    data_path : str, PathLike or whiten.io.tables.Table
        CSV/TSV (maybe compressed) or Parquet file; columns not in the model
        are ignored.
    output_path : str or PathLike
        The table written, in the format of its name (``.csv``, ``.tsv``,
        ``.csv.gz``, ``.tsv.gz``, ``.parquet``), atomically (a temporary sibling renamed into place);
        never the input file.
    columns : sequence of str, optional
        The model's variables in its order (default ``model.columns``).
    chunksize : int, optional
        Rows read at a time (default 100000).
    force : bool
        Replace ``output_path`` if it exists.
    keep_rows : bool
        Also return every row's evaluation (memory grows with the file).
    sep, decimal : str, optional
        How the file separates fields and writes decimals (see
        :func:`whiten.io.tables.open_table`).
    progress : bool or None
        Progress on stderr (:func:`whiten.io.tables.progress`): ``None`` decides
        by whether stderr is a terminal.

    Returns
    -------
    LoglikFileSummary

    Raises
    ------
    InputError
        A missing file or model column, a cell that is not a number (file,
        line, row and column named), an existing output without ``force``,
        an output naming the input.

    Examples
    --------
    >>> import os, tempfile, whiten
    >>> from whiten.likelihood.stream import loglik_file
    >>> g = whiten.Gaussian([0.0, 0.0], [[1.0, 0.0], [0.0, 1.0]], columns=["a", "b"])
    >>> d = tempfile.mkdtemp(); src = os.path.join(d, "x.csv")
    >>> _ = open(src, "w").write("a,b\\n0,0\\n1,\\n,\\n")
    >>> s = loglik_file(g, src, os.path.join(d, "ll.csv"))
    >>> s.rows, s.evaluated, s.partial, s.empty
    (3, 2, 1, 1)
    """
    import pandas as pd

    names = list(model.columns if columns is None else columns)
    output_format(output_path)  # an ending whiten cannot write is refused before any work
    table = data_path if isinstance(data_path, Table) else open_table(data_path, sep=sep, decimal=decimal)
    out = check_writable(output_path, force=force)
    if same_file(out, table.path):
        raise InputError(f"output: {str(out)!r} names the data file being read; write elsewhere")
    cols = table.select(names, what="the model")
    parts = []
    total, evaluated, partial, empty, rows = 0.0, 0, 0, 0, 0
    with open_output(out, force=force) as writer:
        for chunk in table_progress(table, table.chunks(cols, chunksize=chunksize), progress, "evaluating"):
            ev = model.evaluate(chunk.to_numpy(), missing="marginalize")
            if keep_rows:
                parts.append(ev)
            nobs = np.asarray(ev.n_observed, dtype=np.int64)
            seen = nobs > 0
            ll = np.where(seen, np.asarray(ev.logpdf, dtype=float), np.nan)
            m = nobs.shape[0]
            frame = pd.DataFrame({"loglik": ll, "d2": np.where(seen, np.asarray(ev.d2, dtype=float), np.nan),
                                  "n_observed": nobs}, index=pd.RangeIndex(rows, rows + m, name="row"))
            writer.write(frame)
            total += float(ll[seen].sum())
            evaluated += int(seen.sum())
            empty += int(m - seen.sum())
            partial += int((seen & (nobs < len(names))).sum())
            rows += m
    evaluation = None
    if keep_rows and parts:
        from ..gaussian import RowEvaluation

        evaluation = RowEvaluation(*(np.concatenate([getattr(e, k) for e in parts])
                                     for k in ("d2", "logpdf", "n_observed")))
    return LoglikFileSummary(total, rows, evaluated, partial, empty, len(names), evaluation)
