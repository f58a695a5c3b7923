"""A team's product with a payoff bug (sample project): today's spot is averaged with the
fixings, which the one-fixing limit exposes on every path."""

import numpy as np

from limitcase import Param, Product, Reduction
from limitcase_payoffs.vanilla import EuropeanCall


class TeamBrokenAsianCall(Product):
    """Meant to pay max(mean of S at the fixings - K, 0) at T; the bug adds S(0)."""

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    fixings = Param(4, low=1, high=1000, integer=True, doc="number of fixings")

    reductions = (
        Reduction("one_fixing", {"fixings": 1},
                  becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity)),
    )

    def dates(self):
        return self.maturity * np.arange(1, self.fixings + 1) / self.fixings

    def payoff(self, obs):
        with_spot = np.column_stack([np.full(obs.paths, obs.s0), obs.s])  # BUG: S(0) averaged too
        return np.maximum(with_spot.mean(axis=1) - self.strike, 0.0)
