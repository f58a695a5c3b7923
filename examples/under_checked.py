"""A correct product with too few checks, for `limitcase mutate` to expose.

This knock-out call is coded right, and `limitcase check` passes it. But its author
declared a single reduction: the barrier pushed to infinity, where the option is never
knocked out and pays the European call on every path. At that limit the barrier test and
the rebate play no part, so a bug in either would pass every declared check:

    limitcase mutate examples/under_checked.py

lists the mutants that survive (the barrier tested only at maturity, a monitoring date
left out, the rebate dropped, ``<`` written ``<=``) and, for each, the kind of check that
would catch it: a relation in + out = vanilla, a reduction with the barrier at the spot
(knocked out today: the rebate alone), a check on a path that sits exactly on the barrier.
"""

from __future__ import annotations

import math

import numpy as np

from limitcase import Param, Product, Reduction
from limitcase_payoffs.vanilla import EuropeanCall


class ThinlyCheckedUpAndOut(Product):
    """Pays max(S(T) - K, 0) at T if S < H on every monitoring date T/n, ..., T; if S >= H
    on one of them it is knocked out and pays the rebate R at T instead.

    Declared limit: H -> inf, never knocked out: the European call, on every path.
    (Nothing else is declared: that is the point of the example.)
    """

    strike = Param(100.0, low=0.0, doc="strike")
    barrier = Param(130.0, low=0.0, low_open=True, high=math.inf, doc="knock-out level above the spot")
    rebate = Param(2.0, low=0.0, doc="cash paid at T when knocked out")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")
    monitoring = Param(12, low=1, high=10_000, integer=True, doc="number of monitoring dates")

    reductions = (
        Reduction(
            "barrier_to_infinity",
            {"barrier": math.inf},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            note="an up barrier at +inf is never touched: the European call on every path",
        ),
    )

    def dates(self) -> np.ndarray:
        return self.maturity * np.arange(1, self.monitoring + 1) / self.monitoring

    def payoff(self, obs):
        alive = np.all(obs.s < self.barrier, axis=1)
        vanilla = np.maximum(obs.s[:, -1] - self.strike, 0.0)
        return np.where(alive, vanilla, self.rebate)
