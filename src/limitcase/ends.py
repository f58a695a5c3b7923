"""Every end of every parameter, enumerated: the limits an author did not declare.

A :class:`~limitcase.params.Param` has two ends (``low`` and ``high``). A declared
:class:`~limitcase.reduce.Reduction` that moves the parameter to one of them *uses* that end:
the product is checked there against a base product. Every other end is *enumerated* here
and, under ``limitcase check --ends``, checked without any declaration:

continuity (``end:PARAM.SIDE``)
    The product is priced at the end ``E`` and at four points approaching it,
    ``E + k d`` (``k = 1, ..., 4``, ``d`` a small step toward the default), on common paths.
    The quadratic through the three approaching prices, extrapolated to ``E`` (Lagrange,
    or equivalently Richardson extrapolation with step ratio 1), gives
    ``3 V(E + d) - 3 V(E + 2d) + V(E + 3d)``, so the statistic is the third difference
    ``V(E) - 3 V(E + d) + 3 V(E + 2d) - V(E + 3d)``, zero up to ``O(d^3)`` for a price
    three times differentiable into the end (Richardson 1911; any numerical-analysis text,
    e.g. Burden and Faires, *Numerical Analysis*, section 4.2). Its standard error comes
    from the legs on common paths, and the test joins the run's Holm family like any check.
    A payoff coded wrongly only at the end (a special case ``if strike == 0``) breaks it.
    The ``O(d^3)`` term is not below the standard error when the payoff moves smoothly with
    the parameter on every path (its third difference is then about ``d^3`` times the third
    derivative on every path, so the ratio of bias to standard error does not shrink with
    ``d``); it is bounded by the same third difference one step further in,
    ``V(E + d) - 3 V(E + 2d) + 3 V(E + 3d) - V(E + 4d)``, whose leading term differs from the
    first one's by a factor ``1 + O(d)`` (the a-posteriori error estimate of Richardson
    extrapolation): the allowance is :data:`~limitcase.settings.END_ALLOWANCE_FACTOR` times
    its absolute value, estimated on the same paths. A jump at the end is not in it, and is
    seen whatever ``d``.
sign (``end:PARAM.SIDE:sign``)
    No-arbitrage sanity: a product whose cash flows are never negative (``nonnegative``)
    has a price ``>= 0`` at the end. The engine already refuses a non-finite or negative
    amount on any path, so a bounded payoff cannot give an unbounded price unseen.

An end at infinity is priced at a far finite value, the default moved
:data:`~limitcase.settings.END_FAR_FACTOR` times its size (at least 1) toward it. An end
where the price really jumps (a barrier that becomes certain, a window that closes) is
declared with :class:`EndJump` and its reason: it gets the sign check only. An open finite
end (a maturity in ``(0, ...``) is not a value of the product; an integer end (a count, a
flag) has no neighbours to extrapolate from, so it gets the sign check and a suggestion to
declare what the product becomes there; an end the product refuses at its other defaults
(a lower barrier above the upper one) is listed as unreachable.
"""

from __future__ import annotations

import difflib
import math
from dataclasses import dataclass
from typing import Any, ClassVar, Sequence

from .checks import Check
from .errors import DeclarationError, ParamError
from .models.base import Model
from .product import Product
from .reduce import limit_product
from .settings import END_ALLOWANCE_FACTOR, END_FAR_FACTOR, END_MAX_DATES, END_STEP

__all__ = ["EndJump", "EndInfo", "SIDES", "END_WEIGHTS", "ERROR_WEIGHTS", "ends_of_classes", "end_table", "end_checks", "end_value"]

SIDES = ("low", "high")

END_WEIGHTS = (1.0, -3.0, 3.0, -1.0, 0.0)
"""Weights of ``V(E), V(E + d), ..., V(E + 4d)``: the price at the end minus the quadratic
extrapolation of the three nearest approaching prices (a third difference)."""

ERROR_WEIGHTS = tuple(END_ALLOWANCE_FACTOR * w for w in (0.0, 1.0, -3.0, 3.0, -1.0))
"""Weights of the truncation-error estimate: the same third difference one step further from
the end, times :data:`~limitcase.settings.END_ALLOWANCE_FACTOR`."""

_STATUS_TEXT = {
    "declared": "declared",
    "enumerated": "only enumerated (check --ends: continuity, sign)",
    "jump": "declared a jump (check --ends: sign)",
    "count": "to declare: a count, nothing to extrapolate from (check --ends: sign)",
    "open": "open end, not a value of the product",
    "unreachable": "unreachable at the other defaults",
    "large": "to declare: too many dates to price",
}


@dataclass(frozen=True)
class EndJump:
    """A parameter end where the product's price jumps, so continuity into it is not
    checked (``end_jumps = (EndJump("barrier", "high", reason="..."),)`` on the class).

    ``side`` is ``"low"`` or ``"high"``; ``reason`` says why the price jumps there (shown in
    the listing and the dossier)."""

    param: str
    side: str
    reason: str

    declaration_kind: ClassVar[str] = "end_jumps"

    @property
    def case_name(self) -> str:
        return f"end:{self.param}.{self.side}:jump"

    def describe(self) -> str:
        return f"EndJump({self.param!r}, {self.side!r})"

    def validate_on(self, cls: type) -> None:
        """Run when ``cls`` is defined: a known parameter, a side, a reason."""
        known = list(cls.param_specs())  # type: ignore[attr-defined]
        if self.param not in known:
            close = difflib.get_close_matches(str(self.param), known, n=1, cutoff=0.6)
            hint = f"; did you mean {close[0]!r}?" if close else f"; its parameters are: {', '.join(known) or 'none'}"
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} in end_jumps names {self.param!r}, which is not a parameter{hint}")
        if self.side not in SIDES:
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} in end_jumps has side={self.side!r}; use 'low' or 'high'")
        if not isinstance(self.reason, str) or not self.reason.strip():
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} in end_jumps needs a reason (why the price jumps at that end)")


@dataclass(frozen=True)
class EndInfo:
    """One end of one parameter of a product: its value (``value`` the far finite value
    priced for an infinite end), its status (a key of the listing's legend), the detail
    (the reduction using it, the jump's reason, why it is not priced) and the
    :class:`~limitcase.reduce.Reduction` line suggested to the author ("" when declared)."""

    param: str
    side: str
    end: float
    value: float
    status: str
    detail: str = ""
    suggestion: str = ""

    @property
    def text(self) -> str:
        """The status in words."""
        return _STATUS_TEXT.get(self.status, self.status)


def _fmt(x: float) -> str:
    if isinstance(x, float) and math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return f"{x:g}" if isinstance(x, float) else str(x)


def end_value(spec: Any, side: str, default: float) -> float:
    """The value priced for an end: the end itself when finite, else the default moved
    ``END_FAR_FACTOR * max(|default|, 1)`` toward it (a far finite value)."""
    end = spec.low if side == "low" else spec.high
    if math.isfinite(end):
        return float(end)
    far = default + math.copysign(END_FAR_FACTOR * max(abs(default), 1.0), end)
    return float(round(far)) if spec.integer else float(far)


def _used_ends(product: Product) -> dict[tuple[str, str], str]:
    """(param, side) -> the name of the first reduction moving ``param`` to that end."""
    used: dict[tuple[str, str], str] = {}
    specs = type(product).param_specs()
    for red in type(product).reductions:
        try:
            values = limit_product(product, red).params()
        except Exception:  # a reduction that cannot be built is reported by its own check
            continue
        for name in red.changes:
            spec = specs.get(name)
            if spec is None:
                continue
            for side, end in (("low", spec.low), ("high", spec.high)):
                if values[name] == end:
                    used.setdefault((name, side), red.name)
    return used


def _suggest(cls: type, name: str, side: str, end: float) -> str:
    """The Reduction line the author could write for an end (what it becomes is theirs to say)."""
    if math.isinf(end):
        word, literal = ("infinity", "math.inf") if end > 0 else ("minus_infinity", "-math.inf")
    else:
        literal = _fmt(end)
        word = "zero" if end == 0 else literal.replace(".", "_").replace("-", "minus_")
    return (f'Reduction("{name}_to_{word}", {{"{name}": {literal}}}, becomes=lambda p: ...)'
            f"  # what {cls.__name__} becomes at {name}={_fmt(end)}")


def _points(product: Product, name: str, spec: Any, value: float) -> tuple[float, ...] | None:
    """Four values approaching ``value`` from inside the range (toward the default)."""
    x0 = float(product.params()[name])
    span = abs(x0 - value) if x0 != value else max(abs(value), 1.0)
    d = END_STEP * span
    inward = 1.0 if (x0 > value or (x0 == value and spec.low == value)) else -1.0
    if x0 == value and spec.low != value and spec.high != value:
        return None
    pts = tuple(value + inward * k * d for k in (1, 2, 3, 4))
    if any(not spec.contains(p) for p in pts):
        return None
    return pts


def end_table(product: Product | type[Product]) -> list[EndInfo]:
    """Every end of every parameter of ``product`` (a class is taken at its defaults), with
    its status: ``declared`` (a reduction uses it), ``jump`` (:class:`EndJump`),
    ``enumerated`` (checked by ``check --ends``), ``count``, ``open``, ``unreachable`` or
    ``large`` (not priced; see the module docstring). Nothing is priced."""
    if isinstance(product, type):
        product = product()
    cls = type(product)
    used = _used_ends(product)
    jumps = {(j.param, j.side): j.reason for j in getattr(cls, "end_jumps", ())}
    rows: list[EndInfo] = []
    for name, spec in cls.param_specs().items():
        for side in SIDES:
            end = float(spec.low if side == "low" else spec.high)
            is_open = spec.low_open if side == "low" else spec.high_open
            value = end_value(spec, side, float(product.params()[name]))
            suggestion = _suggest(cls, name, side, end)
            if (name, side) in used:
                rows.append(EndInfo(name, side, end, value, "declared", f"Reduction {used[(name, side)]!r}"))
                continue
            if is_open and math.isfinite(end):
                rows.append(EndInfo(name, side, end, value, "open", "", ""))
                continue
            try:
                at_end = product.replace(**{name: value})
            except ParamError as exc:  # a constraint between parameters (_check) refuses the end
                rows.append(EndInfo(name, side, end, value, "unreachable", str(exc), ""))
                continue
            try:
                n_dates = len(at_end.validated_dates())
            except Exception:  # the product's own dates() fails at the end: an error its check reports
                n_dates = 0
            if n_dates > END_MAX_DATES:
                rows.append(EndInfo(name, side, end, value, "large",
                                    f"{n_dates} dates at {name}={_fmt(value)} (at most {END_MAX_DATES} priced)",
                                    suggestion))
            elif (name, side) in jumps:
                rows.append(EndInfo(name, side, end, value, "jump", jumps[(name, side)], ""))
            elif spec.integer:
                rows.append(EndInfo(name, side, end, value, "count", "", suggestion))
            elif _points(product, name, spec, value) is None:
                rows.append(EndInfo(name, side, end, value, "count", "no room to approach the end", suggestion))
            else:
                far = "" if math.isfinite(end) else f"priced at {name}={_fmt(value)}"
                rows.append(EndInfo(name, side, end, value, "enumerated", far, suggestion))
    return rows


def end_checks(product: Product | type[Product], model: Model | None = None) -> list[Check]:
    """The checks ``check --ends`` adds for ``product``: continuity into each enumerated end
    and the sign of the price at each enumerated, count or jump end (see the module
    docstring); an end that cannot be built becomes an error check of its own."""
    if isinstance(product, type):
        product = product()
    cls = type(product)
    label = cls.__name__
    specs = cls.param_specs()
    out: list[Check] = []
    for row in end_table(product):
        if row.status not in ("enumerated", "count", "jump"):
            continue
        case = f"end:{row.param}.{row.side}"
        where = f"{row.param}={_fmt(row.value)}" + ("" if math.isfinite(row.end) else " (far value for inf)")
        try:
            at_end = product.replace(**{row.param: row.value})
            end_model = at_end.scenario() if model is None else model
            wanted = int(at_end.n_assets) if at_end.multi_asset else 1
            if wanted != end_model.n_assets:
                continue  # under the user's model this end has another asset count: nothing to compare
            if row.status == "enumerated":
                pts = _points(product, row.param, specs[row.param], row.value)
                assert pts is not None
                legs = (at_end,) + tuple(product.replace(**{row.param: x}) for x in pts)
                out.append(Check(
                    product=label, case=case, kind="end", legs=legs, model=end_model, weights=END_WEIGHTS,
                    target=0.0, sense="==",
                    target_source=(f"price at {where} equals the quadratic extrapolation of the prices at "
                                   f"{', '.join(_fmt(x) for x in pts[:3])}"),
                    allowance_weights=ERROR_WEIGHTS,
                    allowance_reason=(f"the extrapolation's truncation error, estimated as {END_ALLOWANCE_FACTOR:g} "
                                      f"x the same third difference one step further in (through {_fmt(pts[3])})"),
                    note=f"continuity into {where}"))
            if cls.nonnegative:
                out.append(Check(
                    product=label, case=case + ":sign", kind="end", legs=(at_end,), model=end_model, weights=(1.0,),
                    target=0.0, sense=">=", target_source="non-negative cash flows give a price >= 0",
                    note=f"sign at {where}" + (f"; declared jump: {row.detail}" if row.status == "jump" else "")))
        except Exception as exc:  # the product's own code at the end failed: an error of this end only
            out.append(Check(product=label, case=case, kind="end",
                             error=f"cannot build {label} at {where}: {type(exc).__name__}: {exc}"))
    return out


def ends_of_classes(classes: Sequence[type[Product]]) -> dict[str, list[EndInfo]]:
    """:func:`end_table` of each class by name (a class that cannot be built: no rows)."""
    out: dict[str, list[EndInfo]] = {}
    for cls in classes:
        try:
            out[cls.__name__] = end_table(cls)
        except Exception:  # reported by the class's own checks
            out[cls.__name__] = []
    return out
