"""Interior parameter points: drawn reproducibly, inside the ranges, away from special values,
respecting constraints; a bug that only shows away from round values is caught there and
shrunk toward the defaults; the validity rule and the reference's accuracy floor."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import bernoulli

from limitcase import BlackScholes, Param, Product
from limitcase.checks import Check, Origin
from limitcase.errors import ParamError
from limitcase.estimates import Joint
from limitcase.interior import POINT_MARK, draw_value, interior_checks, shrink
from limitcase.plan import plan_checks
from limitcase.settings import CLT_MIN_PAYING, INNER_PATH_SHARE, INNER_WINDOW, REFERENCE_ACCURACY
from limitcase.suite import run_checks
from limitcase.verdict import decide, normal_approximation, reference_accuracy
from limitcase_payoffs.barriers import DownAndOutCall
from limitcase_payoffs.double_barriers import DoubleKnockOutCall
from limitcase_payoffs.vanilla import EuropeanCall


def _points(cls, seeds=range(1, 6)):
    return [c for s in seeds for c in interior_checks(cls, seed=s) if c.origin is not None]


def test_reals_are_drawn_off_round_values_inside_the_window_and_counts_as_counts():
    checks = _points(DownAndOutCall)
    assert checks
    specs = DownAndOutCall.param_specs()
    for c in checks:
        values = c.origin.product.params()
        for name, spec in specs.items():
            v = values[name]
            assert spec.contains(v)
            if spec.integer:
                assert isinstance(v, int)
                continue
            d = spec.default
            if d in (spec.low, spec.high):  # a default at an end (no rebate) is a choice of contract: kept
                assert v == d
                continue
            half = INNER_WINDOW * abs(d)
            assert d - half <= v <= d + half
            assert abs(v - d) > 0.01 * half  # away from the default
            if half >= 1.0:  # away from whole numbers and halves
                assert abs(2 * v - round(2 * v)) > 0.09, (name, v)
    strikes = {c.origin.product.strike for c in checks}
    assert len(strikes) > 1  # different seeds, different points


def test_same_seed_same_points_and_the_case_name_carries_the_point():
    a = interior_checks(EuropeanCall, seed=7)
    b = interior_checks(EuropeanCall, seed=7)
    assert [c.case for c in a] == [c.case for c in b]
    assert [c.origin.product for c in a] == [c.origin.product for c in b]
    assert all(c.case.endswith(f"{POINT_MARK}1") for c in a)
    assert all(c.path_share == INNER_PATH_SHARE for c in a)
    assert interior_checks(EuropeanCall, seed=8)[0].origin.product != a[0].origin.product
    two = interior_checks(EuropeanCall, seed=7, points=2)
    assert {c.case.rsplit(POINT_MARK, 1)[1] for c in two} == {"1", "2"}
    assert interior_checks(EuropeanCall, seed=7, points=0) == []


def test_count_draws_are_whole_and_switches_keep_their_default():
    rng = np.random.default_rng(1)
    count = Param(12, low=1, high=10000, integer=True)
    switch = Param(1, low=0, high=1, integer=True)
    drawn = {draw_value(count, rng) for _ in range(200)}
    assert all(isinstance(v, int) and v != 12 and 1 < v for v in drawn)
    assert drawn <= set(range(9, 16))
    assert {draw_value(switch, rng) for _ in range(20)} == {1}
    assert draw_value(Param(math.inf, low=0.0), rng) == math.inf


class _Corridor(Product):
    """A corridor whose constraint (lower below upper) most independent draws break:
    pays 1 at T if lower < S(T) < upper."""

    lower = Param(100.0, low=0.0)
    upper = Param(101.0, low=0.0)
    maturity = Param(1.0, low=0.0, low_open=True)

    def _check(self) -> None:
        if not self.lower < self.upper:
            raise ParamError(f"lower={self.lower} must be below upper={self.upper}")

    def dates(self):
        return np.array([self.maturity])

    def payoff(self, obs):
        s = obs.s[:, -1]
        return ((s > self.lower) & (s < self.upper)).astype(float)

    from limitcase import Monotone

    relations = (Monotone("upper", +1, to=lambda p: p.upper + 1.0),)


def test_constraints_between_parameters_are_respected_by_drawing_again():
    checks = _points(_Corridor, seeds=range(1, 21))
    assert len(checks) == 20
    assert all(c.origin.product.lower < c.origin.product.upper for c in checks)


def test_double_barrier_points_keep_the_corridor_ordered():
    for c in _points(DoubleKnockOutCall, seeds=range(1, 4)):
        p = c.origin.product
        assert p.lower < p.upper


class _FlooredStrikeCall(EuropeanCall):
    """A realistic bug that only shows off round values: the strike truncated to a whole
    number in the payoff (``int(K)``), right at K = 100."""

    def payoff(self, obs):
        return np.maximum(obs.s[:, -1] - math.floor(self.strike), 0.0)


def test_a_bug_only_off_round_values_fails_at_an_interior_point_and_is_shrunk():
    checks, _ = plan_checks([_FlooredStrikeCall], inner_points=1, seed=3)
    chosen = [c for c in checks if c.case.startswith("closed_form")]
    result = run_checks(chosen, paths=40_000, seed=3, workers=1)
    by_case = {o.case: o for o in result.outcomes}
    assert by_case["closed_form"].verdict == "pass"  # at K = 100 the bug pays the same
    inner = by_case[f"closed_form{POINT_MARK}1"]
    assert inner.verdict == "fail", inner
    drawn = dict(next(c for c in chosen if c.origin).origin.drawn)["strike"]
    assert "drawn point: " in inner.message and "simplest failing point found: " in inner.message
    text = inner.message.split("simplest failing point found: ")[1]
    simplest = float(text.split("strike=")[1].split(",")[0].split(" ")[0])
    assert abs(simplest - 100.0) < abs(drawn - 100.0)  # moved toward the default, still failing
    assert simplest != math.floor(simplest)


def test_shrink_moves_each_parameter_half_way_while_the_check_still_fails():
    check = next(c for c in interior_checks(EuropeanCall, seed=5) if c.case.startswith("closed_form"))
    start = check.origin.product
    seen = []

    gap = abs(start.strike - 100.0)

    def fails(c: Check) -> bool:  # "fails" while the strike stays a quarter of the way out
        seen.append(c.origin.product)
        return abs(c.origin.product.strike - 100.0) >= gap / 4

    simplest, spent = shrink(check, fails, rounds=6, budget=40)
    assert spent == len(seen) == 12  # two parameters, six rounds
    assert simplest.strike == pytest.approx(100.0 + (start.strike - 100.0) / 4)  # halved twice, then kept
    assert simplest.maturity == pytest.approx(1.0 + (start.maturity - 1.0) / 2**6)  # halved every round
    assert shrink(check, fails, rounds=6, budget=3)[1] == 3  # the budget holds


def test_validity_rule_is_the_squared_skewness_of_the_paying_indicator():
    n = 50_000
    for k in (40, 200, 1000, 1100, 20_000):
        q = k / n
        skew = float(bernoulli.stats(q, moments="s"))  # scipy's skewness of a Bernoulli(q)
        ratio = n / skew**2
        why = normal_approximation((k,), n, (1.0,))
        assert (why is not None) == (ratio < CLT_MIN_PAYING), (k, ratio)
    assert normal_approximation((40,), n, (1.0,)) is not None
    assert normal_approximation((49_990,), n, (1.0,)) is None  # paying is not the rare side
    assert "none of" in normal_approximation((0,), n, (1.0,))  # pays nothing: no evidence about a rare payment
    assert normal_approximation((n,), n, (1.0,)) is None  # pays on every path
    assert normal_approximation((10,), n, (0.0,)) is None  # a leg the statistic does not weigh


MODEL = BlackScholes(spot=100.0, rate=0.05, dividend=0.02, vol=0.2)


def _joint(value: float, se: float, paying: int = 50_000, paths: int = 50_000) -> Joint:
    return Joint(paths=paths, mean=np.array([value]), cov=np.array([[se * se * paths]]), paying=(paying,))


def test_a_worthless_products_quadrature_reference_is_not_a_false_alarm():
    # the case met before: the reference says 1e-14, Monte Carlo 3e-17 with stderr 1e-18
    check = Check(product="P", case="c", kind="reduction", legs=(EuropeanCall(),), model=MODEL, weights=(1.0,),
                  target=1e-14)
    assert reference_accuracy(check) == pytest.approx(REFERENCE_ACCURACY * 100.0)
    assert decide(check, _joint(3e-17, 1e-18), 1).p_value == 1.0
    # a real gap, above the accuracy of the reference, still fails
    far = Check(product="P", case="c", kind="reduction", legs=(EuropeanCall(),), model=MODEL, weights=(1.0,),
                target=1e-5)
    assert decide(far, _joint(3e-17, 1e-18), 1).p_value < 1e-12
    # an identity (target 0) is exact: no floor
    exact = Check(product="P", case="c", kind="relation", legs=(EuropeanCall(),), model=MODEL, weights=(1.0,))
    assert reference_accuracy(exact) == 0.0


def test_an_interior_comparison_on_too_few_paying_paths_is_skipped_not_failed():
    origin = Origin(product=EuropeanCall(), model=MODEL, base_case="c", index=1)
    check = Check(product="P", case="c@p1", kind="reduction", legs=(EuropeanCall(),), model=MODEL,
                  weights=(1.0,), target=1.0, origin=origin)
    out = decide(check, _joint(0.5, 0.01, paying=30), 1)
    assert out.verdict == "skip" and "too few paying paths" in out.message
    assert decide(check, _joint(0.5, 0.01, paying=20_000), 1).p_value < 1e-12  # enough: tested, and fails
    at_default = Check(product="P", case="c", kind="reduction", legs=(EuropeanCall(),), model=MODEL,
                       weights=(1.0,), target=1.0)
    assert decide(at_default, _joint(0.5, 0.01, paying=30), 1).verdict == "pass"  # decided later by Holm
