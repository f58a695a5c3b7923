"""Levels hit exactly: a product's tie convention, checked on paths that sit on the level.

Where a payoff compares a fixing with a level (a barrier, a digital's strike, a corridor's
edge), ``>`` and ``>=`` differ only when a fixing lands exactly on the level, which simulated
paths never do. A product states, per level, on which side a fixing exactly on it counts:

``Tie("barrier", "below")``
    a fixing equal to the barrier counts as below it (a down barrier touched is hit);
``Tie("strike", "below")``
    a digital call paying when ``S(T) > K`` counts a fixing on ``K`` as below it (unpaid).

The side may be a callable of the product (``lambda p: "above" if p.up else "below"``) and
the level a callable ``(product, spot) -> level`` when it is not the parameter's value (a
trigger stated as a fraction of the spot). A base class's ties are inherited with its
relations.

The check (:class:`Tie` is a relation; its case is named ``tie_at_<param>``) prices nothing
by Monte Carlo: it takes the deterministic edge paths of the level
(:func:`limitcase.edges.edge_paths`, the mutation tool's paths: flat on the level, touching
it on one date and ending elsewhere, ...), and on every path that has a fixing exactly on
the level compares what the product pays there with what it pays when those fixings are
moved a hair (:data:`NUDGE`, relative) to the declared side. They must agree on every such
path; paths on which the two sides pay differently are the ones that decide, and a product
on which no edge path decides is reported as a skip (nothing was tested). ``>`` written for
``>=`` pays the other side's amount on the deciding paths and fails. A failure is outright
(like a broken path-by-path identity), inside Holm's family as a p-value of 0.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any, Callable

import numpy as np

from .checks import Check
from .edges import edge_observed, observed_on, product_levels
from .errors import DeclarationError
from .models.base import Model
from .product import Cashflows, Product
from .reduce import Relation, require_param

__all__ = ["Tie", "NUDGE", "tie_result"]

NUDGE = 1e-9
"""How far (relative) a fixing on a level is moved to stand for "just above" or "just below"
it: far below any price resolution a payoff's continuous part could show (a call's payment
moves by 1e-7 on a level of 100), far above the last bit of a double (2e-16)."""

_TOL = 1e-6  # relative (and absolute on the level's scale) tolerance on payments compared
SIDES = ("above", "below")


@dataclass(frozen=True)
class Tie(Relation):
    """A fixing exactly on the level of parameter ``param`` counts as ``side`` of it
    (``"above"`` or ``"below"``, or a callable of the product giving one). ``level``:
    ``(product, spot) -> level`` when the level is not the parameter's value."""

    param: str
    side: Any
    level: Callable[[Product, float], float] | None = None
    name: str = ""
    note: str = ""

    @property
    def case_name(self) -> str:
        return self.name or f"tie_at_{self.param}"

    def validate_on(self, cls: type) -> None:
        require_param(cls, self.describe(), self.param)
        if not callable(self.side) and self.side not in SIDES:
            raise DeclarationError(
                f"{cls.__name__}: {self.describe()} has side={self.side!r}; use 'above' or 'below' (the side "
                "a fixing exactly on the level counts as), or a callable of the product giving one"
            )

    def side_of(self, product: Product) -> str:
        side = self.side(product) if callable(self.side) else self.side
        if side not in SIDES:
            raise DeclarationError(f"{type(product).__name__}: {self.describe()} gave side={side!r}; "
                                   "expected 'above' or 'below'")
        return side

    def checks(self, product: Product, model: Model) -> list[Check]:
        side = self.side_of(product)
        name = type(product).__name__
        if product.multi_asset:
            return [Check(product=name, case=self.case_name, kind="relation", legs=(product,),
                          skip="tie checks pin one asset's fixings; this product reads several")]

        def direct(legs: tuple[Product, ...]) -> tuple[bool | None, str, int]:
            return tie_result(legs[0], model, self, side)

        return [Check(product=name, case=self.case_name, kind="relation", legs=(product,), sense="==",
                      target_source=f"a fixing on {self.param} pays as just {side} it",
                      note=self.note or f"a fixing exactly on {self.param} counts as {side} it",
                      direct=direct)]


def _pays(product: Product, obs: Any) -> tuple[np.ndarray, np.ndarray | None]:
    """Per path, what the product pays (amounts, and times for cash flows) on ``obs``."""
    if product.early_exercise:
        return np.asarray(product.exercise_value(obs), dtype=float).reshape(obs.paths, -1), None
    out = product.payoff(obs)
    if isinstance(out, Cashflows):
        amount = np.asarray(out.amount, dtype=float).reshape(obs.paths, -1)
        time = np.broadcast_to(np.asarray(out.time, dtype=float), np.asarray(out.amount).shape)
        return amount, np.asarray(time, dtype=float).reshape(obs.paths, -1)
    return np.asarray(out, dtype=float).reshape(obs.paths, -1), None


def _same(a: tuple[np.ndarray, Any], b: tuple[np.ndarray, Any], scale: float) -> np.ndarray:
    ok = np.isclose(a[0], b[0], rtol=_TOL, atol=_TOL * scale).all(axis=1)
    if a[1] is not None and b[1] is not None:
        ok &= np.isclose(a[1], b[1], rtol=0.0, atol=1e-12).all(axis=1)
    return ok


def tie_result(product: Product, model: Model, tie: Tie, side: str, seed: int = 0) -> tuple[bool | None, str, int]:
    """``(ok, message, paths)`` of a tie check (``ok`` None: no edge path decides, a skip)."""
    spot = float(np.asarray(model.initial(), dtype=float)[0])
    level = float(tie.level(product, spot)) if tie.level is not None else float(getattr(product, tie.param))
    what = f"{tie.param}={level:.6g}"
    if not (math.isfinite(level) and level > 0):
        return None, f"{what}: no finite positive level to pin a fixing on", 0
    marks = sorted({*product_levels(product, np.array([spot])), 0.5 * spot, 2.0 * spot})
    marks += [0.5 * (a + b) for a, b in zip(marks, marks[1:])]  # ends between two levels (inside a corridor)
    others = [x for x in marks if abs(x - level) > 1e-12 * level]
    exact = edge_observed(product, model, seed, levels=[level, *others])
    on = (exact.s == level).any(axis=1)
    if not on.any():
        return None, f"{what}: no edge path has a fixing on the level", 0
    s = np.asarray(exact.s)[on]
    step = {"above": level * (1.0 + NUDGE), "below": level * (1.0 - NUDGE)}
    flows = {}
    for key, path in (("exact", s), ("above", np.where(s == level, step["above"], s)),
                      ("below", np.where(s == level, step["below"], s))):
        flows[key] = _pays(product, observed_on(product, model, path, seed))
    scale = max(1.0, level)
    deciding = ~_same(flows["above"], flows["below"], scale)
    n = int(on.sum())
    if not deciding.any():
        return None, (f"{what}: on none of the {n} edge paths with a fixing on the level does the side change "
                      "the payment; nothing to decide here"), n
    agree = _same(flows["exact"], flows[side], scale)
    bad = deciding & ~agree
    if bad.any():
        other = "below" if side == "above" else "above"
        j = int(np.flatnonzero(bad)[0])
        return False, (f"a fixing exactly on {what} is treated as {other} it on {int(bad.sum())} of "
                       f"{int(deciding.sum())} edge paths where the side decides (declared: it counts as {side}); "
                       f"e.g. edge path {j} pays {flows['exact'][0][j].sum():.6g}, as just {side} it pays "
                       f"{flows[side][0][j].sum():.6g} (a comparison with the wrong strictness, > for >=?)"), n
    return True, (f"a fixing on {what} pays as just {side} it on all {int(deciding.sum())} deciding edge paths "
                  f"(of {n} with a fixing on the level)"), n
