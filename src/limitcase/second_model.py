"""Every path-by-path identity again, under a second model on an uneven date grid.

A declared exact reduction or pathwise :class:`~limitcase.reduce.Identity` holds on every
path whatever the model and whatever the dates. Run only under Black-Scholes on evenly
spaced dates, it cannot see payoff code that reads a quantity which equals the right one only
there: a per-interval variance computed as ``vol^2 * dt`` from the first interval, the
spacing of the first two dates used for every interval, a constant volatility where the
model's path carries its own. :func:`second_model_checks` makes, for each such check, a
case ``CASE~heston``: the same legs with their dates warped (:func:`warp_dates`) priced on
common paths under Heston (1993) stochastic volatility with the check's spot, rate and
dividend yield, and the same path rules (checked to floating-point tolerance on every path;
the statistic is the rule's combination, zero).

The warp fixes 0 and every leg's last date (each leg keeps its maturity, the legs keep their
order) and, on each interval between those knots, maps ``u`` in ``[0, 1]`` to
``(1 - exp(-c u)) / (1 - exp(-c))`` (``c`` = :data:`~limitcase.settings.SECOND_MODEL_WARP`):
strictly increasing, so dates keep their order, and the same map for every leg of the
check, so dates that coincide still coincide. It is deterministic: a run reproduces.
"""

from __future__ import annotations

import dataclasses
import math
from typing import Any, Sequence

import numpy as np

from .checks import Check
from .models.base import Model
from .models.heston import Heston
from .product import Product
from .settings import SECOND_MODEL_PATH_SHARE, SECOND_MODEL_WARP

__all__ = ["SECOND_SUFFIX", "warp_dates", "warped", "second_model_for", "second_model_checks"]

SECOND_SUFFIX = "~heston"
"""Appended to a case's name for its run under the second model."""


def warp_dates(times: Any, knots: Sequence[float], strength: float = SECOND_MODEL_WARP) -> np.ndarray:
    """``times`` moved by the warp fixing ``knots`` (0 is always a knot): on each interval
    ``[a, b]`` between consecutive knots, ``t -> a + (b - a) g((t - a) / (b - a))`` with
    ``g(u) = (1 - exp(-c u)) / (1 - exp(-c))``; times beyond the last knot are unchanged."""
    t = np.asarray(times, dtype=float)
    ks = np.unique(np.concatenate([[0.0], np.asarray(knots, dtype=float)]))
    out = t.copy()
    scale = 1.0 - math.exp(-strength)
    for a, b in zip(ks[:-1], ks[1:]):
        inside = (t > a) & (t < b)
        u = (t[inside] - a) / (b - a)
        out[inside] = a + (b - a) * (1.0 - np.exp(-strength * u)) / scale
    return out


_CLASSES: dict[tuple[type, tuple[float, ...]], type] = {}


def _warped_class(cls: type, knots: tuple[float, ...]) -> type:
    key = (cls, knots)
    if key not in _CLASSES:
        def dates(self: Product) -> np.ndarray:
            return warp_dates(cls.dates(self), knots)

        def exercise_dates(self: Product) -> np.ndarray:
            ex = np.asarray(cls.exercise_dates(self), dtype=float)
            return warp_dates(ex, knots) if ex.size else ex

        def __reduce__(self: Product) -> Any:
            return (_rebuild, (cls, knots, self.params()))

        _CLASSES[key] = type(cls.__name__, (cls,), {
            "dates": dates, "exercise_dates": exercise_dates, "__reduce__": __reduce__,
            "__module__": cls.__module__, "__qualname__": cls.__qualname__, "warp_knots": knots,
            "__doc__": cls.__doc__})
    return _CLASSES[key]


def _rebuild(cls: type, knots: tuple[float, ...], params: dict[str, Any]) -> Product:
    return _warped_class(cls, knots)(**params)


def warped(product: Product, knots: Sequence[float]) -> Product:
    """``product`` with its dates and exercise dates warped by :func:`warp_dates` (same
    parameters; pickles by value)."""
    base = getattr(type(product), "__mro__")[1] if hasattr(type(product), "warp_knots") else type(product)
    return _warped_class(base, tuple(float(k) for k in knots))(**product.params())


def second_model_for(model: Model) -> Heston | None:
    """Heston with ``model``'s spot, rate and dividend yield (its other parameters at their
    defaults: a volatility of volatility of 0.5 and a correlation of -0.7, far from
    Black-Scholes; one scheme step per interval of the grid, since a path-by-path identity
    does not depend on the discretisation), or None for a model of several assets and for a
    model without volatility (``vol`` 0: a case that pins every fixing on a level on
    purpose, whose identity holds only on those deterministic paths)."""
    if getattr(model, "n_assets", 1) != 1:
        return None
    values = model.params()
    if values.get("vol", None) == 0:
        return None
    keep = {k: values[k] for k in ("spot", "rate", "dividend") if k in values}
    try:
        return Heston(substeps=1, **keep)
    except Exception:  # a spot or rate Heston does not take: no second run for this check
        return None


def _identity_only(check: Check) -> bool:
    return bool(check.rules) and all(r.sense == "==" for r in check.rules) and not check.error and not check.skip


def second_model_checks(checks: Sequence[Check]) -> list[Check]:
    """For each check with path-by-path identities (an exact reduction, a pathwise
    :class:`~limitcase.reduce.Identity`, the legs of a case without reference), the case
    ``CASE~heston``: its legs on warped dates under Heston, the same path rules, the
    statistic the first rule's combination (zero). Checks of several assets are left out."""
    out: list[Check] = []
    for check in checks:
        if not _identity_only(check) or check.model is None:
            continue
        heston = second_model_for(check.model)
        if heston is None:
            continue
        try:
            knots = sorted({float(leg.validated_dates()[-1]) for leg in check.legs})
            legs = tuple(warped(leg, knots) for leg in check.legs)
        except Exception as exc:  # the legs' own dates fail: an error of this case only
            out.append(Check(product=check.product, case=check.case + SECOND_SUFFIX, kind=check.kind,
                             error=f"cannot warp the dates: {type(exc).__name__}: {exc}"))
            continue
        rule = check.rules[0]
        out.append(dataclasses.replace(
            check, case=check.case + SECOND_SUFFIX, legs=legs, model=heston, weights=tuple(rule.weights),
            target=0.0, sense="==", allowance=0.0, allowance_reason="",
            target_source=f"the same identity under {heston.label()} on warped dates", path_share=SECOND_MODEL_PATH_SHARE,
            note=(check.note + "; " if check.note else "") + "under Heston, dates warped"))
    return out
