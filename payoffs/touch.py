"""One-touch and no-touch options on one barrier, monitored today and on n equally spaced
dates.

Payoff. The barrier H is *touched* when S >= H (up) or S <= H (down) today or on a
monitoring date T/n, ..., T. A *one-touch* pays the cash C if the barrier is touched: on
the date of the first touch (``pay_at_hit = 1``; today if touched today) or at T
(``pay_at_hit = 0``). A *no-touch* pays C at T if the barrier is never touched.

Reference. Under Black-Scholes a one-touch is a knock-out whose vanilla is nothing (a put
struck at 0) and whose rebate is C, priced by recursive quadrature of the log-price density
over the monitoring dates (Andricopoulos, Widdicks, Duck and Newton, "Universal option
valuation using quadrature methods", J. Financial Economics 67(3), 2003, via
:func:`limitcase.references.discrete_barrier_by_quadrature`); a no-touch is
C exp(-rT) minus the one-touch paid at T. The dates given to the quadrature are built from
the terms (maturity and number of dates), not read from ``dates()``.

Checks. Limits: a barrier out of reach (up at inf, down at 0): the one-touch pays nothing,
the no-touch is the bond paying C; a barrier at the spot is touched today (the one-touch
pays C, now or at T; the no-touch nothing). The quadrature reference at the defaults, paid
at T, and on one monitoring date. Relations, path by path: one-touch (paid at T) + no-touch
= the zero-coupon bond paying C; as the barrier moves away a no-touch is worth more and a
one-touch less.
"""

from __future__ import annotations

import math
from typing import ClassVar

import numpy as np

from dataclasses import dataclass

from limitcase import Cashflows, Identity, Monotone, Param, Product, Reduction, Tie, running
from limitcase.reduce import Check, Relation
from limitcase.references import discrete_barrier_by_quadrature
from limitcase.references.schedules import equal_steps

from ._common import bs_inputs, even_dates, own_closed_form
from .vanilla import ZeroCouponBond

SPOT = 100.0
"""The spot of the scenario (the default Black-Scholes model); a barrier here is touched today."""


def _TOUCHED(p) -> str:
    """The tie convention of a barrier: a fixing exactly on it has touched it (above an up
    barrier, below a down one)."""
    return "above" if p.up else "below"


def _out_of_reach(p: "_Touch") -> float:
    return math.inf if p.up else 0.0


def _further(p: "_Touch") -> float:
    return p.barrier + 10.0 if p.up else p.barrier - 10.0


def _bond(p: "_Touch", cash: float | None = None) -> ZeroCouponBond:
    return ZeroCouponBond(cash=p.cash if cash is None else cash, maturity=p.maturity)


def _one_touch_at_expiry(p: "_Touch") -> "_Touch":
    cls = ONE_TOUCH[p.up]
    return cls(barrier=p.barrier, cash=p.cash, maturity=p.maturity, monitoring=p.monitoring, pay_at_hit=0)


def _no_touch(p: "_Touch") -> "_Touch":
    cls = NO_TOUCH[p.up]
    return cls(barrier=p.barrier, cash=p.cash, maturity=p.maturity, monitoring=p.monitoring)


@dataclass(frozen=True)
class MovingAway(Relation):
    """As the barrier moves 10 away from the spot (up for an up barrier, down for a down
    one), a no-touch is worth more and a one-touch less, on every path."""

    def checks(self, product: Product, model) -> list[Check]:
        worth_more = not product.one
        direction = +1 if product.up == worth_more else -1
        name = f"worth_{'more' if worth_more else 'less'}_as_barrier_moves_away"
        return Monotone("barrier", direction, to=_further, pathwise=True, name=name).checks(product, model)


class _Touch(Product):
    abstract = True
    up: ClassVar[bool]
    one: ClassVar[bool]

    cash = Param(1.0, low=0.0, doc="cash amount C")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    monitoring = Param(12, low=1, high=10_000, integer=True, doc="monitoring dates T/n, ..., T (and today)")

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.monitoring)

    def untouched(self, obs) -> np.ndarray:
        """1 while the barrier is not touched: today (column 0), then after each date."""
        s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
        stay = (s < self.barrier) if self.up else (s > self.barrier)
        return running(np.multiply, stay.astype(float))  # np.cumprod over the dates

    def _one_touch_value(self, spot: float, rate: float, dividend: float, vol: float, at_hit: bool) -> float:
        touched_today = spot >= self.barrier if self.up else spot <= self.barrier
        if touched_today:
            return self.cash * (1.0 if at_hit else math.exp(-rate * self.maturity))
        times = equal_steps(self.maturity, self.monitoring)  # the dates, from the terms
        kind = "up-and-out-put" if self.up else "down-and-out-put"
        # a put struck at 0 pays nothing: only the rebate C, paid when the barrier is touched
        return float(discrete_barrier_by_quadrature(
            kind, spot, 0.0, self.barrier, times, self.maturity, rate, dividend, vol,
            rebate=self.cash, rebate_at_hit=at_hit,
        ))

    def reference_source(self) -> str:
        return "recursive quadrature over the monitoring dates"


class _OneTouch(_Touch):
    abstract = True
    one = True
    pay_at_hit = Param(1, low=0, high=1, integer=True, doc="1: paid on the date of the first touch; 0: at T")

    reductions = (
        Reduction(
            "barrier_out_of_reach",
            {"barrier": _out_of_reach},
            becomes=lambda p: _bond(p, 0.0),
            note="H at inf (up) or 0 (down) is never touched: nothing is paid",
        ),
        Reduction(
            "touched_today",
            {"barrier": SPOT, "pay_at_hit": 0},
            model_changes={"spot": SPOT},
            becomes=_bond,
            note="H at the spot is touched today: C paid at T for sure",
        ),
        Reduction(
            "touched_today_paid_now",
            {"barrier": SPOT, "pay_at_hit": 1},
            model_changes={"spot": SPOT},
            becomes=_bond,
            reference_model=lambda model, p: model.replace(rate=0.0),
            note="H at the spot, paid at the touch: C paid today, worth C (the bond priced at zero rate)",
        ),
        own_closed_form(note="quadrature over the 12 monitoring dates, paid at the touch"),
        own_closed_form("closed_form_paid_at_expiry", {"pay_at_hit": 0}, note="the same, paid at T"),
        own_closed_form("closed_form_one_date", {"monitoring": 1, "pay_at_hit": 0},
                        note="one date (and today): C at T if S(T) is past H, a cash digital"),
    )
    relations = (
        Identity(
            "one_touch_plus_no_touch_is_bond",
            lambda p: [(1.0, p.replace(pay_at_hit=0)), (1.0, _no_touch(p)), (-1.0, _bond(p))],
            note="paid at T, exactly one of the one-touch and the no-touch pays C, on every path",
        ),
        MovingAway(),
        Tie("barrier", _TOUCHED),
    )

    def payoff(self, obs):
        untouched = self.untouched(obs)
        if not self.pay_at_hit:
            return self.cash * (1.0 - untouched[:, -1])
        first = -np.diff(untouched, axis=1, prepend=1.0)  # 1 on the first touch: today, then each date
        return Cashflows(self.cash * first, np.concatenate([[0.0], obs.t]))

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        return self._one_touch_value(spot, rate, dividend, vol, bool(self.pay_at_hit))


class _NoTouch(_Touch):
    abstract = True
    one = False

    reductions = (
        Reduction(
            "barrier_out_of_reach",
            {"barrier": _out_of_reach},
            becomes=_bond,
            note="H at inf (up) or 0 (down) is never touched: C at T, the bond",
        ),
        Reduction(
            "touched_today",
            {"barrier": SPOT},
            model_changes={"spot": SPOT},
            becomes=lambda p: _bond(p, 0.0),
            note="H at the spot is touched today: nothing is paid",
        ),
        own_closed_form(note="C exp(-rT) minus the one-touch paid at T, by quadrature over 12 dates"),
        own_closed_form("closed_form_one_date", {"monitoring": 1},
                        note="one date (and today): C at T if S(T) is short of H, a cash digital"),
    )
    relations = (
        Identity(
            "one_touch_plus_no_touch_is_bond",
            lambda p: [(1.0, _one_touch_at_expiry(p)), (1.0, p), (-1.0, _bond(p))],
            note="exactly one of the one-touch (paid at T) and the no-touch pays C, on every path",
        ),
        MovingAway(),
        Tie("barrier", _TOUCHED),
    )

    def payoff(self, obs):
        return self.cash * self.untouched(obs)[:, -1]

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        return self.cash * math.exp(-rate * self.maturity) - self._one_touch_value(spot, rate, dividend, vol, False)


def _up_barrier(default: float) -> Param:
    return Param(default, low=0.0, low_open=True, high=math.inf, doc="barrier above the spot (inf: never touched)")


def _down_barrier(default: float) -> Param:
    return Param(default, low=0.0, doc="barrier below the spot (0: never touched)")


class OneTouchUp(_OneTouch):
    """Pays C on the first date (or today) with S >= H, or at T if ``pay_at_hit`` is 0;
    nothing if S stays below H.

    Limits: H -> inf: nothing. H at the spot: C today (or at T).
    """

    up = True
    barrier = _up_barrier(120.0)


class OneTouchDown(_OneTouch):
    """Pays C on the first date (or today) with S <= H, or at T if ``pay_at_hit`` is 0;
    nothing if S stays above H.

    Limits: H -> 0: nothing. H at the spot: C today (or at T).
    """

    up = False
    barrier = _down_barrier(85.0)


class NoTouchUp(_NoTouch):
    """Pays C at T if S < H today and on every monitoring date.

    Limits: H -> inf: the bond paying C. H at the spot: nothing.
    """

    up = True
    barrier = _up_barrier(120.0)


class NoTouchDown(_NoTouch):
    """Pays C at T if S > H today and on every monitoring date.

    Limits: H -> 0: the bond paying C. H at the spot: nothing.
    """

    up = False
    barrier = _down_barrier(85.0)


ONE_TOUCH: dict[bool, type[_OneTouch]] = {True: OneTouchUp, False: OneTouchDown}
NO_TOUCH: dict[bool, type[_NoTouch]] = {True: NoTouchUp, False: NoTouchDown}
