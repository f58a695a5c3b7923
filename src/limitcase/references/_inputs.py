"""Input checks and element-wise broadcasting shared by the numerical reference modules
(package-internal: not part of :mod:`limitcase.references`' public names)."""

from __future__ import annotations

import math
from typing import Any, Callable

import numpy as np

from limitcase.errors import ParamError

__all__ = ["_num", "_loop"]


def _num(name: str, value: Any, func: str, *, low: float = -math.inf, low_open: bool = False,
         allow_inf: bool = False, fix: str = "") -> float:
    """``value`` as a float, not NaN, at least ``low`` (above it with ``low_open``), finite
    unless ``allow_inf``; otherwise a ParamError naming the argument, the function and the fix."""
    try:
        x = float(value)
    except (TypeError, ValueError) as exc:
        raise ParamError(f"{name}={value!r} is not a number in {func}; {fix}") from exc
    ok = not math.isnan(x) and (allow_inf or math.isfinite(x))
    if not ok or not ((x > low) if low_open else (x >= low)):
        bound = f"> {low}" if low_open else f">= {low}"
        raise ParamError(f"{name}={x!r} is outside the allowed range ({bound}"
                         f"{', inf allowed' if allow_inf else ', finite'}) in {func}; {fix}")
    return x


def _loop(args: tuple[Any, ...], one: Callable[..., float], func: str = "") -> float | np.ndarray:
    """Broadcast the numeric ``args`` and call ``one`` per element: a float for scalar input,
    an array of the broadcast shape otherwise."""
    try:
        arrs = np.broadcast_arrays(*[np.asarray(a, dtype=float) for a in args])
    except (TypeError, ValueError) as exc:
        where = f" of {func}" if func else ""
        raise ParamError(f"the numeric arguments{where} {args!r} are not numbers or do not broadcast: {exc}") from exc
    out = np.empty(arrs[0].shape)
    for idx in np.ndindex(*out.shape):
        out[idx] = one(*[float(a[idx]) for a in arrs])
    return float(out) if out.ndim == 0 else out
