"""One-touch and no-touch options: every declared check passes, every declared check
catches a realistic bug, and the quadrature reference the products use meets an
independent recomputation (one monitoring date: a cash digital, in closed form here)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import norm

from limitcase import BlackScholes, Cashflows
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs import touch as T

PRODUCTS = [T.OneTouchUp, T.OneTouchDown, T.NoTouchUp, T.NoTouchDown]


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    assert_all_pass(product, paths=20_000)


# --- broken payoffs ------------------------------------------------------------------------


def _settle(p, untouched, obs):
    """Pays as the product would with the survival indicator ``untouched`` (today, dates)."""
    if not p.one:
        return p.cash * untouched[:, -1]
    if not p.pay_at_hit:
        return p.cash * (1.0 - untouched[:, -1])
    first = -np.diff(untouched, axis=1, prepend=1.0)
    return Cashflows(p.cash * first, np.concatenate([[0.0], obs.t]))


def _stay(p, s):
    return (s < p.barrier) if p.up else (s > p.barrier)


def wrong_side(self, obs):
    """An up barrier tested as a down one (and vice versa)."""
    s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
    stay = (s > self.barrier) if self.up else (s < self.barrier)
    return _settle(self, np.cumprod(stay.astype(float), axis=1), obs)


def today_not_checked(self, obs):
    """Monitors the dates but not today's spot."""
    stay = np.column_stack([np.ones(obs.paths), _stay(self, obs.s)]).astype(float)
    return _settle(self, np.cumprod(stay, axis=1), obs)


def only_at_maturity(self, obs):
    """Tests the barrier on the last date only."""
    alive = _stay(self, obs.s[:, -1]).astype(float)
    untouched = np.column_stack([np.ones((obs.paths, obs.s.shape[1])), alive])
    return _settle(self, untouched, obs)


def always_at_expiry(self, obs):
    """Ignores ``pay_at_hit``: pays the touch at T."""
    return self.cash * (1.0 - self.untouched(obs)[:, -1])


def outcomes_swapped(self, obs):
    """The two branches swapped: pays C at T when the one-touch should not (the no-touch
    when it should not)."""
    alive = self.untouched(obs)[:, -1]
    return self.cash * (alive if self.one else 1.0 - alive)


BUGS_ONE = {
    "barrier_out_of_reach": wrong_side,
    "touched_today": today_not_checked,
    "touched_today_paid_now": always_at_expiry,
    "closed_form": only_at_maturity,
    "closed_form_paid_at_expiry": only_at_maturity,
    "closed_form_one_date": wrong_side,
    "one_touch_plus_no_touch_is_bond": only_at_maturity,
    "worth_less_as_barrier_moves_away": outcomes_swapped,
}
BUGS_NO = {
    "barrier_out_of_reach": wrong_side,
    "touched_today": today_not_checked,
    "closed_form": only_at_maturity,
    "closed_form_one_date": wrong_side,
    "one_touch_plus_no_touch_is_bond": only_at_maturity,
    "worth_more_as_barrier_moves_away": outcomes_swapped,
}


def _twin(product, bug):
    return type(f"{product.__name__}_{bug.__name__}", (product,), {"payoff": bug, "__doc__": bug.__doc__})


def untouched_strict(self, obs):
    """A fixing exactly on the barrier does not touch it (S > H for an up barrier instead of S >= H)."""
    s = np.column_stack([np.full(obs.paths, obs.s0), obs.s])
    stay = (s <= self.barrier) if self.up else (s >= self.barrier)
    return np.cumprod(stay.astype(float), axis=1)


BROKEN = [
    (_twin(product, bug), case)
    for product in PRODUCTS
    for case, bug in (BUGS_ONE if product.one else BUGS_NO).items()
] + [
    (type(f"{product.__name__}_untouched_strict", (product,), {"untouched": untouched_strict}), "tie_at_barrier")
    for product in PRODUCTS
]


@pytest.mark.parametrize("broken, case", BROKEN, ids=lambda x: x if isinstance(x, str) else x.__name__)
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=10_000)


def test_every_declared_check_has_a_broken_twin():
    assert_every_check_has_a_twin(PRODUCTS, BROKEN)


# --- the reference, independently -----------------------------------------------------------


@pytest.mark.parametrize("up", [True, False])
def test_one_date_is_a_cash_digital(up):
    """One monitoring date at T (today not touched): the one-touch paid at T is the cash
    digital C exp(-rT) N(+-d2) on the barrier, written out here (Reiner and Rubinstein 1991)."""
    m = BlackScholes(spot=100.0, rate=0.05, dividend=0.02, vol=0.2)
    h = 113.0 if up else 91.0
    product = (T.OneTouchUp if up else T.OneTouchDown)(barrier=h, monitoring=1, pay_at_hit=0, cash=2.0)
    d2 = (math.log(100.0 / h) + (0.05 - 0.02 - 0.02)) / 0.2
    digital = 2.0 * math.exp(-0.05) * (norm.cdf(d2) if up else norm.cdf(-d2))
    assert product.reference(m) == pytest.approx(digital, abs=1e-10)
    no = (T.NoTouchUp if up else T.NoTouchDown)(barrier=h, monitoring=1, cash=2.0)
    assert no.reference(m) == pytest.approx(2.0 * math.exp(-0.05) - digital, abs=1e-10)


def test_reference_reads_the_terms_not_the_schedule():
    """A product with a wrong ``dates()`` keeps the reference of its terms, and the
    closed-form check sees the schedule bug."""

    class HalfSchedule(T.NoTouchDown):
        def dates(self):
            return super().dates()[::2]

    m = BlackScholes()
    assert HalfSchedule().reference(m) == T.NoTouchDown().reference(m)
    assert_caught(HalfSchedule, "closed_form", paths=20_000)
