"""Reading back the fit file that ``whiten regress -o FIT.json`` writes.

The file is plain JSON: ``schema`` (the format tag), ``data``, ``response``,
``predictors``, ``weights``, ``coverage`` and ``fit`` (the
:meth:`LinearFit.to_dict` of the fit). :func:`load_fit` reads the current tag,
``whiten.regress/3``, and the earlier ``whiten.regress/2``, whose key names it
translates to the current ones, so a program reading fits sees one layout.
"""

from __future__ import annotations

import json
import os
from typing import Any

from ..errors import ModelFileError

__all__ = ["FIT_SCHEMA", "load_fit"]

#: the format tag whiten writes today
FIT_SCHEMA = "whiten.regress/3"

_V2_FIT_KEYS = {"stderr": "std_error", "tvalues": "t_stat", "pvalues": "p_value", "f_pvalue": "f_p_value",
                "nobs": "n_rows", "condition_number": "condition", "condition_number_raw": "condition_raw"}
_V2_HEALTH_KEYS = {"condition_number": "condition", "condition_number_raw": "condition_raw",
                   "condition_number_fitted": "condition_fitted", "digits_stderr": "digits_std_error",
                   "digits_tvalues": "digits_t_stat", "digits_pvalues": "digits_p_value",
                   "digits_conf_int": "digits_interval"}


def load_fit(path: str | os.PathLike) -> dict:
    """The fit file written by ``whiten regress``, as a dict in the current layout.

    Parameters
    ----------
    path : str or path-like
        A ``FIT.json`` of tag ``whiten.regress/3`` or ``whiten.regress/2``.

    Returns
    -------
    dict
        The document with ``schema`` set to ``"whiten.regress/3"``; a file of
        the earlier tag has its keys renamed (``stderr`` -> ``std_error``,
        ``conf_int_95`` -> ``coef_interval`` with ``coverage``, ``lower`` and
        ``upper``, ``level`` -> ``coverage``, and so on: see
        ``docs/file-formats.rst``). Numbers follow the JSON rule of the file:
        NaN is ``None``, infinities are the strings ``"inf"``/``"-inf"``.

    Raises
    ------
    ModelFileError
        Missing file, not JSON, or not a fit file of a known tag.

    Examples
    --------
    >>> import json, os, tempfile, whiten
    >>> fit = whiten.fit_linear([[1.0], [2.0], [3.0], [4.0]], [1.1, 1.9, 3.2, 3.9])
    >>> path = os.path.join(tempfile.mkdtemp(), "fit.json")
    >>> with open(path, "w") as fh:
    ...     json.dump({"schema": "whiten.regress/3", "coverage": 0.95, "fit": fit.to_dict()}, fh)
    >>> round(whiten.load_fit(path)["fit"]["coef"][1], 6)
    0.97
    """
    try:
        with open(path, encoding="utf-8") as fh:
            doc = json.load(fh)
    except FileNotFoundError:
        raise ModelFileError(f"{path}: no such fit file") from None
    except (UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise ModelFileError(f"{path}: not a JSON fit file ({exc})") from None
    tag = doc.get("schema") if isinstance(doc, dict) else None
    if tag == FIT_SCHEMA:
        return doc
    if tag == "whiten.regress/2":
        return _from_v2(doc)
    raise ModelFileError(f"{path}: not a whiten fit file (schema {tag!r}; expected {FIT_SCHEMA!r} "
                         "or 'whiten.regress/2')")


def _from_v2(doc: dict[str, Any]) -> dict:
    out = dict(doc)
    out["schema"] = FIT_SCHEMA
    coverage = out.pop("level", 0.95)
    out["coverage"] = coverage
    fit = {_V2_FIT_KEYS.get(k, k): v for k, v in dict(doc.get("fit") or {}).items()}
    ci = fit.pop("conf_int_95", None)
    if ci is not None:
        fit["coef_interval"] = {"coverage": 0.95, "lower": [r[0] for r in ci], "upper": [r[1] for r in ci]}
    if isinstance(fit.get("health"), dict):
        fit["health"] = {_V2_HEALTH_KEYS.get(k, k): v for k, v in fit["health"].items()}
    out["fit"] = fit
    return out
