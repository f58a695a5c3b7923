"""Continuously monitored double barriers: every declared check passes, every declared
check catches a realistic bug, and the Brownian-bridge survival in the corridor agrees with
an independent eigenfunction (Fourier sine) computation."""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs import double_barriers as D

PRODUCTS = list(D.FAMILY_CONTINUOUS.values())


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    assert_all_pass(product, paths=10_000)


# --- broken payoffs ------------------------------------------------------------------------


def _settle(p, obs, alive, rebate=None, vanilla=None):
    s_end = obs.s[:, -1]
    if vanilla is None:
        vanilla = np.maximum(s_end - p.strike, 0.0) if p.call else np.maximum(p.strike - s_end, 0.0)
    rebate = p.rebate if rebate is None else rebate
    if p.out:
        return vanilla * alive + rebate * (1.0 - alive)
    return vanilla * (1.0 - alive) + rebate * alive


def _logs(obs):
    return np.log(np.column_stack([np.full(obs.paths, obs.s0), obs.s]))


def dates_only(self, obs):
    """Watches the corridor on the simulated dates only: no bridge between them."""
    s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
    return _settle(self, obs, np.all((s > self.lower) & (s < self.upper), axis=1).astype(float))


def first_interval_dropped(self, obs):
    """The bridge runs between the simulated dates but not from today to the first one."""
    x = np.log(obs.s)
    stay = D.strip_survival(x[:, :-1], x[:, 1:], obs.step_var[..., 1:], self.lower, self.upper)
    inside_first = ((obs.s[:, 0] > self.lower) & (obs.s[:, 0] < self.upper)).astype(float)
    return _settle(self, obs, np.prod(stay, axis=1) * inside_first)


def barriers_apart(self, obs):
    """Multiplies the two single-barrier bridge probabilities, as if the barriers did not
    interact (the images beyond the first are dropped)."""
    x = _logs(obs)
    stay = (D.strip_survival(x[:, :-1], x[:, 1:], obs.step_var, 0.0, self.upper)
            * D.strip_survival(x[:, :-1], x[:, 1:], obs.step_var, self.lower, math.inf))
    return _settle(self, obs, np.prod(stay, axis=1))


def rebate_dropped(self, obs):
    """Never pays the rebate."""
    return _settle(self, obs, self.alive(obs), rebate=0.0)


def rebate_always(self, obs):
    """Adds the rebate whether or not the vanilla is paid."""
    return _settle(self, obs, self.alive(obs), rebate=0.0) + self.rebate


def outcomes_swapped(self, obs):
    """The vanilla and the rebate branches swapped."""
    return _settle(self, obs, 1.0 - self.alive(obs))


def vanilla_absolute(self, obs):
    """|S(T) - K| instead of the positive part."""
    return _settle(self, obs, self.alive(obs), vanilla=np.abs(obs.s[:, -1] - self.strike))


def _bugs(product):
    bugs = {
        "corridor_out_of_reach": rebate_always if product.out else outcomes_swapped,
        "touched_today": first_interval_dropped,
        "closed_form": dates_only,
        "closed_form_rebate": rebate_dropped,
        "closed_form_one_step": dates_only,
        # the knock-in's price there is almost the vanilla: the images move it by less than its
        # standard error, so its twin is the dates-only bug
        "closed_form_narrow_one_step": barriers_apart if product.out else dates_only,
        "closed_form_haug_cell": dates_only,
        "no_lower_barrier": dates_only,
        "no_upper_barrier": dates_only,
        "in_plus_out_is_vanilla": dates_only,
        "at_most_vanilla": vanilla_absolute,
    }
    if product.out:
        bugs["worth_more_as_corridor_widens"] = outcomes_swapped
        bugs["at_most_discrete"] = vanilla_absolute
    else:
        bugs["worth_less_as_corridor_widens"] = outcomes_swapped
        bugs["at_least_discrete"] = outcomes_swapped
    return bugs


def _twin(product, bug):
    return type(f"{product.__name__}_{bug.__name__}", (product,), {"payoff": bug, "__doc__": bug.__doc__})


BROKEN = [(_twin(product, bug), case) for product in PRODUCTS for case, bug in _bugs(product).items()]


# The dates-only bug moves the knock-out put by 3% (3.215 against 3.116): 10 000 paths see it
# at about 2 standard errors, so that twin runs on 40 000.
PATHS = {("DoubleKnockOutPutContinuous_dates_only", "closed_form"): 40_000}


@pytest.mark.parametrize("broken, case", BROKEN, ids=lambda x: x if isinstance(x, str) else x.__name__)
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=PATHS.get((broken.__name__, case), 10_000))


def test_every_declared_check_has_a_broken_twin():
    assert_every_check_has_a_twin(PRODUCTS, BROKEN)


# --- the bridge in a strip, independently ------------------------------------------------------


def test_strip_survival_matches_sine_expansion():
    """P(bridge from x to y over variance v stays in (a, b)) = killed density / free density;
    the killed driftless density by its eigenfunction expansion
    (2/w) sum_k exp(-k^2 pi^2 v / (2 w^2)) sin(k pi (x - a)/w) sin(k pi (y - a)/w)."""
    lo, hi = 80.0, 120.0
    a, b = math.log(lo), math.log(hi)
    w = b - a
    k = np.arange(1, 2001)
    for x, y, v in [(math.log(100.0), math.log(105.0), 0.01), (math.log(90.0), math.log(115.0), 0.05),
                    (math.log(100.0), math.log(100.0), 0.2)]:
        killed = (2.0 / w) * np.sum(np.exp(-(k * math.pi / w) ** 2 * v / 2.0)
                                    * np.sin(k * math.pi * (x - a) / w) * np.sin(k * math.pi * (y - a) / w))
        free = math.exp(-((y - x) ** 2) / (2.0 * v)) / math.sqrt(2.0 * math.pi * v)
        got = float(D.strip_survival(np.array(x), np.array(y), np.array(v), lo, hi))
        assert got == pytest.approx(killed / free, abs=1e-10)
    # one side removed: the single-barrier bridge formula
    x, y, v = math.log(100.0), math.log(110.0), 0.02
    assert float(D.strip_survival(np.array(x), np.array(y), np.array(v), 0.0, hi)) == pytest.approx(
        -math.expm1(-2.0 * (b - x) * (b - y) / v), abs=1e-15)


def test_a_step_without_variance_keeps_the_path_alive_inside_the_corridor():
    """With no variance the bridge is the straight line between its ends: it stays inside a
    corridor (an interval) whenever both ends do (the one-sided formulas give the same:
    -expm1(-inf) = 1)."""
    x = np.log(np.array([[100.0, 110.0], [100.0, 125.0]]))
    y = np.log(np.array([[105.0, 100.0], [100.0, 100.0]]))
    var = np.array([[0.0, 0.01]])
    got = D.strip_survival(x, y, var, 80.0, 120.0)
    assert got[0, 0] == 1.0 and 0.0 < got[0, 1] < 1.0  # the variance-free step survives
    assert got[1, 1] == 0.0  # an end outside
    assert np.array_equal(D.strip_survival(x, y, np.zeros((1, 2)), 80.0, 120.0), [[1.0, 1.0], [1.0, 0.0]])
    assert np.array_equal(D.strip_survival(x, y, var, 0.0, 120.0)[:, 0], [1.0, 1.0])
