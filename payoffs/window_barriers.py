"""Window (partial-time) barrier options: the barrier is watched only inside a window
[a, b] of the option's life, on the monitoring dates T/n, ..., T that fall in it (and today
if a = 0), with a cash rebate at T.

Payoff. With vanilla = max(S(T) - K, 0) (call) or max(K - S(T), 0) (put), a knock-out pays
the vanilla at T unless the barrier is touched (S >= H up, S <= H down) on a monitoring
date in the window, and then the rebate R at T; a knock-in pays the vanilla if it is
touched on such a date, else R at T. Dates are compared with the window ends to within
1e-12 years.

Reference. Under Black-Scholes the price is the recursive quadrature of the log-price
density over the monitoring dates in the window (Andricopoulos, Widdicks, Duck and Newton,
"Universal option valuation using quadrature methods", J. Financial Economics 67(3), 2003,
via :func:`limitcase.references.discrete_barrier_by_quadrature`): a date outside the
window is simply not a monitoring date. The dates are built from the terms (maturity,
number of dates, window), not read from ``dates()``.

Checks. Limits: a window covering the whole life is the single-barrier option of
:mod:`limitcase_payoffs.barriers` on the same dates, path by path; a window holding no date
gives the vanilla (knock-out) or the rebate (knock-in); a barrier out of reach likewise; a
barrier at the spot with the window open today knocks today. The quadrature reference at
the defaults, with a rebate, and with the window on the last date only (a European payoff).
Relations, path by path: in + out = vanilla; without a rebate, at most the vanilla; a
knock-out is worth less, a knock-in more, as the window closes later.
"""

from __future__ import annotations

import math
from typing import ClassVar

import numpy as np

from limitcase import Bound, Identity, Monotone, Param, ParamError, Product, Reduction, Tie
from limitcase.references import black_scholes, discrete_barrier_by_quadrature
from limitcase.references.schedules import equal_steps

from ._common import bs_inputs, even_dates, own_closed_form
from .barriers import DownAndInPut, DownAndOutPut, UpAndInCall, UpAndOutCall
from .vanilla import EuropeanCall, EuropeanPut, ZeroCouponBond

SPOT = 100.0
"""The spot of the scenario (the default Black-Scholes model); a barrier here is touched today."""

REBATE = 3.0
"""The rebate of the checks that pay one."""

EPS = 1e-12
"""Tolerance, in years, of the comparison of a date with the window ends."""

_FULL = {(True, True): UpAndOutCall, (True, False): UpAndInCall,
         (False, True): DownAndOutPut, (False, False): DownAndInPut}


def _TOUCHED(p) -> str:
    """The tie convention of a barrier: a fixing exactly on it has touched it (above an up
    barrier, below a down one)."""
    return "above" if p.up else "below"


def _vanilla(p: "_Window") -> Product:
    return (EuropeanCall if p.up else EuropeanPut)(strike=p.strike, maturity=p.maturity)


def _full_barrier(p: "_Window") -> Product:
    cls = _FULL[(p.up, p.out)]
    values = {"strike": p.strike, "barrier": p.barrier, "rebate": p.rebate, "maturity": p.maturity,
              "monitoring": p.monitoring}
    if p.out:
        values["rebate_at_hit"] = 0
    return cls(**values)


def _sibling(p: "_Window", **changes) -> "_Window":
    cls = FAMILY[(p.up, not p.out)]
    values = {k: getattr(p, k) for k in ("strike", "barrier", "rebate", "maturity", "monitoring",
                                         "window_start", "window_end")}
    values.update(changes)
    return cls(**values)


def _out_of_reach(p: "_Window") -> float:
    return math.inf if p.up else 0.0


class _Window(Product):
    abstract = True
    up: ClassVar[bool]  # up-barrier call, or down-barrier put
    out: ClassVar[bool]

    strike = Param(100.0, low=0.0, doc="strike")
    rebate = Param(0.0, low=0.0, doc="cash paid at T when the vanilla is not paid")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    monitoring = Param(12, low=1, high=10_000, integer=True, doc="monitoring dates T/n, ..., T (and today)")
    window_start = Param(0.25, low=0.0, doc="start a of the window, in years")
    window_end = Param(0.75, low=0.0, doc="end b of the window, in years (a <= b)")

    def _check(self) -> None:
        if self.window_end < self.window_start:
            raise ParamError(
                f"window_end={self.window_end!r} is before window_start={self.window_start!r} for "
                f"{type(self).__name__}; pass window_start <= window_end"
            )

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.monitoring)

    def payoff(self, obs):
        s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
        t = np.concatenate([[0.0], obs.t])
        watched = (t >= self.window_start - EPS) & (t <= self.window_end + EPS)
        past = (s >= self.barrier) if self.up else (s <= self.barrier)
        alive = ~np.any(past & watched, axis=1)
        s_end = obs.s[:, -1]
        vanilla = np.maximum(s_end - self.strike, 0.0) if self.up else np.maximum(self.strike - s_end, 0.0)
        if self.out:
            return np.where(alive, vanilla, self.rebate)
        return np.where(alive, self.rebate, vanilla)

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        option = "call" if self.up else "put"
        kind = f"{'up' if self.up else 'down'}-and-{'out' if self.out else 'in'}-{option}"
        today = self.window_start <= EPS and (spot >= self.barrier if self.up else spot <= self.barrier)
        if today:
            if self.out:
                return self.rebate * math.exp(-rate * self.maturity)
            return black_scholes(spot, self.strike, self.maturity, rate, dividend, vol, option)
        # the monitoring dates from the terms, kept where they fall in the window
        times = equal_steps(self.maturity, self.monitoring)
        times = times[(times >= self.window_start - EPS) & (times <= self.window_end + EPS)]
        return discrete_barrier_by_quadrature(
            kind, spot, self.strike, self.barrier, times, self.maturity, rate, dividend, vol,
            rebate=self.rebate, rebate_at_hit=False,
        )

    def reference_source(self) -> str:
        return "recursive quadrature over the monitoring dates in the window"


_WHOLE_LIFE = Identity(
    "whole_life_window_is_full_barrier",
    lambda p: [
        (1.0, p.replace(window_start=0.0, window_end=p.maturity, rebate=REBATE)),
        (-1.0, _full_barrier(p.replace(window_start=0.0, window_end=p.maturity, rebate=REBATE))),
    ],
    note="a window [0, T] watches today and every date: the single-barrier option, rebate 3 at T, "
    "on every path",
)
_IN_PLUS_OUT = Identity(
    "in_plus_out_is_vanilla",
    lambda p: [(1.0, p.replace(rebate=0.0)), (1.0, _sibling(p, rebate=0.0)), (-1.0, _vanilla(p))],
    note="without rebates, knock-in + knock-out = vanilla on every path",
)
_BELOW_VANILLA = Bound(
    "at_most_vanilla",
    "<=",
    lambda p, m: _vanilla(p).reference(m),
    pathwise_leg=_vanilla,
    source="the vanilla's Black-Scholes price (without a rebate the option pays the vanilla or nothing)",
)
_CLOSED_FORMS = (
    own_closed_form(note="quadrature over the dates in the window [0.25, 0.75]"),
    own_closed_form("closed_form_rebate", {"rebate": REBATE}, note="the same with a rebate of 3 at T"),
    own_closed_form(
        "closed_form_last_date_only",
        {"window_start": lambda p: p.maturity, "window_end": lambda p: p.maturity, "rebate": REBATE},
        note="the window holds the last date only: a European payoff on S(T)",
    ),
)


def _empty_window(value):
    return Reduction(
        "empty_window",
        {"window_start": lambda p: 0.3 * p.maturity / p.monitoring,
         "window_end": lambda p: 0.6 * p.maturity / p.monitoring, "rebate": REBATE},
        becomes=value,
        note="a window inside the first monitoring interval, [0.3, 0.6] T/n, holds no date: the barrier is never "
             "watched",
    )


def _far(value):
    return Reduction(
        "barrier_out_of_reach",
        {"barrier": _out_of_reach, "rebate": REBATE},
        becomes=value,
        note="H at inf (up) or 0 (down) is never touched",
    )


def _today(value):
    return Reduction(
        "touched_today",
        {"barrier": SPOT, "window_start": 0.0, "rebate": REBATE},
        model_changes={"spot": SPOT},
        becomes=value,
        note="H at the spot, the window open today: touched today",
    )


def _rebate_bond(p: "_Window") -> ZeroCouponBond:
    return ZeroCouponBond(cash=REBATE, maturity=p.maturity)


class _WindowOut(_Window):
    abstract = True
    out = True
    reductions = (_empty_window(_vanilla), _far(_vanilla), _today(_rebate_bond)) + _CLOSED_FORMS
    relations = (
        _WHOLE_LIFE,
        _IN_PLUS_OUT,
        _BELOW_VANILLA,
        Monotone("window_end", -1, to=lambda p: p.maturity, pathwise=True, name="worth_less_as_window_closes_later"),
        Tie("barrier", _TOUCHED),
    )


class _WindowIn(_Window):
    abstract = True
    out = False
    reductions = (_empty_window(_rebate_bond), _far(_rebate_bond), _today(_vanilla)) + _CLOSED_FORMS
    relations = (
        _WHOLE_LIFE,
        _IN_PLUS_OUT,
        _BELOW_VANILLA,
        Monotone("window_end", +1, to=lambda p: p.maturity, pathwise=True, name="worth_more_as_window_closes_later"),
        Tie("barrier", _TOUCHED),
    )


def _up_barrier(default: float) -> Param:
    return Param(default, low=0.0, low_open=True, high=math.inf, doc="barrier above the spot (inf: never touched)")


def _down_barrier(default: float) -> Param:
    return Param(default, low=0.0, doc="barrier below the spot (0: never touched)")


class WindowUpAndOutCall(_WindowOut):
    """Pays max(S(T) - K, 0) at T unless S >= H on a monitoring date in [a, b]; then R at T.

    Limits: [a, b] = [0, T]: the up-and-out call; no date in [a, b] or H -> inf: the call.
    """

    up = True
    barrier = _up_barrier(125.0)


class WindowDownAndOutPut(_WindowOut):
    """Pays max(K - S(T), 0) at T unless S <= H on a monitoring date in [a, b]; then R at T.

    Limits: [a, b] = [0, T]: the down-and-out put; no date in [a, b] or H -> 0: the put.
    """

    up = False
    barrier = _down_barrier(85.0)


class WindowUpAndInCall(_WindowIn):
    """Pays max(S(T) - K, 0) at T if S >= H on a monitoring date in [a, b]; else R at T.

    Limits: [a, b] = [0, T]: the up-and-in call; no date in [a, b] or H -> inf: R at T.
    """

    up = True
    barrier = _up_barrier(125.0)


class WindowDownAndInPut(_WindowIn):
    """Pays max(K - S(T), 0) at T if S <= H on a monitoring date in [a, b]; else R at T.

    Limits: [a, b] = [0, T]: the down-and-in put; no date in [a, b] or H -> 0: R at T.
    """

    up = False
    barrier = _down_barrier(85.0)


FAMILY: dict[tuple[bool, bool], type[_Window]] = {
    (c.up, c.out): c for c in (WindowUpAndOutCall, WindowDownAndOutPut, WindowUpAndInCall, WindowDownAndInPut)
}
