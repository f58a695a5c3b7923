"""Knock-out calls monitored on discrete dates."""

from __future__ import annotations

import math

import numpy as np

from limitcase import Param, Product, Reduction

from ._common import even_dates
from .vanilla import EuropeanCall


class UpAndOutCall(Product):
    """Pays max(S(T) - K, 0) at T unless S >= H on a monitoring date (n equally spaced
    dates ending at T), in which case it pays nothing.

    Limits: barrier -> +inf: never knocked out, the European call.
    """

    strike = Param(100.0, low=0.0, doc="strike")
    barrier = Param(140.0, low=0.0, low_open=True, high=math.inf, doc="knock-out level above spot")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    monitoring = Param(52, low=1, high=10_000, integer=True, doc="number of monitoring dates")

    reductions = (
        Reduction(
            "barrier_to_infinity",
            {"barrier": math.inf},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            note="an up barrier at +inf is never touched: the European call on every path",
        ),
    )

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.monitoring)

    def payoff(self, obs):
        alive = np.all(obs.s < self.barrier, axis=1)
        return np.where(alive, np.maximum(obs.s[:, -1] - self.strike, 0.0), 0.0)


class DownAndOutCall(Product):
    """Pays max(S(T) - K, 0) at T unless S <= H on a monitoring date (n equally spaced
    dates ending at T), in which case it pays nothing.

    Limits: barrier -> 0: a positive price never reaches it, the European call.
    """

    strike = Param(100.0, low=0.0, doc="strike")
    barrier = Param(80.0, low=0.0, doc="knock-out level below spot")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    monitoring = Param(52, low=1, high=10_000, integer=True, doc="number of monitoring dates")

    reductions = (
        Reduction(
            "barrier_to_zero",
            {"barrier": 0.0},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            note="a down barrier at 0 is never touched by a positive price: the European call",
        ),
    )

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.monitoring)

    def payoff(self, obs):
        alive = np.all(obs.s > self.barrier, axis=1)
        return np.where(alive, np.maximum(obs.s[:, -1] - self.strike, 0.0), 0.0)
