"""Forward-start options and cliquets: strikes set on a future date from the price then.

A forward-start option's strike is ``alpha S(t0)``, fixed at the start date ``t0``; a
cliquet is a chain of such options on period returns, each clipped locally and their sum
clipped globally. Both are scale-free: what they pay per unit of spot does not depend on
today's price.

How the limits are checked. A start date of today makes the forward-start option a
European option struck at ``alpha S0``; a start date at expiry with ``alpha = 1`` makes it
worthless; ``alpha = 0`` makes the call the asset itself. Under Black-Scholes the option has
Rubinstein's closed form. A cliquet with one period and only a local floor at 0 is the
at-the-money forward-start call started today; without its global clips it is a strip of
call spreads on independent period returns, which has a closed form.

The reductions that need a spot level (a European strike ``alpha S0``, a cliquet notional
equal to ``S0``) pin the model's spot to :data:`SPOT` for that case.
"""

from __future__ import annotations

import math

import numpy as np

from limitcase import Convex, Monotone, Param, ParamError, Product, Reduction
from limitcase.references import black_scholes, forward_start
from limitcase.references.cliquets import cliquet_by_convolution

from limitcase.references.schedules import equal_steps

from ._common import bs_inputs, even_dates, own_closed_form, period_starts
from .vanilla import EuropeanCall, EuropeanPut, PrepaidForward, ZeroCouponBond

SPOT = 100.0
"""Spot level the reductions to fixed-strike products pin the model to."""


def _nothing(p) -> ZeroCouponBond:
    return ZeroCouponBond(cash=0.0, maturity=p.maturity)


class _ForwardStart(Product):
    """Shared terms: strike ``alpha S(start)`` set at ``start``, expiry ``maturity``."""

    abstract = True
    alpha = Param(1.0, low=0.0, doc="strike as a fraction of the price at the start date")
    start = Param(0.25, low=0.0, doc="start (strike-setting) date in years; 0 sets the strike today")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    def _check(self) -> None:
        if self.start > self.maturity:
            raise ParamError(
                f"start={self.start!r} is after maturity={self.maturity!r} for {type(self).__name__}; "
                "the strike must be set no later than expiry: pass 0 <= start <= maturity"
            )

    def dates(self) -> np.ndarray:
        return np.unique([t for t in (self.start, self.maturity) if t > 0])

    def _reference(self, model, kind: str) -> float:
        spot, rate, dividend, vol = bs_inputs(model, self)
        return forward_start(spot, self.alpha, self.start, self.maturity, rate, dividend, vol, kind)

    def reference_source(self) -> str:
        return "forward_start (Rubinstein)"


def _forward_start_reductions(european, zero_alpha) -> tuple:
    return (
        own_closed_form(note="Rubinstein: S0 exp(-q t0) times the Black-Scholes price of spot 1, strike alpha"),
        Reduction(
            "start_today",
            {"start": 0.0},
            model_changes={"spot": SPOT},
            becomes=lambda p: european(strike=p.alpha * SPOT, maturity=p.maturity),
            note=f"start 0: the strike alpha S0 is known today, the European option (spot pinned at {SPOT:g})",
        ),
        Reduction(
            "start_at_expiry",
            {"start": lambda p: p.maturity, "alpha": 1.0},
            becomes=_nothing,
            note="strike S(T) set at expiry: the option pays nothing",
        ),
        zero_alpha,
    )


class ForwardStartCall(_ForwardStart):
    """Pays max(S(T) - alpha S(t0), 0) at T, the strike set at the start date t0.

    Exact price (Rubinstein 1990): ``S0 exp(-q t0) BS_call(1, alpha, T - t0)``.

    Limits: its own closed form; start today -> the European call struck at alpha S0;
    start at expiry with alpha = 1 -> pays nothing; alpha = 0 -> the prepaid forward.
    Relations: decreasing and convex in alpha (path by path).
    """

    reductions = _forward_start_reductions(
        EuropeanCall,
        Reduction(
            "zero_alpha", {"alpha": 0.0}, becomes=lambda p: PrepaidForward(maturity=p.maturity),
            note="alpha 0: pays S(T) on every path, the prepaid forward",
        ),
    )
    relations = (
        Monotone("alpha", -1, to=lambda p: p.alpha + 0.1, pathwise=True),
        Convex("alpha", step=0.1, pathwise=True),
    )

    def payoff(self, obs):
        strike = self.alpha * (obs.s[:, 0] if self.start > 0 else obs.s0)
        return np.maximum(obs.s[:, -1] - strike, 0.0)

    def reference(self, model):
        return self._reference(model, "call")


class ForwardStartPut(_ForwardStart):
    """Pays max(alpha S(t0) - S(T), 0) at T, the strike set at the start date t0.

    Exact price (Rubinstein 1990): ``S0 exp(-q t0) BS_put(1, alpha, T - t0)``.

    Limits: its own closed form; start today -> the European put struck at alpha S0;
    start at expiry with alpha = 1 -> pays nothing; alpha = 0 -> pays nothing.
    Relations: increasing and convex in alpha (path by path).
    """

    reductions = _forward_start_reductions(
        EuropeanPut,
        Reduction("zero_alpha", {"alpha": 0.0}, becomes=_nothing, note="alpha 0: max(-S(T), 0) = 0 on every path"),
    )
    relations = (
        Monotone("alpha", +1, to=lambda p: p.alpha + 0.1, pathwise=True),
        Convex("alpha", step=0.1, pathwise=True),
    )

    def payoff(self, obs):
        strike = self.alpha * (obs.s[:, 0] if self.start > 0 else obs.s0)
        return np.maximum(strike - obs.s[:, -1], 0.0)

    def reference(self, model):
        return self._reference(model, "put")


class Cliquet(Product):
    """Pays N clip(sum_i clip(R_i, lf, lc), gf, gc) at T, ``R_i = S(t_i)/S(t_{i-1}) - 1`` the
    return over period i (``t_0 = 0``, n equal periods ending at T), ``clip(x, a, b) =
    min(max(x, a), b)``: each return is floored and capped locally (lf, lc), their sum
    globally (gf, gc).

    Closed form where the global clip cannot bind (``gf <= n max(lf, -1)`` and
    ``gc >= n lc``): under Black-Scholes the period returns are independent and
    ``clip(R, f, c) = f + (1 + R - (1 + f))^+ - (1 + R - (1 + c))^+``, so

        price = N exp(-rT) sum_i [f + exp(r dt_i) (BS_call(1, 1 + f, dt_i) - BS_call(1, 1 + c, dt_i))],

    ``f = max(lf, -1)``, a strip of call spreads on the returns (forward-start options,
    Rubinstein 1990).

    Where a global clip can bind, the same independence makes the sum of the clipped
    returns an n-fold convolution of one clipped return's law, priced exactly on a lattice
    by FFT (:func:`limitcase.references.cliquets.cliquet_by_convolution`, 1e-9 per unit of N).

    Limits: its own price at the defaults (global floor binding, by convolution); without
    the global floor -> the closed form; local floor 0 -> a global floor
    at or below 0 never binds (path by path); one period with a local floor at 0 and
    nothing else, N = S0 -> the at-the-money forward-start call started today (path by
    path); no clips at all -> N times the sum of the returns (closed form).
    Relations: increasing in each floor and cap (path by path).
    """

    nonnegative = False  # a negative local and global floor lets the sum be negative
    notional = Param(100.0, low=0.0, doc="amount N the clipped sum of returns is paid on")
    maturity = Param(1.0, low=0.0, low_open=True, doc="end of the last period and payment date, in years")
    periods = Param(12, low=1, high=10_000, integer=True, doc="number of equal periods")
    local_floor = Param(-0.03, doc="floor on each period return (-inf: none)")
    local_cap = Param(0.03, doc="cap on each period return (inf: none)")
    global_floor = Param(0.0, doc="floor on the sum of the clipped returns (-inf: none)")
    global_cap = Param(math.inf, doc="cap on the sum of the clipped returns (inf: none)")

    reductions = (
        own_closed_form(note="the law of the sum of clipped returns by n-fold convolution (FFT), global floor binding"),
        own_closed_form("no_global_floor", {"global_floor": -math.inf}, note="a strip of call spreads on the returns"),
        Reduction(
            "local_floor_zero",
            {"local_floor": 0.0, "global_floor": lambda p: min(p.global_floor, 0.0), "global_cap": math.inf},
            becomes=lambda p: p.replace(global_floor=-math.inf),
            note="local floors at 0: every coupon is >= 0, a global floor <= 0 never binds",
        ),
        Reduction(
            "one_period",
            {
                "periods": 1, "local_floor": 0.0, "local_cap": math.inf,
                "global_floor": -math.inf, "global_cap": math.inf, "notional": SPOT,
            },
            model_changes={"spot": SPOT},
            becomes=lambda p: ForwardStartCall(alpha=1.0, start=0.0, maturity=p.maturity),
            note=f"one period floored at 0, N = S0: S0 max(S(T)/S0 - 1, 0) = max(S(T) - S0, 0) (spot pinned at {SPOT:g})",
        ),
        own_closed_form(
            "sum_of_returns",
            {"local_floor": -math.inf, "local_cap": math.inf, "global_floor": -math.inf, "global_cap": math.inf},
            note="no clips: N sum_i (S(t_i)/S(t_i-1) - 1), worth N exp(-rT) sum_i (exp((r - q) dt_i) - 1)",
        ),
    )
    relations = (
        Monotone("local_floor", +1, to=lambda p: p.local_floor + 0.02, pathwise=True),
        Monotone("local_cap", +1, to=lambda p: p.local_cap + 0.02, pathwise=True),
        Monotone("global_floor", +1, to=lambda p: p.global_floor + 0.05, pathwise=True),
        Monotone("global_cap", +1, to=0.2, pathwise=True),
    )

    def _check(self) -> None:
        for low, high in (("local_floor", "local_cap"), ("global_floor", "global_cap")):
            if getattr(self, low) > getattr(self, high):
                raise ParamError(
                    f"{low}={getattr(self, low)!r} is above {high}={getattr(self, high)!r} for Cliquet; "
                    f"a floor must not exceed its cap: pass {low} <= {high}"
                )

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.periods)

    def payoff(self, obs):
        coupons = np.clip(obs.s / period_starts(obs) - 1.0, self.local_floor, self.local_cap)
        return self.notional * np.clip(coupons.sum(axis=1), self.global_floor, self.global_cap)

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        floor, cap = max(self.local_floor, -1.0), self.local_cap
        n = self.periods
        if self.global_floor > n * floor or self.global_cap < n * cap:  # a global clip can bind
            return cliquet_by_convolution(self.notional, self.maturity, n, rate, dividend, vol, self.local_floor,
                                          self.local_cap, self.global_floor, self.global_cap)
        dt = np.diff(equal_steps(self.maturity, self.periods), prepend=0.0)  # from the terms

        def calls(strike: float) -> np.ndarray:  # E[max(S(t_i)/S(t_i-1) - strike, 0)] per period
            if strike == math.inf:
                return np.zeros_like(dt)
            return np.exp(rate * dt) * black_scholes(1.0, strike, dt, rate, dividend, vol, "call")

        coupons = floor + calls(1.0 + floor) - calls(1.0 + cap)
        return self.notional * math.exp(-rate * self.maturity) * float(np.sum(coupons))

    def reference_source(self) -> str:
        return "strip of call spreads on the period returns, or their convolution where a global clip binds"
