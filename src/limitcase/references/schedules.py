"""Observation schedules rebuilt from a contract's terms, for the reference side.

A reference price must be computed from what the contract says (maturity, number of
fixings, window), never from the product's own ``dates()``: otherwise a bug in the
schedule code shared by a family of products (the calls, the puts and the reference) moves
every leg of a check together and no check can see it. These functions are the trusted
side's own reading of the usual schedule rules, written apart from the catalogue's.
"""

from __future__ import annotations

import numpy as np

from limitcase.errors import ParamError

__all__ = ["equal_steps"]


def equal_steps(maturity: float, count: int, start: float = 0.0) -> np.ndarray:
    """``count`` dates in equal steps over the window ``(start, maturity]``, the last one at
    ``maturity``: ``start + j (maturity - start) / count`` for ``j = 1 .. count`` (common
    practice for averaging, coupon and monitoring schedules written as "n equally spaced
    dates")."""
    n = int(count)
    if n != count or n < 1:
        raise ParamError(f"a schedule needs a whole number of dates >= 1, not {count!r}")
    if not 0.0 <= start < maturity:
        raise ParamError(f"a schedule window ({start!r}, {maturity!r}] is empty or starts before today")
    grid = np.linspace(float(start), float(maturity), n + 1)[1:]
    grid[-1] = float(maturity)  # exactly the maturity, whatever the rounding of linspace
    return grid
