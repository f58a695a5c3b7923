"""The base cases most reductions end on: prepaid forward, forward contract, zero-coupon
bond, European call and put, straddle.

Each states its payoff, its reference price and the limits and relations it must meet.
The forward, the forward contract and the bond have model-free references; the call, put
and straddle have the Black-Scholes closed form under Black-Scholes and the Fourier price
of Lewis (2001) under any model that states the characteristic function of its log-price
(Heston, Merton, a user's model). The relations: put-call parity path by path, the model-free bounds
``0 <= call <= S0 exp(-qT)`` and ``put <= K exp(-rT)``, monotone and convex in the strike.
"""

from __future__ import annotations

import math

import numpy as np
import sympy as sp

from limitcase import Bound, Convex, Identity, Monotone, Param, Product, Reduction
from limitcase.symbolic import formula_symbols
from limitcase.references import prepaid_forward

from ._common import market, own_closed_form, terminal_price, terminal_source


class PrepaidForward(Product):
    """Pays the asset S(T) at T. Worth S0 exp(-q T) today, whatever the model.

    Limits: none; its own check is the martingale property of the discounted asset.
    """

    maturity = Param(1.0, low=0.0, low_open=True, doc="delivery date in years")

    reductions = (own_closed_form(note="E[exp(-rT) S(T)] = S0 exp(-qT): the discounted asset is a martingale"),)

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return obs.s[:, -1]

    def reference(self, model):
        spot, _, dividend = market(model)
        return prepaid_forward(spot, self.maturity, dividend)

    def reference_source(self, model=None) -> str:
        return "S0 exp(-qT)"


class ZeroCouponBond(Product):
    """Pays the cash amount C at T, on every path. Worth C exp(-rT).

    Limits: none; its own check is the engine's discounting.
    """

    cash = Param(1.0, low=0.0, doc="amount paid at maturity")
    maturity = Param(1.0, low=0.0, low_open=True, doc="payment date in years")

    reductions = (
        own_closed_form(
            note="a sure amount C at T is worth C exp(-rT)",
        ),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.full(obs.paths, self.cash)

    def reference(self, model):
        return self.cash * math.exp(-model.short_rate * self.maturity)

    def reference_source(self, model=None) -> str:
        return "C exp(-rT)"


class ForwardContract(Product):
    """Pays S(T) - K at T (negative when S(T) < K). Worth S0 exp(-qT) - K exp(-rT).

    Limits: strike 0 -> the prepaid forward.
    """

    nonnegative = False
    strike = Param(100.0, low=0.0, doc="delivery price")
    maturity = Param(1.0, low=0.0, low_open=True, doc="delivery date in years")

    reductions = (
        Reduction(
            "zero_strike",
            {"strike": 0.0},
            becomes=lambda p: PrepaidForward(maturity=p.maturity),
            note="strike 0: pays S(T) on every path, the prepaid forward",
        ),
        own_closed_form(note="S0 exp(-qT) - K exp(-rT), whatever the model"),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return obs.s[:, -1] - self.strike

    def reference(self, model):
        spot, rate, dividend = market(model)
        return prepaid_forward(spot, self.maturity, dividend) - self.strike * math.exp(-rate * self.maturity)

    def reference_source(self, model=None) -> str:
        return "S0 exp(-qT) - K exp(-rT)"


def _put(p: Product) -> "EuropeanPut":
    return EuropeanPut(strike=p.strike, maturity=p.maturity)


def _call(p: Product) -> "EuropeanCall":
    return EuropeanCall(strike=p.strike, maturity=p.maturity)


class EuropeanCall(Product):
    """Pays max(S(T) - K, 0) at T.

    Limits: strike 0 -> the prepaid forward (pays S(T)).
    Relations: call - put = forward (path by path); S0 exp(-qT) - K exp(-rT) <= call <=
    S0 exp(-qT) (path by path: the forward below, the asset above); decreasing and convex
    in the strike (path by path).
    """

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    reductions = (
        Reduction(
            "zero_strike",
            {"strike": 0.0},
            becomes=lambda p: PrepaidForward(maturity=p.maturity),
            note="strike 0: the call pays S(T) on every path, the prepaid forward",
        ),
        own_closed_form(note="the call's reference: Black-Scholes, or Fourier from the model's characteristic function"),
    )
    relations = (
        Identity(
            "put_call_parity",
            lambda p: [(1.0, p), (-1.0, _put(p)), (-1.0, ForwardContract(strike=p.strike, maturity=p.maturity))],
            note="max(S-K, 0) - max(K-S, 0) = S - K on every path",
        ),
        Bound(
            "below_prepaid_forward",
            "<=",
            lambda p, m: prepaid_forward(market(m)[0], p.maturity, market(m)[2]),
            pathwise_leg=lambda p: PrepaidForward(maturity=p.maturity),
            source="S0 exp(-qT) (the call never pays more than the asset)",
        ),
        Bound(
            "above_forward",
            ">=",
            lambda p, m: ForwardContract(strike=p.strike, maturity=p.maturity).reference(m),
            pathwise_leg=lambda p: ForwardContract(strike=p.strike, maturity=p.maturity),
            source="S0 exp(-qT) - K exp(-rT) (the call pays at least S - K)",
        ),
        Monotone("strike", -1, to=lambda p: p.strike + 10.0, pathwise=True),
        Convex("strike", step=10.0, pathwise=True),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)


    def formula(self):
        x = formula_symbols(self)
        return sp.Max(x.S_T - x.strike, 0)

    def reference(self, model):
        return terminal_price(model, "call", self.strike, self.maturity, self)

    def reference_source(self, model=None) -> str:
        return terminal_source(model, "call", "Black-Scholes call")


class EuropeanPut(Product):
    """Pays max(K - S(T), 0) at T.

    Limits: strike 0 -> pays nothing (a bond of face 0).
    Relations: put <= K exp(-rT) (path by path: the bond paying K); increasing and convex
    in the strike (path by path). Put-call parity is declared on the call.
    """

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    reductions = (
        Reduction(
            "zero_strike",
            {"strike": 0.0},
            becomes=lambda p: ZeroCouponBond(cash=0.0, maturity=p.maturity),
            note="strike 0: max(-S(T), 0) = 0 on every path",
        ),
        own_closed_form(note="the put's reference: Black-Scholes, or Fourier from the model's characteristic function"),
    )
    relations = (
        Bound(
            "below_discounted_strike",
            "<=",
            lambda p, m: p.strike * math.exp(-m.short_rate * p.maturity),
            pathwise_leg=lambda p: ZeroCouponBond(cash=p.strike, maturity=p.maturity),
            source="K exp(-rT) (the put never pays more than K)",
        ),
        Monotone("strike", +1, to=lambda p: p.strike + 10.0, pathwise=True),
        Convex("strike", step=10.0, pathwise=True),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.maximum(self.strike - obs.s[:, -1], 0.0)


    def formula(self):
        x = formula_symbols(self)
        return sp.Max(x.strike - x.S_T, 0)

    def reference(self, model):
        return terminal_price(model, "put", self.strike, self.maturity, self)

    def reference_source(self, model=None) -> str:
        return terminal_source(model, "put", "Black-Scholes put")


class Straddle(Product):
    """Pays |S(T) - K| at T: a call and a put on the same strike.

    Limits: strike 0 -> the prepaid forward. Relation: straddle = call + put (path by path).
    """

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    reductions = (
        Reduction(
            "zero_strike",
            {"strike": 0.0},
            becomes=lambda p: PrepaidForward(maturity=p.maturity),
            note="strike 0: |S(T)| = S(T) on every path",
        ),
        own_closed_form(note="call + put, each by its reference"),
    )
    relations = (
        Identity("call_plus_put", lambda p: [(1.0, p), (-1.0, _call(p)), (-1.0, _put(p))]),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.abs(obs.s[:, -1] - self.strike)

    def reference(self, model):
        return _call(self).reference(model) + _put(self).reference(model)

    def reference_source(self, model=None) -> str:
        return terminal_source(model, "call + put", "Black-Scholes call + put")
