"""Plain-data views of result records: one rule for turning their fields into JSON-ready values."""

from __future__ import annotations

import dataclasses
from typing import Any

from ._numerics import json_ready

__all__ = ["fields_to_dict"]


def fields_to_dict(record: Any) -> dict:
    """The public fields of a dataclass record in the project's JSON rule (:mod:`whiten._numerics`).

    Arrays become lists, nested records their ``to_dict``, NaN ``None`` and
    infinities ``"inf"``/``"-inf"``. Fields whose names start with ``_``
    (private working state) are left out.
    """
    return json_ready({f.name: getattr(record, f.name) for f in dataclasses.fields(record)
                       if not f.name.startswith("_")})
