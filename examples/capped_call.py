"""Walk-through: declaring a new product with its limits and relations.

A capped call pays min(max(S(T) - K, 0), C) at T. Before trusting the payoff code we state
what it must become at its limits and what must hold between it and known products:

* cap -> +inf: no cap, the European call (on every path);
* strike 0 and no cap: pays S(T), the prepaid forward (on every path);
* a capped call is a call spread: call(K) - call(K + C) on every path;
* it is worth more as the cap rises (on every path).

Run:  limitcase check examples/capped_call.py
"""

from __future__ import annotations

import math

import numpy as np

from limitcase import Identity, Monotone, Param, Product, Reduction
from limitcase_payoffs.vanilla import EuropeanCall, PrepaidForward


class CappedCall(Product):
    """Pays min(max(S(T) - K, 0), C) at T.

    Limits: cap -> inf gives the European call; with strike 0 too, the prepaid forward.
    Relations: equals call(K) - call(K + C) on every path; increasing in the cap.
    """

    strike = Param(100.0, low=0.0, doc="strike")
    cap = Param(20.0, low=0.0, high=math.inf, doc="largest amount paid")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    reductions = (
        Reduction(
            "no_cap",
            {"cap": math.inf},
            becomes=lambda p: EuropeanCall(strike=p.strike, maturity=p.maturity),
            note="an infinite cap never binds: the European call",
        ),
        Reduction(
            "zero_strike_no_cap",
            {"strike": 0.0, "cap": math.inf},
            becomes=lambda p: PrepaidForward(maturity=p.maturity),
            note="strike 0 and no cap: pays S(T), the prepaid forward",
        ),
    )
    relations = (
        Identity(
            "call_spread",
            legs=lambda p: [
                (1.0, p),
                (-1.0, EuropeanCall(strike=p.strike, maturity=p.maturity)),
                (1.0, EuropeanCall(strike=p.strike + p.cap, maturity=p.maturity)),
            ],
        ),
        Monotone("cap", direction=+1, to=lambda p: 1.5 * p.cap, pathwise=True),
    )

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs):
        return np.minimum(np.maximum(obs.s[:, -1] - self.strike, 0.0), self.cap)
