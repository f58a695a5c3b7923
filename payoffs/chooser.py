"""The simple chooser option: at a choice time t the holder takes the European call or the
European put on the same strike K and expiry T, whichever is worth more then.

By put-call parity at t, call - put = S(t) exp(-q(T-t)) - K exp(-r(T-t)), so the call is
chosen exactly when S(t) exp(-q(T-t)) >= K exp(-r(T-t)): the payoff needs the rate and
the dividend yield (``obs.rate``, ``obs.dividend``), not a pricing formula. Closed form:
M. Rubinstein, "Options for the Undecided", Risk 4(4), 1991, via
:func:`limitcase.references.simple_chooser`.
"""

from __future__ import annotations

import math

import numpy as np

from limitcase import Bound, Param, ParamError, Product, Reduction
from limitcase.references import black_scholes, simple_chooser

from ._common import bs_inputs, own_closed_form
from .vanilla import EuropeanCall, EuropeanPut, Straddle


def _straddle(p: "SimpleChooser") -> Straddle:
    return Straddle(strike=p.strike, maturity=p.maturity)


def _max_call_put(p: "SimpleChooser", model) -> float:
    spot, rate, dividend, vol = bs_inputs(model, p)
    return max(black_scholes(spot, p.strike, p.maturity, rate, dividend, vol, kind) for kind in ("call", "put"))


class SimpleChooser(Product):
    """Pays max(S(T) - K, 0) at T if the call was chosen at t, else max(K - S(T), 0); the
    call is chosen when S(t) exp(-q(T-t)) >= K exp(-r(T-t)) (t = 0: decided on S0).

    Limits: choice at maturity -> the straddle |S(T) - K| (path by path); choice today ->
    the more valuable of the call and the put (path by path: the call for a strike just
    below the forward S0 exp((r-q)T), the put for one just above).
    Relations: max(call, put) <= chooser <= straddle (the straddle path by path).
    """

    strike = Param(100.0, low=0.0, doc="strike of both the call and the put")
    choose_time = Param(0.5, low=0.0, doc="time t of the choice, 0 <= t <= maturity, in years")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    reductions = (
        Reduction(
            "choice_at_maturity",
            {"choose_time": lambda p: p.maturity},
            becomes=_straddle,
            note="t = T: the option in the money is chosen, paying |S(T) - K| on every path",
        ),
        Reduction(
            "choice_today_call",
            {"choose_time": 0.0, "maturity": 0.5, "strike": 101.0},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            note="t = 0, T = 0.5: K = 101 just below the forward 100 exp(0.015) = 101.51 of the "
            "scenario, so the call is chosen, on every path",
        ),
        Reduction(
            "choice_today_put",
            {"choose_time": 0.0, "maturity": 0.5, "strike": 102.0},
            becomes=lambda p: EuropeanPut(strike=p.strike, maturity=p.maturity),
            note="t = 0, T = 0.5: K = 102 just above the forward 101.51, so the put is chosen, on every path",
        ),
        own_closed_form(note="Rubinstein (1991): a call (K, T) plus exp(-q(T-t)) puts expiring at t"),
    )
    relations = (
        Bound(
            "at_most_straddle",
            "<=",
            lambda p, m: _straddle(p).reference(m),
            pathwise_leg=_straddle,
            source="Black-Scholes straddle (the chooser pays one of its two legs)",
        ),
        Bound(
            "at_least_better_of_call_and_put",
            ">=",
            _max_call_put,
            source="max of the Black-Scholes call and put (choosing later is worth at least choosing today)",
        ),
    )

    def _check(self) -> None:
        if self.choose_time > self.maturity:
            raise ParamError(
                f"choose_time={self.choose_time!r} is after maturity={self.maturity!r} for "
                f"{type(self).__name__}; the choice must be made by expiry: pass choose_time <= maturity"
            )

    def dates(self) -> np.ndarray:
        if 0.0 < self.choose_time < self.maturity:
            return np.array([self.choose_time, self.maturity])
        return np.array([self.maturity])

    def payoff(self, obs):
        s_choice = obs.s[:, 0] if self.choose_time > 0.0 else obs.s0
        left = self.maturity - self.choose_time
        call = s_choice * math.exp(-obs.dividend * left) >= self.strike * math.exp(-obs.rate * left)
        s_end = obs.s[:, -1]
        return np.where(call, np.maximum(s_end - self.strike, 0.0), np.maximum(self.strike - s_end, 0.0))

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        return simple_chooser(spot, self.strike, self.choose_time, self.maturity, rate, dividend, vol)

    def reference_source(self) -> str:
        return "Rubinstein simple chooser"
