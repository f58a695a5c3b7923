"""Every path-by-path identity again under Heston on warped dates (limitcase.second_model):
a payoff right only on evenly spaced dates is caught, the catalogue subset passes, the warp
keeps order and maturity.

Sources: Asian put-call parity, call - put = average - K on every path, is common practice
(an identity of the payoffs); the warp's properties are checked directly.
"""

from __future__ import annotations

import pickle

import numpy as np
import pytest

from limitcase.models.heston import Heston
from limitcase.reduce import checks_for
from limitcase.second_model import SECOND_SUFFIX, second_model_checks, warp_dates, warped
from limitcase.suite import run_checks
from limitcase_payoffs.asians import ArithmeticAsianCall
from limitcase_payoffs.barriers import UpAndOutCall, UpAndOutCallContinuous
from limitcase_payoffs.vanilla import EuropeanCall

PATHS = 20_000


class TimeWeightedAsianCall(ArithmeticAsianCall):
    """An Asian call whose author weighted each fixing by the time since the previous one
    over the window's length: the plain mean on equal steps, wrong on any other schedule."""

    def payoff(self, obs):
        prev = np.concatenate([[self.start], obs.t[:-1]])
        w = (obs.t - prev) / (self.maturity - self.start)
        return np.maximum(obs.s @ w - self.strike, 0.0)


def _second(cls, case):
    checks = second_model_checks(checks_for(cls))
    return [c for c in checks if c.case == case + SECOND_SUFFIX]


def test_warp_keeps_order_knots_and_is_uneven():
    t = np.linspace(0.0, 1.0, 13)[1:]
    w = warp_dates(t, [1.0])
    assert np.all(np.diff(w) > 0) and w[-1] == 1.0
    assert np.ptp(np.diff(w)) > 0.01  # no longer evenly spaced
    two = warp_dates(np.array([0.25, 0.5, 0.75, 1.0, 1.5, 2.0]), [1.0, 2.0])
    assert two[3] == 1.0 and two[-1] == 2.0 and np.all(np.diff(two) > 0)


def test_warped_product_pickles_and_keeps_parameters():
    p = warped(EuropeanCall(strike=90.0), [1.0])
    q = pickle.loads(pickle.dumps(p))
    assert q.params() == p.params() and np.array_equal(q.dates(), p.dates())
    assert type(q).__name__ == "EuropeanCall"


def test_cases_run_under_heston():
    checks = second_model_checks(checks_for(UpAndOutCall))
    assert checks and all(isinstance(c.model, Heston) and c.rules for c in checks)
    assert all(c.case.endswith(SECOND_SUFFIX) for c in checks)


def test_cases_run_on_a_share_of_the_paths():
    """A path-by-path identity needs few paths: the second model's cases run on an eighth."""
    from limitcase.settings import SECOND_MODEL_PATH_SHARE

    check = second_model_checks([c for c in checks_for(UpAndOutCall) if c.case == "in_plus_out_is_vanilla"])
    out = run_checks(check, paths=16_384, seed=20261201).outcomes[0]
    assert out.verdict == "pass" and out.paths == round(16_384 * SECOND_MODEL_PATH_SHARE) == 2048


def test_planted_even_dates_bug_is_caught_only_by_the_second_model():
    plain = [c for c in checks_for(TimeWeightedAsianCall) if c.case == "put_call_parity"]
    assert run_checks(plain, paths=PATHS, seed=20261201).ok  # invisible on even dates
    out = run_checks(_second(TimeWeightedAsianCall, "put_call_parity"), paths=PATHS, seed=20261201).outcomes[0]
    assert out.verdict == "fail" and out.pathwise_ok is False


@pytest.mark.parametrize("cls", [ArithmeticAsianCall, UpAndOutCall, EuropeanCall])
def test_catalogue_subset_passes(cls):
    checks = second_model_checks(checks_for(cls))
    result = run_checks(checks, paths=PATHS, seed=20261201)
    assert result.ok, [(o.case, o.message) for o in result.outcomes if o.verdict != "pass"]


class FirstIntervalVarianceUpAndOut(UpAndOutCallContinuous):
    """A continuously monitored up-and-out whose Brownian-bridge correction uses the first
    interval's variance for every interval: right under Black-Scholes on equal steps (every
    interval has the same variance), wrong under stochastic volatility or on uneven dates."""

    def untouched(self, obs):
        s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
        stay = (s < self.barrier).astype(float)
        first = np.broadcast_to(obs.step_var, obs.s.shape)[:, :1]
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            d = np.log(s / self.barrier)
            gap = d[:, :-1] * d[:, 1:]
            bridge = np.where(gap > 0.0, -np.expm1(-2.0 * gap / first), 0.0)
        stay[:, 1:] *= bridge
        return np.cumprod(stay, axis=1)


def test_planted_model_quantity_bug_is_caught_only_by_the_second_model():
    case = "in_plus_out_is_vanilla"
    plain = [c for c in checks_for(FirstIntervalVarianceUpAndOut) if c.case == case]
    assert run_checks(plain, paths=PATHS, seed=20261201).ok  # invisible under Black-Scholes on equal steps
    out = run_checks(_second(FirstIntervalVarianceUpAndOut, case), paths=PATHS, seed=20261201).outcomes[0]
    assert out.verdict == "fail" and out.pathwise_ok is False
