"""The vanilla catalogue: every declared check passes, every check catches a realistic bug,
and Monte Carlo prices meet a published example.

Broken twins are subclasses overriding ``payoff`` with one bug each; ``assert_caught``
runs only the named check on them and requires it to fail.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase import BlackScholes, price
from limitcase.references import black_scholes
from limitcase.testing import assert_all_pass, assert_caught
from limitcase_payoffs.vanilla import (
    EuropeanCall,
    EuropeanPut,
    ForwardContract,
    PrepaidForward,
    Straddle,
    ZeroCouponBond,
)

PRODUCTS = [PrepaidForward, ZeroCouponBond, ForwardContract, EuropeanCall, EuropeanPut, Straddle]


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    assert_all_pass(product, paths=10_000)


# --- broken twins ----------------------------------------------------------------------


class ForwardReadsTodaysSpot(PrepaidForward):
    """Delivers today's spot instead of the fixing at T."""

    def payoff(self, obs):
        return np.full(obs.paths, obs.s0)


class BondIndexedToTheAsset(ZeroCouponBond):
    """Scales the cash by S(T)/S0 (an indexation left in from another template)."""

    def payoff(self, obs):
        return self.cash * obs.s[:, -1] / obs.s0


class ForwardPaysTheChange(ForwardContract):
    """Pays the change S(T) - S0 - K instead of S(T) - K."""

    def payoff(self, obs):
        return obs.s[:, -1] - obs.s0 - self.strike


class ForwardWrittenAsACall(ForwardContract):
    """Floors the forward at zero, as if it were a call."""

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)


class CallReadsTodaysSpot(EuropeanCall):
    """Reads today's spot instead of the fixing at T."""

    def payoff(self, obs):
        return np.maximum(np.full(obs.paths, obs.s0) - self.strike, 0.0)


class CallWithCarryTwice(EuropeanCall):
    """Grows the simulated price by the carry exp((r - q) T) although it already drifts."""

    def payoff(self, obs):
        carry = math.exp((obs.rate - obs.dividend) * self.maturity)
        return np.maximum(obs.s[:, -1] * carry - self.strike, 0.0)


class CallForgetsTheStrike(EuropeanCall):
    """Pays max(S(T), K): the strike is never subtracted."""

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1], self.strike)


class CallCappedByATemplate(EuropeanCall):
    """A cap of 20 left in from a call-spread template."""

    def payoff(self, obs):
        return np.minimum(np.maximum(obs.s[:, -1] - self.strike, 0.0), 20.0)


class CallPaysThePut(EuropeanCall):
    """Call/put flag inverted."""

    def payoff(self, obs):
        return np.maximum(self.strike - obs.s[:, -1], 0.0)


class PutWithAbsoluteValue(EuropeanPut):
    """|K - S(T)| instead of the positive part."""

    def payoff(self, obs):
        return np.abs(self.strike - obs.s[:, -1])


class PutReadsTodaysSpot(EuropeanPut):
    """Reads today's spot instead of the fixing at T."""

    def payoff(self, obs):
        return np.maximum(self.strike - np.full(obs.paths, obs.s0), 0.0)


class PutWithADigitalLeg(EuropeanPut):
    """Also pays the cash leg K 1{S(T) < K} of a digital put (a template mix-up)."""

    def payoff(self, obs):
        s = obs.s[:, -1]
        return np.maximum(self.strike - s, 0.0) + np.where(s < self.strike, self.strike, 0.0)


class PutPaysTheCall(EuropeanPut):
    """Call/put flag inverted."""

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)


class PutCappedByATemplate(EuropeanPut):
    """A cap of 20 left in from a put-spread template."""

    def payoff(self, obs):
        return np.minimum(np.maximum(self.strike - obs.s[:, -1], 0.0), 20.0)


class StraddleReadsTodaysSpot(Straddle):
    """Reads today's spot instead of the fixing at T."""

    def payoff(self, obs):
        return np.abs(np.full(obs.paths, obs.s0) - self.strike)


class StraddleWithoutItsPut(Straddle):
    """The put leg is missing: only max(S(T) - K, 0)."""

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)


BROKEN = [
    (ForwardReadsTodaysSpot, "closed_form"),
    (BondIndexedToTheAsset, "closed_form"),
    (ForwardPaysTheChange, "zero_strike"),
    (ForwardWrittenAsACall, "closed_form"),
    (CallReadsTodaysSpot, "zero_strike"),
    (CallWithCarryTwice, "closed_form"),
    (CallWithCarryTwice, "put_call_parity"),
    (CallForgetsTheStrike, "below_prepaid_forward"),
    (CallCappedByATemplate, "above_forward"),
    (CallPaysThePut, "decreasing_in_strike"),
    (CallCappedByATemplate, "convex_in_strike"),
    (PutWithAbsoluteValue, "zero_strike"),
    (PutReadsTodaysSpot, "closed_form"),
    (PutWithADigitalLeg, "below_discounted_strike"),
    (PutPaysTheCall, "increasing_in_strike"),
    (PutCappedByATemplate, "convex_in_strike"),
    (StraddleReadsTodaysSpot, "zero_strike"),
    (StraddleWithoutItsPut, "closed_form"),
    (StraddleWithoutItsPut, "call_plus_put"),
]


@pytest.mark.parametrize("broken, case", BROKEN, ids=lambda x: x if isinstance(x, str) else x.__name__)
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=10_000)


def test_every_declared_check_has_a_broken_twin():
    declared = {(c, r.name) for c in PRODUCTS for r in c.reductions}
    declared |= {(c, case) for c in PRODUCTS for case in _relation_cases(c)}
    covered = {(c.__mro__[1], case) for c, case in BROKEN}
    assert declared <= covered, sorted((c.__name__, k) for c, k in declared - covered)


def _relation_cases(cls):
    from limitcase.reduce import checks_for

    return [c.case for c in checks_for(cls) if c.kind == "relation"]


# --- published example ------------------------------------------------------------------


@pytest.mark.published
def test_call_and_put_meet_hulls_example():
    """J. C. Hull, Options, Futures and Other Derivatives, Black-Scholes-Merton worked
    example: S = 42, K = 40, r = 0.10, sigma = 0.20, T = 0.5, no dividend: call 4.76,
    put 0.81 (printed to 2 decimals; from memory, recomputed by Black-Scholes below).
    Monte Carlo z-test at two-sided level 0.001 (z = 3.29), plus the 0.005 print precision."""
    model = BlackScholes(spot=42.0, rate=0.10, dividend=0.0, vol=0.20)
    z = 3.29
    for product, published, kind in ((EuropeanCall, 4.76, "call"), (EuropeanPut, 0.81, "put")):
        p = product(strike=40.0, maturity=0.5)
        assert abs(black_scholes(42.0, 40.0, 0.5, 0.10, 0.0, 0.20, kind) - published) <= 0.005
        est = price(p, model, paths=40_000, seed=7)
        assert abs(est.value - published) <= 0.005 + z * est.stderr, (kind, est)
