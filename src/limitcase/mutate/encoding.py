"""Mutation reports in JSON: infinities as +-1e308, NaN as ``null``, numpy scalars as Python ones.

Part of :mod:`limitcase.mutate`. (The project-wide JSON number encoding lives apart; this
one keeps the mutation report's format as it was written.)
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

__all__ = ["json_safe"]


def json_safe(x: Any) -> Any:
    if isinstance(x, dict):
        return {k: json_safe(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [json_safe(v) for v in x]
    if isinstance(x, (np.floating, float)):
        v = float(x)
        if math.isnan(v):
            return None
        if math.isinf(v):
            return 1e308 if v > 0 else -1e308
        return v
    if isinstance(x, np.integer):
        return int(x)
    if isinstance(x, np.bool_):
        return bool(x)
    return x
