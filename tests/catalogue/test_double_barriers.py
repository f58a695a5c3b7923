"""Double-barrier options: every declared check passes, every declared check catches a
realistic bug, and the quadrature reference the products use meets an independent Monte
Carlo-free recomputation (one monitoring date, scipy quadrature written here).

Broken twins override ``payoff`` with one bug each, written out the way a product author
would slip; each of the four classes gets a twin for each of its checks.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase import BlackScholes
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs import double_barriers as D

PRODUCTS = list(D.FAMILY.values())


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    """At 20 000 paths. At 10 000 paths and the default seed, DoubleKnockOutPut's
    closed_form_one_date drew z = 3.42 (a false alarm: over seeds 0-24 its z has mean -0.08
    and standard deviation 0.82, and the reference agrees with a scipy quadrature to 1e-15)."""
    assert_all_pass(product, paths=20_000)


# --- broken payoffs ------------------------------------------------------------------------


def _vanilla(p, s):
    return np.maximum(s - p.strike, 0.0) if p.call else np.maximum(p.strike - s, 0.0)


def _settle(p, alive, vanilla, rebate=None):
    rebate = p.rebate if rebate is None else rebate
    return np.where(alive, vanilla, rebate) if p.out else np.where(alive, rebate, vanilla)


def _path(obs):
    return np.column_stack([np.full(obs.paths, obs.s0), obs.s])


def only_at_maturity(self, obs):
    """Tests the corridor on the last date only."""
    s = obs.s[:, -1]
    return _settle(self, (s > self.lower) & (s < self.upper), _vanilla(self, s))


def ignores_lower(self, obs):
    """Forgets the lower barrier."""
    return _settle(self, np.all(_path(obs) < self.upper, axis=1), _vanilla(self, obs.s[:, -1]))


def ignores_upper(self, obs):
    """Forgets the upper barrier."""
    return _settle(self, np.all(_path(obs) > self.lower, axis=1), _vanilla(self, obs.s[:, -1]))


def today_not_checked(self, obs):
    """Monitors the dates but not today's spot."""
    s = obs.s
    return _settle(self, np.all((s > self.lower) & (s < self.upper), axis=1), _vanilla(self, obs.s[:, -1]))


def _alive(self, obs):
    s = _path(obs)
    return np.all((s > self.lower) & (s < self.upper), axis=1)


def rebate_dropped(self, obs):
    """Never pays the rebate."""
    return _settle(self, _alive(self, obs), _vanilla(self, obs.s[:, -1]), rebate=0.0)


def rebate_always(self, obs):
    """Adds the rebate whether or not the option is alive."""
    return _settle(self, _alive(self, obs), _vanilla(self, obs.s[:, -1]), rebate=0.0) + self.rebate


def outcomes_swapped(self, obs):
    """The two branches swapped: the vanilla when the knock-out is dead (the knock-in alive)."""
    return _settle(self, ~_alive(self, obs), _vanilla(self, obs.s[:, -1]))


def vanilla_absolute(self, obs):
    """|S(T) - K| instead of the positive part."""
    return _settle(self, _alive(self, obs), np.abs(obs.s[:, -1] - self.strike))


def vanilla_unfloored(self, obs):
    """S(T) - K (or K - S(T)) without the floor at 0."""
    s = obs.s[:, -1]
    return _settle(self, _alive(self, obs), (s - self.strike) if self.call else (self.strike - s))


def upper_inclusive(self, obs):
    """Treats S = U as inside the corridor (S <= U instead of S < U)."""
    s = _path(obs)
    return _settle(self, np.all((s > self.lower) & (s <= self.upper), axis=1), _vanilla(self, obs.s[:, -1]))


def lower_inclusive(self, obs):
    """Treats S = L as inside the corridor (S >= L instead of S > L)."""
    s = _path(obs)
    return _settle(self, np.all((s >= self.lower) & (s < self.upper), axis=1), _vanilla(self, obs.s[:, -1]))


BUGS_OUT = {
    "on_the_upper_barrier": upper_inclusive,
    "tie_at_lower": lower_inclusive,
    "tie_at_upper": upper_inclusive,
    "corridor_out_of_reach": rebate_always,
    "no_lower_barrier": ignores_upper,
    "no_upper_barrier": ignores_lower,
    "touched_today": today_not_checked,
    "closed_form": only_at_maturity,
    "closed_form_rebate": rebate_dropped,
    "closed_form_one_date": vanilla_unfloored,
    "in_plus_out_is_vanilla": only_at_maturity,
    "at_most_vanilla": vanilla_absolute,
    "worth_more_as_corridor_widens": outcomes_swapped,
}
BUGS_IN = dict(BUGS_OUT)
BUGS_IN.update({
    "corridor_out_of_reach": outcomes_swapped,
    "worth_less_as_corridor_widens": outcomes_swapped,
})
del BUGS_IN["worth_more_as_corridor_widens"]


def _twin(product, bug):
    return type(f"{product.__name__}_{bug.__name__}", (product,), {"payoff": bug, "__doc__": bug.__doc__})


BROKEN = [
    (_twin(product, bug), case)
    for product in PRODUCTS
    for case, bug in (BUGS_OUT if product.out else BUGS_IN).items()
]


@pytest.mark.parametrize("broken, case", BROKEN, ids=lambda x: x if isinstance(x, str) else x.__name__)
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=10_000)


def test_every_declared_check_has_a_broken_twin():
    assert_every_check_has_a_twin(PRODUCTS, BROKEN)


# --- the reference, independently -----------------------------------------------------------


def test_reference_on_one_date_meets_scipy_quadrature():
    """One monitoring date (T) and today: the knock-out call pays max(S(T) - K, 0) inside
    (L, U) and R outside; written here as a scipy quadrature over the normal density."""
    p = D.DoubleKnockOutCall(monitoring=1, rebate=2.0, lower=85.0, upper=120.0, strike=95.0)
    m = BlackScholes(spot=100.0, rate=0.05, dividend=0.02, vol=0.2)
    nu, sd = 0.05 - 0.02 - 0.02, 0.2
    z = lambda level: (math.log(level / 100.0) - nu) / sd
    inside, _ = integrate.quad(lambda x: max(100.0 * math.exp(nu + sd * x) - 95.0, 0.0) * norm.pdf(x),
                               z(95.0), z(120.0), epsabs=1e-13)
    outside = norm.cdf(z(85.0)) + norm.sf(z(120.0))
    want = math.exp(-0.05) * (inside + 2.0 * outside)
    assert p.reference(m) == pytest.approx(want, abs=1e-10)


def test_reference_reads_the_terms_not_the_schedule():
    """A product whose ``dates()`` is wrong keeps the reference of its terms, so the
    closed-form check sees the schedule bug."""

    class ShiftedSchedule(D.DoubleKnockOutPut):
        def dates(self):
            return super().dates() * 0.5

    m = BlackScholes()
    assert ShiftedSchedule().reference(m) == D.DoubleKnockOutPut().reference(m)
    assert_caught(ShiftedSchedule, "closed_form", paths=10_000)


def test_lower_not_below_upper_is_refused():
    with pytest.raises(ValueError, match=r"lower=130\.0 is not below upper=125\.0"):
        D.DoubleKnockOutCall(lower=130.0)
