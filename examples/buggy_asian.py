"""A realistic payoff bug for `limitcase check` to catch.

This Asian call was meant to average the fixings T/n, 2T/n, ..., T, but its author also
put today's spot into the average (a common slip when a fixing schedule is built with the
start date included). With many fixings the price looks plausible. The declared reduction
to one fixing exposes it: with a single fixing the payoff should be the European call's on
every path, but it averages S(0) and S(T).

    limitcase check examples/buggy_asian.py     # exit status 1
"""

from __future__ import annotations

import numpy as np

from limitcase import Param, Product, Reduction
from limitcase_payoffs.vanilla import EuropeanCall


class AsianCallWithSpotFixing(Product):
    """Meant to pay max(mean of S at T/n, ..., T - K, 0) at T; the bug adds S(0)."""

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    fixings = Param(12, low=1, high=10_000, integer=True, doc="number of fixings")

    reductions = (
        Reduction(
            "one_fixing",
            {"fixings": 1},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
        ),
    )

    def dates(self):
        return self.maturity * np.arange(1, self.fixings + 1) / self.fixings

    def payoff(self, obs):
        # BUG: today's spot is averaged with the fixings
        with_spot = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
        return np.maximum(with_spot.mean(axis=1) - self.strike, 0.0)
