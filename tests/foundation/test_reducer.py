"""The reducer and the verdict: declared limits become checks; correct products pass;
broken twins are caught; declarations that cannot be built are reported, not skipped."""

import re

import numpy as np
import pytest

from limitcase import Product, Reduction, checks_for
from limitcase.testing import assert_all_pass, assert_caught, run_product
from limitcase.verdict import holm, p_value
from limitcase_payoffs.asians import ArithmeticAsianCall
from limitcase_payoffs.barriers import DownAndOutCall, UpAndOutCall
from limitcase_payoffs.bermudan import BermudanPut
from limitcase_payoffs.vanilla import EuropeanCall


@pytest.mark.parametrize("cls", [EuropeanCall, ArithmeticAsianCall, UpAndOutCall, DownAndOutCall, BermudanPut])
def test_foundation_reductions_pass(cls):
    assert_all_pass(cls, paths=20_000, select=[r.name for r in cls.reductions])


class CallDiscountedTwice(EuropeanCall):
    def payoff(self, obs):  # discounts inside the payoff, and the engine discounts again
        return np.exp(-obs.rate * self.maturity) * np.maximum(obs.s[:, -1] - self.strike, 0.0)


class AsianDroppingLastFixing(ArithmeticAsianCall):
    def payoff(self, obs):
        s = obs.s[:, :-1] if obs.s.shape[1] > 1 else obs.s[:, :0]
        avg = s.mean(axis=1) if s.shape[1] else np.zeros(obs.paths)
        return np.maximum(avg - self.strike, 0.0)


class UpOutWrongSide(UpAndOutCall):
    def payoff(self, obs):  # knocks out when the price is *below* the barrier
        alive = np.all(obs.s > self.barrier, axis=1)
        return np.where(alive, np.maximum(obs.s[:, -1] - self.strike, 0.0), 0.0)


class DownOutWrongSide(DownAndOutCall):
    def payoff(self, obs):  # survives only below the barrier
        alive = np.all(obs.s < self.barrier, axis=1)
        return np.where(alive, np.maximum(obs.s[:, -1] - self.strike, 0.0), 0.0)


class BermudanIgnoringLastDate(BermudanPut):
    def exercise_value(self, obs):
        ex = np.maximum(self.strike - obs.s, 0.0)
        ex[:, -1] = 0.0
        return ex


@pytest.mark.parametrize(
    "broken, case",
    [
        (CallDiscountedTwice, "zero_strike"),
        (AsianDroppingLastFixing, "one_fixing"),
        (UpOutWrongSide, "barrier_out_of_reach"),
        (DownOutWrongSide, "barrier_out_of_reach"),
        (BermudanIgnoringLastDate, "one_exercise_date"),
    ],
)
def test_broken_twins_are_caught(broken, case):
    assert_caught(broken, case, paths=20_000)


def test_pathwise_failure_is_reported_with_paths():
    r = run_product(AsianDroppingLastFixing, paths=5_000, select=["one_fixing"])
    o = r.outcomes[0]
    assert o.verdict == "fail" and o.pathwise_ok is False
    assert "path-by-path identity broken on" in o.message


class NoRefBase(Product):
    maturity = 1.0

    def dates(self):
        return np.array([1.0])

    def payoff(self, obs):
        return obs.s[:, -1]


class ReducesToNothingKnown(EuropeanCall):
    reductions = (Reduction("to_unknown", {"strike": 0.0}, becomes=lambda p: NoRefBase()),)


def test_a_base_without_reference_is_a_skip_and_its_legs_still_run():
    """NoRefBase has no reference (Product.reference raises NoReference): the reduction is
    a skip naming it, never an error or a pass, and the limit still meets the base product
    on every path (``to_unknown:legs``). Skips leave the run green and Holm's family alone."""
    checks = [c for c in checks_for(ReducesToNothingKnown) if c.case.startswith("to_unknown")]
    assert [c.case for c in checks] == ["to_unknown:legs", "to_unknown"]
    assert checks[1].skip is not None and checks[1].error is None
    r = run_product(ReducesToNothingKnown, paths=1000, select=["to_unknown"])
    by = {o.case: o for o in r.outcomes}
    assert by["to_unknown"].verdict == "skip" and "no reference for the base case" in by["to_unknown"].message
    assert by["to_unknown"].p_value is None and by["to_unknown"].p_adjusted is None
    legs = by["to_unknown:legs"]
    assert legs.verdict == "pass" and legs.pathwise_ok is True and legs.p_adjusted is not None
    assert "Holm over 1 checks" not in legs.message and r.ok and r.summary["skip"] == 1


class ReducesOutOfRange(EuropeanCall):
    reductions = (Reduction("negative_strike", {"strike": -1.0}, becomes=lambda p: EuropeanCall()),)


class ReductionRaises(EuropeanCall):
    reductions = (Reduction("typo", {"strike": 0.0}, becomes=lambda p: EuropeanCall(strike=p.strik)),)


@pytest.mark.parametrize(
    "cls, pattern",
    [
        (ReducesOutOfRange, r"cannot build the limit case: strike=-1.0 is outside"),
        (ReductionRaises, "the reduction's declaration raised AttributeError"),
    ],
)
def test_declarations_that_cannot_be_built_are_errors(cls, pattern):
    case = cls.reductions[0].name
    checks = [c for c in checks_for(cls) if c.case == case]
    assert len(checks) == 1 and checks[0].error is not None
    r = run_product(cls, paths=1000, select=[case])
    assert r.outcomes[0].verdict == "error"
    assert re.search(pattern, r.outcomes[0].message)
    assert not r.ok


class BiasedCall(EuropeanCall):
    """A statistical (not path-by-path) reduction on a product with a 1% bias."""

    reductions = (
        Reduction("zero_strike_stat", {"strike": 0.0}, becomes=lambda p: EuropeanCall(strike=0.0), exact=False),
    )

    def payoff(self, obs):
        return 1.01 * np.maximum(obs.s[:, -1] - self.strike, 0.0)


def test_statistical_reduction_detects_a_small_bias():
    r = run_product(BiasedCall, paths=40_000, select=["zero_strike_stat"])
    o = r.outcomes[0]
    assert o.pathwise_ok is None and o.verdict == "fail"
    assert o.detectable_bias < 0.98  # 1% of 98 is detectable at this path count


def test_allowance_enters_the_test():
    assert p_value(0.5, 0.1, "==", allowance=0.5) == 1.0
    assert p_value(0.5, 0.1, "==", allowance=0.0) < 1e-6
    assert p_value(-0.5, 0.1, ">=", allowance=0.6) > 0.5
    assert p_value(0.5, 0.1, "<=", allowance=0.0) < 1e-6


def test_holm_matches_hand_computation():
    """Holm (1979): sorted p = (0.01, 0.02, 0.04) with m = 3 gives (0.03, 0.04, 0.04)."""
    assert holm([0.04, 0.01, 0.02]) == pytest.approx([0.04, 0.03, 0.04])
