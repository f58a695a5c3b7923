"""Checks at interior parameter points, and the shrinking of a failing one.

Every declared reduction and relation runs at the product's defaults, and its limits run at
the ends of the ranges: integers, 0, 1, round levels. Code that is wrong only away from
those values (a number of fixings truncated with ``int()``, a year fraction rounded, a level
compared after rounding) is never run there. So each declaration also runs at a few
*interior points*: every parameter of the product drawn at once from a window around its
default (:data:`~limitcase.settings.INNER_WINDOW`), inside its declared range and away from
the special values (the ends, 0, 1, the default, round levels), as a non-integer where the
parameter is real and as a whole number where it is a count. A draw the product refuses
(its constraints between parameters, a lower barrier above the upper one) or at which the
declaration cannot be built is drawn again (:data:`~limitcase.settings.INNER_DRAWS` times).

Reproducible: point ``i`` of case ``c`` of product ``P`` draws from the run's seed with the
spawn key ``(case_key(P, c), ROLE_INNER_POINT, i)`` (:mod:`limitcase.streams`), so it does
not depend on what else runs, and its check is named ``c@p<i>``: ``--seed`` and
``--select 'P/c@p<i>'`` reproduce it alone.

A failing interior point is shrunk toward the defaults, as property-based testing shrinks a
counterexample (Claessen and Hughes 2000, "QuickCheck", ICFP; MacIver et al. 2019,
"Hypothesis", JOSS 4(43)): each round halves, parameter by parameter, the distance to the
default (a count moves by at least one), and keeps the move when the check still fails;
a few rounds within a budget of re-runs (:data:`~limitcase.settings.INNER_SHRINK_ROUNDS`,
:data:`~limitcase.settings.INNER_SHRINK_BUDGET`). The failure then names the simplest failing
point found beside the drawn one.
"""

from __future__ import annotations

import dataclasses
import math
import warnings
from typing import Any, Callable, Mapping, Sequence

import numpy as np

from .checks import Check, Origin
from .errors import ParamError
from .models.base import Model
from .params import Param
from .product import Product
from .reduce import declaration_checks, declaration_name
from .settings import (
    DEFAULT_INNER_POINTS,
    DEFAULT_SEED,
    INNER_DRAWS,
    INNER_PATH_SHARE,
    INNER_SHRINK_BUDGET,
    INNER_SHRINK_FAILURES,
    INNER_SHRINK_ROUNDS,
    INNER_WINDOW,
)
from .streams import ROLE_INNER_POINT, block_generator, case_key, coerce_seed

__all__ = ["POINT_MARK", "draw_value", "draw_point", "interior_checks", "checks_at", "shrink", "still_fails",
           "point_label", "shrink_failures"]

POINT_MARK = "@p"
"""Between a case's name and its interior point's number: ``barrier_to_infinity@p1``."""

_MARGIN = 0.02  # of the window's width: how far a draw stays from an end or a special value


def _window(spec: Param) -> tuple[float, float]:
    """The interval an interior value of ``spec`` is drawn from: the default plus or minus
    :data:`INNER_WINDOW` of itself (of one unit for a default of 0), inside the range."""
    d = float(spec.default)
    half = INNER_WINDOW * abs(d) if d != 0.0 else INNER_WINDOW
    lo, hi = max(spec.low, d - half), min(spec.high, d + half)
    return lo, hi


def _specials(spec: Param, lo: float, hi: float) -> list[tuple[float, float]]:
    """The values a draw keeps away from, each with its margin: the declared ends, 0, 1 and
    the default (by :data:`_MARGIN` of the window's width), and round levels at the window's
    scale (multiples of the power of ten below its width; integers and halves where the window
    is wider than one), by a tenth of their spacing."""
    width = hi - lo
    out = [(x, _MARGIN * width) for x in (spec.low, spec.high, 0.0, 1.0, float(spec.default))]
    if width > 0:
        unit = 10.0 ** math.floor(math.log10(width))
        out += [(k * unit, 0.1 * unit) for k in range(math.floor(lo / unit), math.ceil(hi / unit) + 1)]
        if width >= 1.0:
            out += [(k / 2.0, 0.05) for k in range(math.floor(2 * lo), math.ceil(2 * hi) + 1)]
    return [(x, m) for x, m in out if math.isfinite(x)]


def draw_value(spec: Param, rng: np.random.Generator) -> float | int:
    """One interior value of a parameter; its default where it has no interior (an infinite
    default, a switch whose range is two values) and where the default is an end of the range.
    A default at an end is a choice of contract, not a number (no rebate, a forward start of 0,
    a decay of 1): the declarations of such a product are written for it and may hold only
    there (an out option with a rebate can be worth more than the vanilla), and the ends are
    the reductions' territory anyway."""
    d = spec.default
    if not math.isfinite(d) or d in (spec.low, spec.high):
        return d
    lo, hi = _window(spec)
    if spec.integer:
        half = max(INNER_WINDOW * abs(d), 2.0)
        a, b = max(math.ceil(d - half), math.ceil(spec.low)), min(math.floor(d + half), math.floor(spec.high))
        inner = [k for k in range(a, b + 1) if k != d and spec.contains(k) and k not in (spec.low, spec.high, 0, 1)]
        return int(inner[int(rng.integers(len(inner)))]) if inner else int(d)
    width = hi - lo
    if not width > 0:
        return float(d)
    lo, hi = lo + _MARGIN * width, hi - _MARGIN * width
    specials = _specials(spec, lo, hi)
    x = float(d)
    for _ in range(100):
        x = float(rng.uniform(lo, hi))
        if spec.contains(x) and all(abs(x - s) > m for s, m in specials):
            return x
    return x if spec.contains(x) else float(d)


def draw_point(cls: type[Product], rng: np.random.Generator, counts: bool = True) -> dict[str, Any]:
    """Every parameter of ``cls`` drawn once (:func:`draw_value`), in declaration order;
    with ``counts=False`` the whole-number parameters stay at their defaults (the later draws
    of a declaration that holds only at its default count, such as two assets)."""
    return {name: (draw_value(spec, rng) if counts or not spec.integer else spec.default)
            for name, spec in cls.param_specs().items()}


def _rename(checks: Sequence[Check], index: int, origin: Origin) -> list[Check]:
    return [dataclasses.replace(c, case=f"{c.case}{POINT_MARK}{index}", origin=origin, path_share=INNER_PATH_SHARE)
            for c in checks]


def _drawn(product: Product) -> tuple[tuple[str, Any], ...]:
    defaults = type(product)().params() if _constructible(type(product)) else {}
    return tuple((k, v) for k, v in product.params().items() if defaults.get(k, object()) != v)


def _constructible(cls: type[Product]) -> bool:
    try:
        cls()
    except Exception:
        return False
    return True


def checks_at(product: Product, model: Model | None, decl: Any, index: int) -> list[Check]:
    """The checks of one declaration at ``product`` (an interior point), named ``case@p<index>``
    and marked with their :class:`~limitcase.checks.Origin` (``model`` None: the product's scenario)."""
    under = product.scenario() if model is None else model
    origin = Origin(product=product, model=model, base_case=declaration_name(decl), index=index,  # type: ignore[arg-type]
                    drawn=_drawn(product))
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        found = _rename(declaration_checks(product, under, decl), index, origin)
    if caught:  # a reference's own warning at this point (a date moved onto a lattice step): on the check
        text = "; ".join(sorted({str(w.message) for w in caught}))
        found = [dataclasses.replace(c, note=(c.note + "; " if c.note else "") + f"reference warned: {text}")
                 for c in found]
    return found


def interior_checks(cls: type[Product], model: Model | None = None, *, seed: int = DEFAULT_SEED,
                    points: int = DEFAULT_INNER_POINTS, name: str | None = None,
                    skip_cases: Sequence[str] = ()) -> list[Check]:
    """Every declaration of ``cls`` at ``points`` interior points each (module docstring).

    ``name`` is the product's name in the run (for the streams: ``cls.__name__`` by
    default); ``skip_cases`` are the declarations that could not be built at the defaults
    (their error is reported there once, not again at every point). A declaration for which
    no draw works gets one skip record per point, with the last reason."""
    if points <= 0:
        return []
    label = name or cls.__name__
    root = coerce_seed(seed)
    out: list[Check] = []
    for decl in (*cls.reductions, *cls.relations):
        base = declaration_name(decl)
        if base in skip_cases:
            continue
        for index in range(1, int(points) + 1):
            rng = block_generator(root, case_key(label, base), ROLE_INNER_POINT, index)
            found, why = _first_buildable(cls, model, decl, index, rng)
            if found is None:
                out.append(Check(product=cls.__name__, case=f"{base}{POINT_MARK}{index}", kind="reduction"
                                 if decl in cls.reductions else "relation", model=model,
                                 skip=f"no interior point found in {INNER_DRAWS} draws: {why}"))
            else:
                out.extend(found)
    return out


def _first_buildable(cls: type[Product], model: Model | None, decl: Any, index: int,
                     rng: np.random.Generator) -> tuple[list[Check] | None, str]:
    why = ""
    fallback: list[Check] | None = None
    for attempt in range(INNER_DRAWS):
        try:
            product = cls(**draw_point(cls, rng, counts=attempt < INNER_DRAWS // 2))
        except ParamError as exc:  # a constraint between parameters: draw again
            why = str(exc)
            continue
        except Exception as exc:  # the product's own validation code
            why = f"{type(exc).__name__}: {exc}"
            continue
        try:
            found = checks_at(product, model, decl, index)
        except Exception as exc:  # the scenario of the product at this point
            why = f"{type(exc).__name__}: {exc}"
            continue
        errors = [c.error for c in found if c.error is not None]
        if errors:
            why = errors[0]
            continue
        if any(c.skip is not None for c in found):  # no reference at this point: look for one that has
            fallback = fallback or found
            continue
        return found, ""
    return fallback, why


def still_fails(outcome: Any, alpha: float, m: int) -> bool:
    """Whether a re-run at a shrunk point still fails: a path-by-path identity broken, or a
    p-value below ``alpha / m`` (Bonferroni's level, the strictest Holm applies in a run of
    ``m`` decisions: a shrunk point is kept only on evidence as strong as any failure needs)."""
    if outcome.verdict == "error":
        return False
    if outcome.pathwise_ok is False:
        return True
    return outcome.p_value is not None and outcome.p_value < alpha / max(int(m), 1)


def _toward(spec: Param, value: Any, default: Any) -> Any:
    """Half way from ``value`` to ``default`` (a count moves by at least one)."""
    if value == default or not (math.isfinite(float(value)) and math.isfinite(float(default))):
        return default
    if spec.integer:
        mid = int(round((value + default) / 2.0))
        return default if mid == value else mid
    return (float(value) + float(default)) / 2.0


def shrink(check: Check, fails: Callable[[Check], bool], *, rounds: int = INNER_SHRINK_ROUNDS,
           budget: int = INNER_SHRINK_BUDGET) -> tuple[Product, int]:
    """The simplest failing point found from a failing interior ``check``: the product there
    and the number of re-runs spent. ``fails(check)`` re-runs a check and says whether it
    still fails (:func:`still_fails`)."""
    origin = check.origin
    if origin is None:
        raise ParamError(f"{check.label} is not an interior-point check; only those are shrunk")
    cls = type(origin.product)
    decl = next((d for d in (*cls.reductions, *cls.relations) if declaration_name(d) == origin.base_case), None)
    if decl is None:
        return origin.product, 0
    defaults = cls().params()
    specs = cls.param_specs()
    current = origin.product
    spent = 0
    for _ in range(rounds):
        moved = False
        for name, spec in specs.items():
            value = current.params()[name]
            if value == defaults[name] or spent >= budget:
                continue
            try:
                candidate = current.replace(**{name: _toward(spec, value, defaults[name])})
                rebuilt = [c for c in checks_at(candidate, origin.model, decl, origin.index) if c.case == check.case]
            except Exception:  # a constraint between parameters: this move is not allowed
                continue
            if len(rebuilt) != 1 or rebuilt[0].error is not None or rebuilt[0].skip is not None:
                continue
            spent += 1
            if fails(rebuilt[0]):
                current, moved = candidate, True
        if not moved or spent >= budget:
            break
    return current, spent


def point_label(product: Product, defaults: Mapping[str, Any] | None = None) -> str:
    """``name=value, ...`` of the parameters of ``product`` away from their defaults."""
    base = dict(defaults) if defaults is not None else type(product)().params()
    parts = [f"{k}={v:.6g}" if isinstance(v, float) else f"{k}={v}"
             for k, v in product.params().items() if base.get(k, object()) != v]
    return ", ".join(parts) or "the defaults"


def shrink_failures(checks: Sequence[Check], outcomes: Sequence[Any], run_one: Callable[[Check], Any], *,
                    alpha: float, family: int) -> list[Any]:
    """Each failing interior-point check of a run (the first :data:`INNER_SHRINK_FAILURES`)
    shrunk toward the defaults (:func:`shrink`, re-running candidates with ``run_one``, on the
    check's own streams); its outcome's message names the drawn point and the simplest
    failing point found. ``family`` is the number of decisions Holm corrected over."""
    out = list(outcomes)
    todo = [i for i, (c, o) in enumerate(zip(checks, outcomes)) if c.origin is not None and o.verdict == "fail"]
    for i in todo[:INNER_SHRINK_FAILURES]:
        check = checks[i]
        try:
            simplest, spent = shrink(check, lambda c: still_fails(run_one(c), alpha, family))
        except Exception as exc:  # the product's own code at a shrunk point: keep the drawn one
            note = f"not shrunk ({type(exc).__name__}: {exc})"
        else:
            note = (f"simplest failing point found: {point_label(simplest)} "
                    f"({spent} re-run{'s' if spent != 1 else ''} shrinking toward the defaults)")
        o = out[i]
        drawn = f"drawn point: {o.point or 'the defaults'}"
        out[i] = dataclasses.replace(o, message=(o.message + "; " if o.message else "") + f"{drawn}; {note}")
    return out
