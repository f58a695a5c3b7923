"""Window (partial-time) barriers: every declared check passes, every declared check catches
a realistic bug, and the reference reaches its own limits (window over the whole life, no
date in the window) against the other references."""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase import BlackScholes
from limitcase.references import black_scholes, discrete_barrier_by_quadrature
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs import window_barriers as W

PRODUCTS = list(W.FAMILY.values())


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    assert_all_pass(product, paths=20_000)


# --- broken payoffs ------------------------------------------------------------------------


def _settle(p, obs, watched, rebate=None, vanilla=None):
    s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
    past = (s >= p.barrier) if p.up else (s <= p.barrier)
    alive = ~np.any(past & watched, axis=1)
    s_end = obs.s[:, -1]
    if vanilla is None:
        vanilla = np.maximum(s_end - p.strike, 0.0) if p.up else np.maximum(p.strike - s_end, 0.0)
    rebate = p.rebate if rebate is None else rebate
    return np.where(alive, vanilla, rebate) if p.out else np.where(alive, rebate, vanilla)


def _times(obs):
    return np.concatenate([[0.0], obs.t])


def _window(p, obs):
    t = _times(obs)
    return (t >= p.window_start - W.EPS) & (t <= p.window_end + W.EPS)


def window_ignored(self, obs):
    """Watches the barrier on every date, whatever the window."""
    return _settle(self, obs, np.ones(obs.s.shape[1] + 1, dtype=bool))


def strict_window_end(self, obs):
    """The window's end excluded: t < b instead of t <= b."""
    t = _times(obs)
    return _settle(self, obs, (t >= self.window_start - W.EPS) & (t < self.window_end - W.EPS))


def today_not_watched(self, obs):
    """Today is never watched, even when the window opens at 0."""
    watched = _window(self, obs)
    watched[0] = False
    return _settle(self, obs, watched)


def rebate_dropped(self, obs):
    """Never pays the rebate."""
    return _settle(self, obs, _window(self, obs), rebate=0.0)


def outcomes_swapped(self, obs):
    """The vanilla and the rebate branches swapped."""
    s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
    past = (s >= self.barrier) if self.up else (s <= self.barrier)
    alive = ~np.any(past & _window(self, obs), axis=1)
    s_end = obs.s[:, -1]
    vanilla = np.maximum(s_end - self.strike, 0.0) if self.up else np.maximum(self.strike - s_end, 0.0)
    return np.where(alive, self.rebate, vanilla) if self.out else np.where(alive, vanilla, self.rebate)


def vanilla_absolute(self, obs):
    """|S(T) - K| instead of the positive part."""
    return _settle(self, obs, _window(self, obs), vanilla=np.abs(obs.s[:, -1] - self.strike))


def rebate_always(self, obs):
    """Adds the rebate whether or not the vanilla is paid."""
    return _settle(self, obs, _window(self, obs), rebate=0.0) + self.rebate


def touch_strict(self, obs):
    """A fixing exactly on the barrier does not touch it (S > H for an up barrier instead of S >= H)."""
    nudged = self.barrier * (1.0 + 1e-12) if self.up else self.barrier * (1.0 - 1e-12)
    return super(type(self), self.replace(barrier=nudged)).payoff(obs)


BUGS = {
    "empty_window": window_ignored,
    "barrier_out_of_reach": None,  # per kind below
    "touched_today": today_not_watched,
    "closed_form": window_ignored,
    "closed_form_rebate": rebate_dropped,
    "closed_form_last_date_only": strict_window_end,
    "whole_life_window_is_full_barrier": strict_window_end,
    "in_plus_out_is_vanilla": window_ignored,
    "at_most_vanilla": vanilla_absolute,
    "tie_at_barrier": touch_strict,
}


def _twin(product, bug):
    return type(f"{product.__name__}_{bug.__name__}", (product,), {"payoff": bug, "__doc__": bug.__doc__})


def _bugs(product):
    bugs = dict(BUGS)
    bugs["barrier_out_of_reach"] = rebate_always if product.out else outcomes_swapped
    bugs[f"worth_{'less' if product.out else 'more'}_as_window_closes_later"] = outcomes_swapped
    return bugs


BROKEN = [(_twin(product, bug), case) for product in PRODUCTS for case, bug in _bugs(product).items()]


@pytest.mark.parametrize("broken, case", BROKEN, ids=lambda x: x if isinstance(x, str) else x.__name__)
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=10_000)


def test_every_declared_check_has_a_broken_twin():
    assert_every_check_has_a_twin(PRODUCTS, BROKEN)


# --- the reference at its own limits -------------------------------------------------------


def test_reference_window_limits():
    m = BlackScholes(spot=100.0, rate=0.05, dividend=0.02, vol=0.2)
    whole = W.WindowUpAndOutCall(window_start=0.0, window_end=1.0, rebate=2.0)
    dates = np.arange(1, 13) / 12.0
    full = discrete_barrier_by_quadrature("up-and-out-call", 100.0, 100.0, 125.0, dates, 1.0, 0.05, 0.02, 0.2,
                                          rebate=2.0, rebate_at_hit=False)
    assert whole.reference(m) == pytest.approx(full, abs=1e-12)
    empty = W.WindowDownAndOutPut(window_start=0.3, window_end=0.32)
    assert empty.reference(m) == pytest.approx(black_scholes(100.0, 100.0, 1.0, 0.05, 0.02, 0.2, "put"), abs=1e-12)
    # a wider window knocks out more: the price falls as the window closes later
    values = [W.WindowUpAndOutCall(window_end=b).reference(m) for b in (0.25, 0.5, 0.75, 1.0)]
    assert all(a > b for a, b in zip(values, values[1:]))


def test_reference_reads_the_terms_not_the_schedule():
    class LateDates(W.WindowDownAndInPut):
        def dates(self):
            return super().dates() + 0.5 / 12.0

    assert LateDates().reference(BlackScholes()) == W.WindowDownAndInPut().reference(BlackScholes())
    assert_caught(LateDates, "closed_form", paths=20_000)


def test_window_ends_in_order():
    with pytest.raises(ValueError, match="window_end=0.2 is before window_start=0.5"):
        W.WindowUpAndOutCall(window_start=0.5, window_end=0.2)
