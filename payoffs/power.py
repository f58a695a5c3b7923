"""Power options: the call pays max(S(T)^p - K, 0), the put max(K - S(T)^p, 0), K in units
of S^p. S(T)^p is log-normal under Black-Scholes, with log-volatility |p| sigma: closed form
of R. C. Heynen and H. M. Kat, "Pricing and Hedging Power Options", Financial Engineering
and the Japanese Markets 3, 1996, via :func:`limitcase.references.power_option`.
"""

from __future__ import annotations

import numpy as np

from limitcase import Identity, Monotone, Param, Product, Reduction
from limitcase.references import power_option

from ._common import bs_inputs, own_closed_form
from .vanilla import EuropeanCall, EuropeanPut, ZeroCouponBond


class _Power(Product):
    abstract = True
    call: bool
    strike = Param(10_000.0, low=0.0, doc="strike, in units of S^p (10 000 = 100^2)")
    power = Param(2.0, low=-10.0, high=10.0, doc="exponent p (|p| <= 10 keeps S^p finite in double precision)")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        kind = "call" if self.call else "put"
        return power_option(spot, self.strike, self.power, self.maturity, rate, dividend, vol, kind)

    def reference_source(self) -> str:
        return "Heynen-Kat power option"


class PowerCall(_Power):
    """Pays max(S(T)^p - K, 0) at T.

    Limits: power 1 -> the European call (path by path).
    Relations: call - put = S(T)^p - K, i.e. call(K) - put(K) - call(0) + bond(K) = 0 (path by
    path); decreasing in the strike (path by path).
    """

    call = True

    reductions = (
        Reduction(
            "power_one",
            {"power": 1.0, "strike": 100.0},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            note="p = 1: max(S(T) - K, 0), the European call on every path",
        ),
        own_closed_form(note="Black-Scholes on the log-normal S(T)^p"),
    )
    relations = (
        Identity(
            "power_parity",
            lambda p: [
                (1.0, p),
                (-1.0, PowerPut(strike=p.strike, power=p.power, maturity=p.maturity)),
                (-1.0, p.replace(strike=0.0)),
                (1.0, ZeroCouponBond(cash=p.strike, maturity=p.maturity)),
            ],
            note="max(X - K, 0) - max(K - X, 0) = X - K with X = S(T)^p, on every path",
        ),
        Monotone("strike", -1, to=lambda p: p.strike * 1.1, pathwise=True),
    )

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] ** self.power - self.strike, 0.0)


class PowerPut(_Power):
    """Pays max(K - S(T)^p, 0) at T.

    Limits: power 1 -> the European put (path by path); strike 0 -> pays nothing.
    Relation: increasing in the strike (path by path). Parity is declared on the call.
    """

    call = False

    reductions = (
        Reduction(
            "power_one",
            {"power": 1.0, "strike": 100.0},
            becomes=lambda p: EuropeanPut(strike=p.strike, maturity=p.maturity),
            note="p = 1: max(K - S(T), 0), the European put on every path",
        ),
        Reduction(
            "zero_strike",
            {"strike": 0.0},
            becomes=lambda p: ZeroCouponBond(cash=0.0, maturity=p.maturity),
            note="strike 0: S(T)^p > 0, so the put pays nothing",
        ),
        own_closed_form(note="Black-Scholes on the log-normal S(T)^p"),
    )
    relations = (Monotone("strike", +1, to=lambda p: p.strike * 1.1, pathwise=True),)

    def payoff(self, obs):
        return np.maximum(self.strike - obs.s[:, -1] ** self.power, 0.0)
