"""A product whose payoff code stalls under one mutation: a guard on ``pause`` that never
fires at any allowed value (``pause >= 0``) fires when ``<`` is made ``<=``, and the mutant
then sleeps far past any time limit, as a mutant stuck in a loop would."""

from __future__ import annotations

import time

import numpy as np

from limitcase import Param, Product, Reduction
from limitcase_payoffs.vanilla import PrepaidForward

STALL_SECONDS = 120.0


class StallingCall(Product):
    """Pays max(S(T) - K, 0) at T."""

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    pause = Param(0.0, low=0.0, doc="a setting the payoff guards against going negative")

    reductions = (
        Reduction("zero_strike", {"strike": 0.0}, becomes=lambda p: PrepaidForward(maturity=p.maturity)),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        if self.pause < 0.0:
            time.sleep(STALL_SECONDS)
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)


class LoopingCall(Product):
    """Pays max(S(T) - K, 0) at T; a loop that never runs at any allowed ``pause`` (it only
    runs while ``pause < 0``) spins forever, busy on the CPU, once ``<`` is made ``<=``."""

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    pause = Param(0.0, low=0.0, doc="a setting the payoff guards against going negative")

    reductions = (
        Reduction("zero_strike", {"strike": 0.0}, becomes=lambda p: PrepaidForward(maturity=p.maturity)),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        spins = 0
        while self.pause < 0.0:
            spins += 1
        return np.maximum(obs.s[:, -1] - self.strike, 0.0) + 0.0 * spins
