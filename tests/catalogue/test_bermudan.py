"""The early-exercise catalogue: every declared check passes, every check catches a
realistic bug, a published Longstaff-Schwartz case is met, and bad terms are refused.

A broken twin is a subclass of a shipped product with one bug in what exercise pays or in
what the exercise policy may look at; the named check is run on it alone and must fail.
The Longstaff-Schwartz pilot uses 32 768 paths here (65 536 in ``limitcase check``) to keep
the tests fast; the policy is then a little worse, which the checks allow for (the lattice
allowance) or do not care about (a worse policy only lowers the price).
"""

from __future__ import annotations

import numpy as np
import pytest

from limitcase.testing import assert_every_check_has_a_twin

from limitcase import BlackScholes, ParamError, checks_for, price
from limitcase.suite import run_checks
from limitcase.references import lattice_price
from limitcase.exercise import fit_policy
from limitcase.models import DividendBlackScholes
from limitcase.product import Observed
from limitcase_payoffs.bermudan import (
    DIVIDEND_SCENARIO,
    AmericanCall,
    AmericanCallCashDividend,
    AmericanPut,
    BermudanCall,
    BermudanPut,
)

PRODUCTS = [BermudanPut, BermudanCall, AmericanPut, AmericanCall, AmericanCallCashDividend]
PILOT = 1 << 15


def run(product, select=(), paths=20_000):
    checks = [c for c in checks_for(product) if not select or c.case in select]
    assert checks, f"no case {select} on {product}"
    return run_checks(checks, paths=paths, seed=20261201, regression_paths=PILOT)


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    result = run(product)
    assert result.ok, [(o.case, o.verdict, o.message) for o in result.outcomes if o.verdict != "pass"]


# --- realistic bugs ----------------------------------------------------------------------


def intrinsic(p, s):
    return np.maximum(s - p.strike, 0.0) if isinstance(p, (BermudanCall, AmericanCall)) else np.maximum(p.strike - s, 0.0)


class IgnoresTheLastDate:
    """exercise at the last date pays nothing (an off-by-one in the schedule)"""

    def exercise_value(self, obs):
        ex = intrinsic(self, obs.s)
        ex[:, -1] = 0.0
        return ex


class PaysTheNextDate:
    """exercise pays the intrinsic value of the next date (the fixing read one date late)"""

    def exercise_value(self, obs):
        return intrinsic(self, np.column_stack([obs.s[:, 1:], obs.s[:, -1:]]))


class FrozenAtTheFirstDate:
    """exercise pays the intrinsic value at the first date, whatever the date"""

    def exercise_value(self, obs):
        return intrinsic(self, np.repeat(obs.s[:, :1], obs.s.shape[1], axis=1))


class PolicySeesTheNextDate:
    """the regression state reads the price at the next date (the policy sees the future)"""

    def regression_state(self, obs, j):
        k = min(int(np.searchsorted(obs.t, self.exercise_dates()[j])) + 1, len(obs.t) - 1)
        return (obs.s[:, k] / obs.s0)[:, None]


class RegressesOnTheDate:
    """the regression state is the exercise date's time, not the price, and (as in a
    product that does not state one) no hold value: the policy is blind"""

    def regression_state(self, obs, j):
        return np.full((obs.paths, 1), float(self.exercise_dates()[j]))

    def hold_value(self, obs, j):
        return None


class NoEarlyExercise:
    """exercise pays only at the last date (the early-exercise mask built the wrong way round)"""

    def exercise_value(self, obs):
        ex = intrinsic(self, obs.s)
        ex[:, :-1] = 0.0
        return ex


def broken(bug, base):
    return type(f"{base.__name__}_{bug.__name__}", (bug, base), {"__module__": __name__})


TWINS = [
    (broken(IgnoresTheLastDate, BermudanPut), "one_exercise_date"),
    (broken(PaysTheNextDate, BermudanPut), "lattice"),
    (broken(PolicySeesTheNextDate, BermudanPut), "at_most_lattice"),
    (broken(FrozenAtTheFirstDate, BermudanPut), "above_european"),
    (broken(RegressesOnTheDate, BermudanPut), "more_dates_never_lower"),
    (broken(IgnoresTheLastDate, BermudanCall), "one_exercise_date"),
    (broken(PaysTheNextDate, BermudanCall), "no_dividend"),
    (broken(PaysTheNextDate, BermudanCall), "lattice"),
    (broken(PolicySeesTheNextDate, BermudanCall), "at_most_lattice"),
    (broken(FrozenAtTheFirstDate, BermudanCall), "above_european"),
    # the blind policy costs the call less (its early exercise is worth less): more paths
    (broken(RegressesOnTheDate, BermudanCall), "more_dates_never_lower", 80_000),
    (broken(PaysTheNextDate, AmericanPut), "lattice_american"),
    (broken(IgnoresTheLastDate, AmericanPut), "one_exercise_date"),
    (broken(PolicySeesTheNextDate, AmericanPut), "at_most_lattice"),
    (broken(FrozenAtTheFirstDate, AmericanPut), "above_european"),
    (broken(IgnoresTheLastDate, AmericanCall), "one_exercise_date"),
    (broken(PaysTheNextDate, AmericanCall), "no_dividend"),
    (broken(PaysTheNextDate, AmericanCall), "lattice_american"),
    (broken(PolicySeesTheNextDate, AmericanCall), "at_most_lattice"),
    (broken(FrozenAtTheFirstDate, AmericanCall), "above_european"),
    (broken(PaysTheNextDate, AmericanCallCashDividend), "lattice_american"),
    (broken(PaysTheNextDate, AmericanCallCashDividend), "no_dividend"),
    (broken(PolicySeesTheNextDate, AmericanCallCashDividend), "at_most_lattice"),
    (broken(FrozenAtTheFirstDate, AmericanCallCashDividend), "above_european"),
    (broken(NoEarlyExercise, AmericanCallCashDividend), "early_exercise_pays"),
]


CASES = [(t[0], t[1], t[2] if len(t) > 2 else 20_000) for t in TWINS]


@pytest.mark.parametrize("twin, case, paths", CASES, ids=[f"{t.__name__}-{c}" for t, c, _ in CASES])
def test_broken_twin_is_caught(twin, case, paths):
    outcome = run(twin, select=(case,), paths=paths).outcomes[0]
    assert outcome.verdict != "pass", f"{case} did not catch {twin.__name__}: {outcome.value} vs {outcome.reference}"


def test_every_declared_case_has_a_twin():
    assert_every_check_has_a_twin(PRODUCTS, [(t[0], t[1]) for t in TWINS])


# --- a published case ------------------------------------------------------------------


def test_american_put_meets_the_published_longstaff_schwartz_case():
    """Longstaff and Schwartz (2001), Review of Financial Studies 14(1), Table 1: K = 40,
    S = 36, sigma = 0.2, T = 1, r = 0.06, no dividends, 50 exercise dates: finite-difference
    American price 4.478, LSM 4.472 (s.e. 0.010) (from memory; the American value is
    recomputed here by the lattice). Our estimate may fall short of the American value by
    the declared regression allowance, and may not exceed it."""
    model = BlackScholes(spot=36.0, rate=0.06, dividend=0.0, vol=0.2)
    p = AmericanPut(strike=40.0)
    american = lattice_price(36.0, 40.0, 1.0, 0.06, 0.0, 0.2, "put", exercise="american")
    assert american == pytest.approx(4.478, abs=0.01)
    est = price(p, model, paths=40_000, seed=5, regression_paths=PILOT)
    allowance = AmericanPut.reductions[0].allowance(p, model)
    assert american - allowance - 4.0 * est.stderr < est.value < american + 4.0 * est.stderr
    assert abs(est.value - 4.472) < allowance + 4.0 * (est.stderr + 0.010)


# --- the exercise policy's hold value ----------------------------------------------------


def _observed(model, product, paths, seed):
    t = product.dates()
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((paths, len(t), model.normals_per_step()))
    sim = model.simulate(t, z, rng)
    step_var = sim.step_var[:, :, 0]
    return Observed(t, sim.s[:, :, 0], float(model.initial()[0]), model.rate, lambda: step_var,
                    float(model.dividend_yields()[0]))


def test_american_call_without_dividends_never_exercises_early():
    # Merton (1973): never exercise a call early on a stock without dividends (r > 0). The
    # hold-value floor makes the fitted policy agree on every pricing path.
    model = BlackScholes(spot=100.0, rate=0.05, dividend=0.0, vol=0.2)
    p = AmericanCall()
    policy = fit_policy(p, _observed(model, p, PILOT, 1), model.rate)
    cf = policy.cashflows(p, _observed(model, p, 50_000, 2))
    assert np.all(cf.time == p.maturity)
    assert sum(policy.floors) == len(p.exercise_dates()) - 1  # every date but the last


def test_hold_floor_is_refused_where_a_cash_dividend_makes_it_wrong():
    # The product's Black-Scholes hold value cannot see the cash dividend at 0.965: before
    # the ex-date it is too high and the pilot refuses it; after, it is right and is used.
    p = AmericanCallCashDividend()
    policy = fit_policy(p, _observed(DIVIDEND_SCENARIO, p, PILOT, 3), DIVIDEND_SCENARIO.rate)
    dates = p.exercise_dates()
    before = [f for f, t in zip(policy.floors, dates) if t < 0.965 - 0.1]
    after = [f for f, t in zip(policy.floors[:-1], dates[:-1]) if t > 0.965]
    assert not any(before) and all(after)
    cf = policy.cashflows(p, _observed(DIVIDEND_SCENARIO, p, 50_000, 4))
    assert np.mean(cf.time < 0.965) > 0.2  # early exercise, just before the ex-date


def test_nested_fewer_dates_are_among_the_dates():
    p = BermudanPut()
    fewer = checks_for(p)[-1].legs[0]
    assert fewer.exercises == 4 and set(fewer.dates()) <= set(p.dates())


# --- bad input ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "cls, kwargs, pattern",
    [
        (BermudanPut, {"exercises": 0}, r"exercises=0 is outside \[1, 1000\] integer for BermudanPut"),
        (AmericanCall, {"exercises": 1001}, r"exercises=1001 is outside \[1, 1000\] integer for AmericanCall"),
        (BermudanCall, {"strike": -5.0}, r"strike=-5\.0 is outside \[0, inf"),
        (AmericanPut, {"maturity": 0.0}, r"maturity=0\.0 is outside \(0, inf"),
    ],
)
def test_bad_terms_are_refused_clearly(cls, kwargs, pattern):
    with pytest.raises(ParamError, match=pattern):
        cls(**kwargs)
