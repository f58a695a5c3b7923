"""How every renderer writes a number: one formatter, aware of infinities, NaN and counts."""

from __future__ import annotations

import math
import numbers
from typing import Any

__all__ = ["num", "count", "tick"]


def num(x: Any, digits: int = 6) -> str:
    """``x`` in at most ``digits`` significant digits; ``inf``/``-inf``/``nan`` spelled out,
    ``-`` for a missing value; booleans, whole numbers and text as they are."""
    if x is None:
        return "-"
    if isinstance(x, (bool, str)):
        return str(x)
    if isinstance(x, numbers.Integral):
        return str(int(x))
    if isinstance(x, numbers.Real):
        v = float(x)
        if math.isnan(v):
            return "nan"
        if math.isinf(v):
            return "inf" if v > 0 else "-inf"
        return f"{v:.{digits}g}"
    return str(x)


def count(n: int) -> str:
    """A count (paths, dates) that no reader mistakes for a decimal: digits grouped by
    threes with a thin space from five digits up (16 384, 1 048 576), as the SI brochure
    recommends because "1,024" reads as 1.024 where the comma is the decimal sign;
    ``1024`` stays as it is."""
    s = str(int(n))
    neg = s.startswith("-")
    s = s.lstrip("-")
    if len(s) > 4:
        groups = []
        while s:
            groups.insert(0, s[-3:])
            s = s[:-3]
        s = "\u2009".join(groups)
    return ("-" if neg else "") + s


def tick(x: Any) -> str:
    """An axis label: like :func:`num` in short form, infinities as the sign ∞."""
    if isinstance(x, numbers.Real) and not isinstance(x, (bool, numbers.Integral)) and math.isinf(float(x)):
        return "∞" if x > 0 else "-∞"
    return num(x, 6)
