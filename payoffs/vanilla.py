"""European call and put, and the prepaid forward: the base cases most reductions end on."""

from __future__ import annotations

import numpy as np

from limitcase import Param, Product, Reduction
from limitcase.references import black_scholes, prepaid_forward

from ._common import bs_inputs


class PrepaidForward(Product):
    """Pays the asset S(T) at T. Worth S0 exp(-q T) today, whatever the model."""

    maturity = Param(1.0, low=0.0, low_open=True, doc="delivery date in years")

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return obs.s[:, -1]

    def reference(self, model):
        return prepaid_forward(float(model.initial()[0]), self.maturity, float(model.dividend_yields()[0]))

    def reference_source(self) -> str:
        return "S0 exp(-qT)"


class EuropeanCall(Product):
    """Pays max(S(T) - K, 0) at T.

    Limits: strike 0 -> the prepaid forward (pays S(T)).
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
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        return black_scholes(spot, self.strike, self.maturity, rate, dividend, vol, "call")

    def reference_source(self) -> str:
        return "Black-Scholes call"


class EuropeanPut(Product):
    """Pays max(K - S(T), 0) at T.

    Limits: strike 0 -> worth nothing.
    """

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.maximum(self.strike - obs.s[:, -1], 0.0)

    def reference(self, model):
        spot, rate, dividend, vol = bs_inputs(model, self)
        return black_scholes(spot, self.strike, self.maturity, rate, dividend, vol, "put")

    def reference_source(self) -> str:
        return "Black-Scholes put"
