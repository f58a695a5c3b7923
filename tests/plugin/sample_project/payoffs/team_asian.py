"""A team's own product, checked by the limitcase pytest plugin (sample project)."""

import numpy as np

from limitcase import Monotone, Param, Product, Reduction
from limitcase_payoffs.vanilla import EuropeanCall


class TeamAsianCall(Product):
    """Pays max(A - K, 0) at T, A the mean of S at T/n, 2T/n, ..., T.

    Limits: one fixing -> the European call on every path.
    """

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    fixings = Param(4, low=1, high=1000, integer=True, doc="number of fixings")

    reductions = (
        Reduction("one_fixing", {"fixings": 1},
                  becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity)),
    )
    relations = (Monotone("strike", -1, to=110.0, pathwise=True),)

    def dates(self):
        return self.maturity * np.arange(1, self.fixings + 1) / self.fixings

    def payoff(self, obs):
        return np.maximum(obs.s.mean(axis=1) - self.strike, 0.0)
