"""The one JSON number encoding of every file limitcase writes (docs/json-format.md, "One
rule for numbers"): an infinity is written ``1e308`` or ``-1e308``, a NaN or missing number
``null``; numpy scalars and arrays become Python numbers and lists.

A bottom layer: it imports nothing of the project, so the library (mutation reports, the
reprice record) and the renderers in ``report/`` share it.
"""

from __future__ import annotations

import math
from typing import Any

__all__ = ["INFINITY", "jsonable"]

INFINITY = 1e308
"""How an infinite number is written (strict JSON has no ``Infinity``)."""


def jsonable(x: Any) -> Any:
    """``x`` with every number made JSON-safe, recursively through dicts, lists and tuples:
    ``inf`` -> ``1e308``, ``-inf`` -> ``-1e308``, NaN -> ``None``, numpy scalars and arrays
    -> Python numbers and lists. Anything else is returned as it is."""
    if isinstance(x, dict):
        return {k: jsonable(v) for k, v in x.items()}
    if isinstance(x, (list, tuple)):
        return [jsonable(v) for v in x]
    if isinstance(x, bool) or x is None or isinstance(x, str):
        return x
    tolist = getattr(x, "tolist", None)  # numpy scalars and arrays, without importing numpy
    if tolist is not None and type(x).__module__ == "numpy":
        return jsonable(tolist())
    if isinstance(x, float):
        if math.isnan(x):
            return None
        if math.isinf(x):
            return INFINITY if x > 0 else -INFINITY
    return x
