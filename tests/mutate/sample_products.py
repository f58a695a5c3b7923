"""Small products for the mutation tests: a call with a put branch a call never takes
(dead code: its mutants are equivalent), a digital (``>`` against ``>=`` differs only on a
path ending exactly at the strike), a product whose payoff goes through a module helper,
and one whose payoff calls ``super()``."""

from __future__ import annotations

import numpy as np

from limitcase import Param, Product, Reduction
from limitcase_payoffs.vanilla import PrepaidForward, ZeroCouponBond


class FlagCall(Product):
    """Pays max(S(T) - K, 0) at T; written with a put branch that the call never takes."""

    call = True
    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    reductions = (
        Reduction("zero_strike", {"strike": 0.0}, becomes=lambda p: PrepaidForward(maturity=p.maturity)),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.maximum(s - self.strike, 0.0) if self.call else np.maximum(self.strike - s, 0.0)


class LevelDigital(Product):
    """Pays 1 at T when S(T) > K."""

    strike = Param(100.0, low=0.0, doc="level")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    reductions = (
        Reduction("zero_strike", {"strike": 0.0}, becomes=lambda p: ZeroCouponBond(cash=1.0, maturity=p.maturity)),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.where(obs.s[:, -1] > self.strike, 1.0, 0.0)


def _intrinsic(s, k):
    return np.maximum(s - k, 0.0)


class HelperCall(Product):
    """Pays max(S(T) - K, 0) at T through a module-level helper."""

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return _intrinsic(obs.s[:, -1], self.strike)


class CappedFlagCall(FlagCall):
    """Pays min(max(S(T) - K, 0), cap) at T, the call part from the parent's payoff."""

    cap = Param(20.0, low=0.0, doc="cap")

    def payoff(self, obs):
        return np.minimum(super().payoff(obs), self.cap)
