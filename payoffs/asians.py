"""Asian options on the average of fixings."""

from __future__ import annotations

import numpy as np

from limitcase import Param, Product, Reduction

from ._common import even_dates
from .vanilla import EuropeanCall


class ArithmeticAsianCall(Product):
    """Pays max(A - K, 0) at T, A the arithmetic mean of S at n equally spaced fixings
    T/n, 2T/n, ..., T.

    Limits: one fixing -> the European call (A = S(T) on every path).
    """

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry and last fixing, in years")
    fixings = Param(12, low=1, high=10_000, integer=True, doc="number of fixings")

    reductions = (
        Reduction(
            "one_fixing",
            {"fixings": 1},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            note="a single fixing at maturity: the average is S(T), the European call",
        ),
    )

    def dates(self) -> np.ndarray:
        return even_dates(self.maturity, self.fixings)

    def payoff(self, obs):
        average = obs.s.mean(axis=1)
        return np.maximum(average - self.strike, 0.0)
