"""The lookback catalogue: every declared check passes, every check catches a realistic bug,
the Brownian-bridge extreme has the law it should, and bad terms are refused clearly.

A broken twin is a subclass of a shipped lookback with one bug in its running extreme or
its payoff; ``assert_caught(twin, case)`` runs only that case on it and requires it to fail.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase import ParamError
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs._common import period_starts
from limitcase_payoffs.lookbacks import FixedLookbackCall, FixedLookbackPut, FloatingLookbackCall, FloatingLookbackPut

PRODUCTS = [FloatingLookbackCall, FloatingLookbackPut, FixedLookbackCall, FixedLookbackPut]


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    assert_all_pass(product, paths=20_000)


# --- realistic bugs in the running extreme -----------------------------------------------


def bridge(obs, x, sign, var=None):
    """The extreme of the log-price bridge from x to log S(t_j), per interval (sign +1 max)."""
    y = np.log(obs.s)
    v = obs.step_var if var is None else var
    return (x + y + sign * np.sqrt((x - y) ** 2 - 2.0 * v * np.log(obs.uniforms))) / 2.0


def extreme(obs, sign, x):
    e = bridge(obs, x, sign)
    return np.exp(e.max(axis=1) if sign > 0 else e.min(axis=1))


class Bugs:
    """Running extremes with one bug each; ``sign`` +1 for the maximum, -1 for the minimum."""

    @staticmethod
    def forgets_todays_spot(self, obs, sign):
        """the discrete extreme runs over the dates only, not today's spot"""
        if self.continuous:
            return extreme(obs, sign, np.log(period_starts(obs)))
        return obs.s.max(axis=1) if sign > 0 else obs.s.min(axis=1)

    @staticmethod
    def last_date_only(self, obs, sign):
        """the discrete extreme reads today and the last date only"""
        if self.continuous:
            return extreme(obs, sign, np.log(period_starts(obs)))
        return np.maximum(obs.s[:, -1], obs.s0) if sign > 0 else np.minimum(obs.s[:, -1], obs.s0)

    @staticmethod
    def forgets_the_last_date(self, obs, sign):
        """the discrete extreme stops at the date before expiry"""
        if self.continuous:
            return extreme(obs, sign, np.log(period_starts(obs)))
        inner = obs.s[:, :-1]
        return np.maximum(inner.max(axis=1), obs.s0) if sign > 0 else np.minimum(inner.min(axis=1), obs.s0)

    @staticmethod
    def every_other_date(self, obs, sign):
        """the discrete extreme reads every other date (a step of 2 left from another schedule)"""
        if self.continuous:
            return extreme(obs, sign, np.log(period_starts(obs)))
        half = obs.s[:, ::2]
        return np.maximum(half.max(axis=1), obs.s0) if sign > 0 else np.minimum(half.min(axis=1), obs.s0)

    @staticmethod
    def bridge_starts_at_first_date(self, obs, sign):
        """the first bridge runs from S(t_1) to S(t_1): the interval from today is lost"""
        if not self.continuous:
            disc = np.maximum(obs.s.max(axis=1), obs.s0) if sign > 0 else np.minimum(obs.s.min(axis=1), obs.s0)
            return disc
        x = np.log(np.column_stack([obs.s[:, :1], obs.s[:, :-1]]))
        return extreme(obs, sign, x)

    @staticmethod
    def bridge_sign_swapped(self, obs, sign):
        """the continuous maximum is drawn with the minimum's sign under the root (and back)"""
        if not self.continuous:
            return np.maximum(obs.s.max(axis=1), obs.s0) if sign > 0 else np.minimum(obs.s.min(axis=1), obs.s0)
        e = bridge(obs, np.log(period_starts(obs)), -sign)
        return np.exp(e.max(axis=1) if sign > 0 else e.min(axis=1))

    @staticmethod
    def variance_since_today(self, obs, sign):
        """each bridge uses the variance accumulated since today, not over its interval"""
        if not self.continuous:
            return np.maximum(obs.s.max(axis=1), obs.s0) if sign > 0 else np.minimum(obs.s.min(axis=1), obs.s0)
        e = bridge(obs, np.log(period_starts(obs)), sign, var=np.cumsum(np.broadcast_to(obs.step_var, obs.s.shape), axis=1))
        return np.exp(e.max(axis=1) if sign > 0 else e.min(axis=1))


def with_extreme(base, bug):
    """A twin of ``base`` whose running maximum and minimum carry ``bug``."""
    fn = getattr(Bugs, bug)
    return type(
        f"{base.__name__}_{bug}",
        (base,),
        {
            "highest": lambda self, obs: fn(self, obs, +1),
            "lowest": lambda self, obs: fn(self, obs, -1),
            "__doc__": fn.__doc__,
            "__module__": __name__,
        },
    )


def with_payoff(base, bug, payoff):
    return type(f"{base.__name__}_{bug.replace(' ', '_')}", (base,), {"payoff": payoff, "__doc__": bug, "__module__": __name__})


def floating_cases(base):
    atm = "above_atm_call" if base is FloatingLookbackCall else "above_atm_put"
    return [
        (with_extreme(base, "forgets_the_last_date"), "closed_form"),
        (with_extreme(base, "forgets_todays_spot"), "one_observation"),
        (with_extreme(base, "variance_since_today"), "continuous"),
        (with_extreme(base, "bridge_starts_at_first_date"), "continuous_one_date"),
        (with_extreme(base, "forgets_todays_spot"), atm),
        (with_extreme(base, "last_date_only"), "above_geometric_asian"),
        (with_extreme(base, "bridge_starts_at_first_date"), "continuous_above_discrete"),
        (with_extreme(base, "every_other_date"), "more_dates_never_lower"),
    ]


def fixed_cases(base):
    call = base is FixedLookbackCall
    if call:
        as_other = with_payoff(base, "written as a put", lambda p, o: np.maximum(p.strike - p.highest(o), 0.0))
        capped = with_payoff(base, "capped at 10", lambda p, o: np.clip(p.highest(o) - p.strike, 0.0, 10.0))
    else:
        as_other = with_payoff(base, "written as a call", lambda p, o: np.maximum(p.lowest(o) - p.strike, 0.0))
        capped = with_payoff(base, "capped at 10", lambda p, o: np.clip(p.strike - p.lowest(o), 0.0, 10.0))
    return [
        (with_extreme(base, "forgets_the_last_date"), "closed_form"),
        (as_other, "one_observation"),
        (with_extreme(base, "variance_since_today"), "continuous"),
        (with_extreme(base, "bridge_starts_at_first_date"), "continuous_one_date"),
        (with_extreme(base, "forgets_the_last_date"), "above_european"),
        (with_extreme(base, "last_date_only"), "above_geometric_asian"),
        (as_other, "decreasing_in_strike" if call else "increasing_in_strike"),
        (capped, "convex_in_strike"),
        (with_extreme(base, "bridge_sign_swapped"), "continuous_above_discrete"),
        (with_extreme(base, "every_other_date"), "more_dates_never_lower"),
    ]


TWINS = [
    *floating_cases(FloatingLookbackCall),
    *floating_cases(FloatingLookbackPut),
    *fixed_cases(FixedLookbackCall),
    *fixed_cases(FixedLookbackPut),
]


@pytest.mark.parametrize("broken, case", TWINS, ids=[f"{b.__name__}-{c}" for b, c in TWINS])
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=20_000)


def test_every_declared_case_has_a_twin():
    assert_every_check_has_a_twin(PRODUCTS, TWINS)


# --- the Brownian-bridge extreme -----------------------------------------------------------


def test_bridge_maximum_has_the_published_law():
    """P(max of a Brownian bridge from x to y with variance v exceeds b) = exp(-2 (b-x)(b-y)/v)
    (Glasserman, Monte Carlo Methods in Financial Engineering, 2004, section 6.4; from
    memory, and recomputed here as the reflection principle's law by a fine random walk
    below). The product's draw must match it in distribution (Kolmogorov-Smirnov)."""
    from scipy import stats

    rng = np.random.default_rng(11)
    n = 20_000
    x, y, v = 0.0, 0.1, 0.04
    u = rng.random(n)
    drawn = (x + y + np.sqrt((x - y) ** 2 - 2.0 * v * np.log(u))) / 2.0
    law = lambda b: 1.0 - np.exp(-2.0 * np.maximum(b - x, 0.0) * np.maximum(b - y, 0.0) / v)  # noqa: E731
    assert stats.kstest(drawn, law).pvalue > 1e-3
    # the law itself, against the maximum of a finely discretised bridge
    steps, m = 2000, 4000
    w = np.cumsum(rng.standard_normal((m, steps)) * math.sqrt(v / steps), axis=1)
    s = np.arange(1, steps + 1) / steps
    bridge_path = x + w - s * (w[:, -1:] - (y - x))
    walk_max = np.maximum(bridge_path.max(axis=1), x)
    level = 0.25
    exact = math.exp(-2.0 * (level - x) * (level - y) / v)
    se = math.sqrt(exact * (1 - exact) / m)
    # the discrete walk misses excursions between its steps: it can only under-count
    assert exact - 4 * se - 0.02 < np.mean(walk_max > level) < exact + 4 * se


def test_extremes_include_todays_spot():
    class Obs:
        s = np.array([[90.0, 95.0], [120.0, 130.0]])
        s0 = 100.0
        paths = 2

    p = FloatingLookbackCall(observations=2)
    np.testing.assert_array_equal(p.lowest(Obs()), [90.0, 100.0])
    np.testing.assert_array_equal(p.highest(Obs()), [100.0, 130.0])


# --- bad input ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "kwargs, pattern",
    [
        ({"observations": 0}, r"observations=0 is outside \[1, 10000\] integer for FixedLookbackCall"),
        ({"continuous": 2}, r"continuous=2 is outside \[0, 1\] integer"),
        ({"continuous": 0.5}, r"continuous=0\.5 is not a whole number"),
        ({"maturity": 0.0}, r"maturity=0\.0 is outside \(0, inf"),
    ],
)
def test_bad_terms_are_refused_clearly(kwargs, pattern):
    with pytest.raises(ParamError, match=pattern):
        FixedLookbackCall(**kwargs)
