"""A product declared non-negative that pays a negative amount fails its checks (with a clear
message), rather than crashing them or being reported as an error."""

from __future__ import annotations

import numpy as np

from limitcase.reduce import checks_for
from limitcase.suite import run_check, run_checks
from limitcase_payoffs.vanilla import EuropeanCall


class ForgotTheFloor(EuropeanCall):
    """S(T) - K instead of max(S(T) - K, 0): a call's payoff without its floor."""

    def payoff(self, obs):
        return obs.s[:, -1] - self.strike


def test_a_negative_amount_is_a_failing_check_not_an_error():
    checks = [c for c in checks_for(ForgotTheFloor) if c.case in ("closed_form", "below_prepaid_forward")]
    result = run_checks(checks, paths=2000, seed=1, workers=1)
    mine = [o for o in result.outcomes if o.kind != "audit"]
    assert len(mine) == 2
    for o in mine:
        assert o.verdict == "fail", o
        assert o.pathwise_ok is False and o.p_value == 0.0
        assert "ForgotTheFloor pays a negative amount" in o.message and "declared non-negative" in o.message
    assert not result.ok and result.summary["error"] == 0


def test_one_check_alone_fails_the_same_way():
    check = next(c for c in checks_for(ForgotTheFloor) if c.case == "closed_form")
    out = run_check(check, paths=1000, seed=1)
    assert out.pathwise_ok is False and out.p_value == 0.0 and "negative amount" in out.message


def test_a_product_declared_able_to_pay_negative_amounts_is_priced():
    class Forward(ForgotTheFloor):
        nonnegative = False

    check = next(c for c in checks_for(Forward) if c.case == "closed_form")
    assert run_check(check, paths=1000, seed=1).verdict != "error"
    assert np.isfinite(run_check(check, paths=1000, seed=1).value)
