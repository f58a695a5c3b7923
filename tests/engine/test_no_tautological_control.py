"""A control whose exact price assumes what a check tests is not applied to that check.

The broken twin: Black-Scholes whose drift leaves out the dividend yield (a realistic bug:
``r - sigma^2/2`` for ``r - q - sigma^2/2``). Its discounted asset grows like
``S0 exp(-qT) exp(qT)``: the prepaid forward is worth ``S0 = 100`` on its paths, not
``S0 exp(-qT) = 98.02`` (q = 0.02, T = 1). Before the rule, the default method used the
discounted underlying (whose "exact" price is the model's forward) as a control, and the
forward-type checks returned the reference to about 1e-14 whatever the paths did.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase import Product, checks_for, run_checks
from limitcase.engine import BLOCK, evaluate
from limitcase.estimates import TAUTOLOGY_R2
from limitcase.models import BlackScholes, MultiBlackScholes
from limitcase.models.base import Simulated
from limitcase_payoffs.asians import ArithmeticAsianCall
from limitcase_payoffs.vanilla import EuropeanCall, ForwardContract, PrepaidForward


class NoDividendDrift(BlackScholes):
    """Black-Scholes with the dividend left out of the drift (the bug under test)."""

    def _simulate(self, times, z, rng):
        dt = np.diff(times, prepend=0.0)
        z *= (self.vol * np.sqrt(dt))[None, :, None]
        z += ((self.rate - 0.5 * self.vol**2) * dt)[None, :, None]
        np.cumsum(z, axis=1, out=z)
        z += math.log(self.spot)
        np.exp(z, out=z)
        return Simulated(s=z, step_var=(self.vol**2 * dt)[None, :, None])


FORWARD_CASES = {("PrepaidForward", "closed_form"), ("ForwardContract", "zero_strike"),
                 ("ForwardContract", "closed_form"), ("EuropeanCall", "zero_strike")}


def _forward_checks(model):
    return [c for p in (PrepaidForward, ForwardContract, EuropeanCall) for c in checks_for(p, model=model)
            if (c.product, c.case) in FORWARD_CASES]


def test_forward_checks_catch_a_drift_without_dividend_at_default_settings():
    """At the library's defaults (method auto, 100,000 paths) every forward-type check of
    the broken model fails, with the dropped control named; the correct model passes."""
    result = run_checks(_forward_checks(NoDividendDrift()))
    checks = [o for o in result.outcomes if o.kind != "audit"]
    assert len(checks) == 4
    for o in checks:
        assert o.verdict == "fail", (o.case, o.value, o.stderr)
        assert o.controls == () and "control 'underlying at 1' not applied" in o.message
        assert o.stderr > 1e-4  # a real Monte Carlo error, not the 1e-14 of a tautology
    good = run_checks(_forward_checks(BlackScholes()))
    assert good.ok, [(o.case, o.verdict, o.message) for o in good.outcomes]


def test_without_the_rule_the_control_hides_the_bug():
    """The same statistic with the control forced back (``control_max_r2 = 1``): the
    broken model's prepaid forward is returned to the reference to rounding."""
    j = evaluate([PrepaidForward()], NoDividendDrift(), paths=2 * BLOCK, seed=3, method="control")
    ref = PrepaidForward().reference(BlackScholes())
    assert j.dropped_controls([1.0]) and not j.uses_controls([1.0])
    assert abs(j.estimate([1.0]).value - ref) > 1.0  # about S0 - S0 exp(-qT) = 1.98
    j.control_max_r2 = 1.0
    forced = j.estimate([1.0])
    assert abs(forced.value - ref) < 1e-9 and forced.stderr < 1e-9


def test_a_replicating_set_of_controls_is_dropped_whole():
    """A prepaid basket of two assets is the sum of the two underlying controls: neither
    alone explains it, together they do; both are dropped."""

    class Pair(Product):
        multi_asset = True
        n_assets = 2

        def dates(self):
            return np.array([1.0])

        def payoff(self, obs):
            return 0.5 * obs.s[:, -1, 0] + 0.5 * obs.s[:, -1, 1]

    model = MultiBlackScholes(spots=(100.0, 90.0), vols=(0.2, 0.3), correlation=0.3)
    j = evaluate([Pair()], model, paths=BLOCK, seed=2, method="control")
    assert len(j.controls) == 2
    assert sorted(label for label, _ in j.dropped_controls([1.0])) == sorted(j.controls)
    assert j.used_controls([1.0]) == () and j.beta([1.0]).tolist() == [0.0, 0.0]


def test_honest_controls_stay():
    """A call against the underlying (R^2 about 0.6) and an arithmetic Asian against the
    geometric one (R^2 about 0.999, 1 - R^2 far above 1 - TAUTOLOGY_R2) keep their controls."""
    call = evaluate([EuropeanCall()], BlackScholes(), paths=BLOCK, seed=1, method="control")
    assert call.dropped_controls([1.0]) == [] and call.used_controls([1.0]) == ("underlying at 1",)
    asian = evaluate([ArithmeticAsianCall(fixings=52)], BlackScholes(), paths=BLOCK, seed=1, method="control")
    assert asian.dropped_controls([1.0]) == []
    assert 0.99 < asian.pilot_r2([1.0]) < TAUTOLOGY_R2
    assert 1.0 - asian.pilot_r2([1.0]) > 1e3 * (1.0 - TAUTOLOGY_R2)
