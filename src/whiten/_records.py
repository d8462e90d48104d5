"""Plain-data views of result records: one rule for turning their fields into JSON-ready values."""

from __future__ import annotations

import dataclasses
from typing import Any

import numpy as np

__all__ = ["fields_to_dict"]


def fields_to_dict(record: Any) -> dict:
    """The public fields of a dataclass record: arrays as lists, nested records through their ``to_dict``.

    Fields whose names start with ``_`` (private working state) are left out.
    """
    out = {}
    for f in dataclasses.fields(record):
        if f.name.startswith("_"):
            continue
        v = getattr(record, f.name)
        if isinstance(v, np.ndarray):
            v = v.tolist()
        elif hasattr(v, "to_dict") and not isinstance(v, dict):
            v = v.to_dict()
        out[f.name] = v
    return out
