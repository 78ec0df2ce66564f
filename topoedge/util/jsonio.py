"""JSON that is JSON: NaN and infinities written as null, numpy scalars as numbers (utility stage)."""

from __future__ import annotations

import json
import math
from typing import Any

import numpy as np

__all__ = ["plain_json", "dumps"]


def plain_json(value: Any) -> Any:
    """``value`` with every non-finite float replaced by None and numpy scalars and arrays made plain.

    Records with a ``to_dict()`` are converted through it; tuples become lists.
    """
    if hasattr(value, "to_dict"):
        value = value.to_dict()
    if isinstance(value, dict):
        return {k: plain_json(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [plain_json(v) for v in value]
    if isinstance(value, np.ndarray):
        return plain_json(value.tolist())
    if isinstance(value, np.generic):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value


def dumps(value: Any, **kwargs) -> str:
    """:func:`json.dumps` of :func:`plain_json` (strict: no NaN or Infinity can reach the text)."""
    return json.dumps(plain_json(value), allow_nan=False, **kwargs)
