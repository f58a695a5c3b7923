"""The Asian catalogue: every declared check passes, every check catches a realistic bug,
the closed forms the checks rest on agree with independent quadrature, and bad schedules
are refused clearly.

A broken twin is a subclass of a shipped product whose ``payoff`` carries one bug;
``assert_caught(twin, case)`` runs only that case on it and requires it to fail.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, stats

from limitcase import BlackScholes, Heston, ParamError
from limitcase.testing import assert_all_pass, assert_caught, assert_every_check_has_a_twin
from limitcase_payoffs.asians import (
    ArithmeticAsianCall,
    ArithmeticAsianPut,
    AverageForward,
    FloatingAsianCall,
    FloatingAsianPut,
    GeometricAsianCall,
    GeometricAsianPut,
    GeometricFloatingAsianCall,
    GeometricFloatingAsianPut,
)

PRODUCTS = [
    AverageForward,
    GeometricAsianCall,
    GeometricAsianPut,
    ArithmeticAsianCall,
    ArithmeticAsianPut,
    GeometricFloatingAsianCall,
    GeometricFloatingAsianPut,
    FloatingAsianCall,
    FloatingAsianPut,
]


@pytest.mark.parametrize("product", PRODUCTS, ids=lambda c: c.__name__)
def test_every_declared_check_passes(product):
    assert_all_pass(product, paths=20_000)


# --- broken twins ----------------------------------------------------------------------


def arith(s):
    return s.mean(axis=1)


def geo(s):
    return np.exp(np.log(s).mean(axis=1))


def with_spot(obs):
    return np.column_stack([np.full(obs.paths, obs.s0), obs.s])


def twin(base, bug, payoff):
    """A subclass of ``base`` whose payoff carries ``bug`` (a one-line description)."""
    return type(f"{base.__name__}Broken", (base,), {"payoff": payoff, "__doc__": bug, "__module__": __name__})


# Each line: a realistic bug in a shipped Asian, and the declared case that must see it.
TWINS = [
    # average-price forward: A - K
    (twin(AverageForward, "sums the fixings instead of averaging", lambda p, o: o.s.sum(axis=1) - p.strike), "closed_form"),
    (twin(AverageForward, "averages today's spot in", lambda p, o: arith(with_spot(o)) - p.strike), "put_call_parity"),
    (twin(AverageForward, "written from the short side", lambda p, o: p.strike - arith(o.s)), "decreasing_in_strike"),
    # geometric fixed strike
    (twin(GeometricAsianCall, "drops the last fixing", lambda p, o: np.maximum(geo(o.s[:, :-1]) - p.strike, 0.0)),
     "closed_form"),
    (twin(GeometricAsianCall, "averages today's spot in", lambda p, o: np.maximum(geo(with_spot(o)) - p.strike, 0.0)),
     "one_fixing"),
    (twin(GeometricAsianCall, "written as a put", lambda p, o: np.maximum(p.strike - geo(o.s), 0.0)),
     "decreasing_in_strike"),
    (twin(GeometricAsianCall, "capped at 10, a call spread", lambda p, o: np.clip(geo(o.s) - p.strike, 0.0, 10.0)),
     "convex_in_strike"),
    (twin(GeometricAsianPut, "drops the last fixing", lambda p, o: np.maximum(p.strike - geo(o.s[:, :-1]), 0.0)),
     "closed_form"),
    (twin(GeometricAsianPut, "averages today's spot in", lambda p, o: np.maximum(p.strike - geo(with_spot(o)), 0.0)),
     "one_fixing"),
    (twin(GeometricAsianPut, "absolute value for the positive part", lambda p, o: np.abs(p.strike - geo(o.s))),
     "zero_strike"),
    (twin(GeometricAsianPut, "written as a call", lambda p, o: np.maximum(geo(o.s) - p.strike, 0.0)),
     "increasing_in_strike"),
    (twin(GeometricAsianPut, "capped at 10, a put spread", lambda p, o: np.clip(p.strike - geo(o.s), 0.0, 10.0)),
     "convex_in_strike"),
    # arithmetic fixed strike
    (twin(ArithmeticAsianCall, "averages today's spot in", lambda p, o: np.maximum(arith(with_spot(o)) - p.strike, 0.0)),
     "one_fixing"),
    (twin(ArithmeticAsianCall, "averages today's spot in", lambda p, o: np.maximum(arith(with_spot(o)) - p.strike, 0.0)),
     "zero_strike"),
    (twin(ArithmeticAsianCall, "drops the first fixing", lambda p, o: np.maximum(arith(o.s[:, 1:]) - p.strike, 0.0)),
     "put_call_parity"),
    (twin(ArithmeticAsianCall, "drops the first fixing", lambda p, o: np.maximum(arith(o.s[:, 1:]) - p.strike, 0.0)),
     "above_geometric"),
    (twin(ArithmeticAsianCall, "written as a put", lambda p, o: np.maximum(p.strike - arith(o.s), 0.0)),
     "decreasing_in_strike"),
    (twin(ArithmeticAsianCall, "drops the last fixing", lambda p, o: np.maximum(arith(o.s[:, :-1]) - p.strike, 0.0)),
     "closed_form"),
    (twin(ArithmeticAsianCall, "capped at 10, a call spread", lambda p, o: np.clip(arith(o.s) - p.strike, 0.0, 10.0)),
     "convex_in_strike"),
    (twin(ArithmeticAsianPut, "averages today's spot in", lambda p, o: np.maximum(p.strike - arith(with_spot(o)), 0.0)),
     "one_fixing"),
    (twin(ArithmeticAsianPut, "absolute value for the positive part", lambda p, o: np.abs(p.strike - arith(o.s))),
     "zero_strike"),
    (twin(ArithmeticAsianPut, "drops the first fixing", lambda p, o: np.maximum(p.strike - arith(o.s[:, 1:]), 0.0)),
     "below_geometric"),
    (twin(ArithmeticAsianPut, "written as a call", lambda p, o: np.maximum(arith(o.s) - p.strike, 0.0)),
     "increasing_in_strike"),
    (twin(ArithmeticAsianPut, "drops the last fixing", lambda p, o: np.maximum(p.strike - arith(o.s[:, :-1]), 0.0)),
     "closed_form"),
    (twin(ArithmeticAsianPut, "capped at 10, a put spread", lambda p, o: np.clip(p.strike - arith(o.s), 0.0, 10.0)),
     "convex_in_strike"),
    # geometric floating strike
    (twin(GeometricFloatingAsianCall, "drops the last fixing",
          lambda p, o: np.maximum(o.s[:, -1] - p.ratio * geo(o.s[:, :-1]), 0.0)), "closed_form"),
    (twin(GeometricFloatingAsianCall, "averages today's spot in",
          lambda p, o: np.maximum(o.s[:, -1] - p.ratio * geo(with_spot(o)), 0.0)), "one_fixing"),
    (twin(GeometricFloatingAsianCall, "ratio on the wrong leg",
          lambda p, o: np.maximum(p.ratio * o.s[:, -1] - geo(o.s), 0.0)), "zero_ratio"),
    (twin(GeometricFloatingAsianCall, "drops the first fixing",
          lambda p, o: np.maximum(o.s[:, -1] - p.ratio * geo(o.s[:, 1:]), 0.0)), "put_call_parity"),
    (twin(GeometricFloatingAsianCall, "written as a put",
          lambda p, o: np.maximum(p.ratio * geo(o.s) - o.s[:, -1], 0.0)), "decreasing_in_ratio"),
    (twin(GeometricFloatingAsianCall, "capped at 10",
          lambda p, o: np.clip(o.s[:, -1] - p.ratio * geo(o.s), 0.0, 10.0)), "convex_in_ratio"),
    (twin(GeometricFloatingAsianPut, "drops the last fixing",
          lambda p, o: np.maximum(p.ratio * geo(o.s[:, :-1]) - o.s[:, -1], 0.0)), "closed_form"),
    (twin(GeometricFloatingAsianPut, "averages today's spot in",
          lambda p, o: np.maximum(p.ratio * geo(with_spot(o)) - o.s[:, -1], 0.0)), "one_fixing"),
    (twin(GeometricFloatingAsianPut, "ratio on the wrong leg",
          lambda p, o: np.maximum(geo(o.s) - p.ratio * o.s[:, -1], 0.0)), "zero_ratio"),
    (twin(GeometricFloatingAsianPut, "drops the first fixing",
          lambda p, o: np.maximum(p.ratio * geo(o.s[:, 1:]) - o.s[:, -1], 0.0)), "put_call_parity"),
    (twin(GeometricFloatingAsianPut, "written as a call",
          lambda p, o: np.maximum(o.s[:, -1] - p.ratio * geo(o.s), 0.0)), "increasing_in_ratio"),
    (twin(GeometricFloatingAsianPut, "capped at 10",
          lambda p, o: np.clip(p.ratio * geo(o.s) - o.s[:, -1], 0.0, 10.0)), "convex_in_ratio"),
    # arithmetic floating strike
    (twin(FloatingAsianCall, "averages today's spot in",
          lambda p, o: np.maximum(o.s[:, -1] - p.ratio * arith(with_spot(o)), 0.0)), "one_fixing"),
    (twin(FloatingAsianCall, "ratio on the wrong leg",
          lambda p, o: np.maximum(p.ratio * o.s[:, -1] - arith(o.s), 0.0)), "zero_ratio"),
    (twin(FloatingAsianCall, "drops the first fixing",
          lambda p, o: np.maximum(o.s[:, -1] - p.ratio * arith(o.s[:, 1:]), 0.0)), "put_call_parity"),
    (twin(FloatingAsianCall, "drops the first fixing",
          lambda p, o: np.maximum(o.s[:, -1] - p.ratio * arith(o.s[:, 1:]), 0.0)), "below_geometric"),
    (twin(FloatingAsianCall, "written as a put",
          lambda p, o: np.maximum(p.ratio * arith(o.s) - o.s[:, -1], 0.0)), "decreasing_in_ratio"),
    (twin(FloatingAsianCall, "capped at 10",
          lambda p, o: np.clip(o.s[:, -1] - p.ratio * arith(o.s), 0.0, 10.0)), "convex_in_ratio"),
    (twin(FloatingAsianPut, "averages today's spot in",
          lambda p, o: np.maximum(p.ratio * arith(with_spot(o)) - o.s[:, -1], 0.0)), "one_fixing"),
    (twin(FloatingAsianPut, "ratio on the wrong leg",
          lambda p, o: np.maximum(arith(o.s) - p.ratio * o.s[:, -1], 0.0)), "zero_ratio"),
    (twin(FloatingAsianPut, "drops the first fixing",
          lambda p, o: np.maximum(p.ratio * arith(o.s[:, 1:]) - o.s[:, -1], 0.0)), "put_call_parity"),
    (twin(FloatingAsianPut, "drops the first fixing",
          lambda p, o: np.maximum(p.ratio * arith(o.s[:, 1:]) - o.s[:, -1], 0.0)), "above_geometric"),
    (twin(FloatingAsianPut, "written as a call",
          lambda p, o: np.maximum(o.s[:, -1] - p.ratio * arith(o.s), 0.0)), "increasing_in_ratio"),
    (twin(FloatingAsianPut, "capped at 10",
          lambda p, o: np.clip(p.ratio * arith(o.s) - o.s[:, -1], 0.0, 10.0)), "convex_in_ratio"),
]


@pytest.mark.parametrize(
    "broken, case", TWINS, ids=[f"{b.__mro__[1].__name__}-{case}-{b.__doc__}" for b, case in TWINS]
)
def test_broken_twin_is_caught(broken, case):
    assert_caught(broken, case, paths=20_000)


def test_every_declared_case_has_a_twin():
    assert_every_check_has_a_twin(PRODUCTS, TWINS)


class AsianAveragingOverPaths(ArithmeticAsianCall):
    """Averages over the wrong axis (across paths at each date)."""

    def payoff(self, obs):
        return np.maximum(obs.s.mean(axis=0) - self.strike, 0.0)


def test_averaging_over_the_wrong_axis_is_an_error():
    result = assert_caught(AsianAveragingOverPaths, "one_fixing", paths=5_000)
    assert result.outcomes[0].verdict == "error"
    assert "shape" in result.outcomes[0].message


# --- the closed forms the checks rest on, against independent quadrature ----------------

MODEL = BlackScholes(spot=100.0, rate=0.05, dividend=0.02, vol=0.2)


def _log_moments(times, model):
    """Mean and covariance of (ln S(T), ln G) built from the Brownian increments:
    ln G = ln S0 + m tbar + (sigma/n) sum_i W(t_i) and W(t_i) = sum_{k<=i} dW_k, a route
    independent of the min(t_i, t_j) sums the products use."""
    n = len(times)
    dt = np.diff(times, prepend=0.0)
    weight_g = (n - np.arange(n)) / n  # how much of increment k enters the mean of the W(t_i)
    var_s = model.vol**2 * times[-1]
    var_g = model.vol**2 * np.sum(dt * weight_g**2)
    cov = model.vol**2 * np.sum(dt * weight_g)
    drift = model.rate - model.dividend - 0.5 * model.vol**2
    mean_s = math.log(model.spot) + drift * times[-1]
    mean_g = math.log(model.spot) + drift * times.mean()
    return mean_s, mean_g, var_s, var_g, cov


def _exchange_by_quadrature(times, model, ratio, call):
    """exp(-rT) E[max(+-(S(T) - k G), 0)]: integrate over ln G the conditional log-normal
    expectation of S(T) (scipy quad; the inner expectation is the log-normal partial mean)."""
    mean_s, mean_g, var_s, var_g, cov = _log_moments(times, model)
    beta = cov / var_g
    cond_var = var_s - beta * cov

    def inner(g):
        m = mean_s + beta * (g - mean_g)
        k = ratio * math.exp(g)
        sd = math.sqrt(cond_var)
        d1 = (m - math.log(k) + cond_var) / sd
        d2 = d1 - sd
        forward = math.exp(m + 0.5 * cond_var)
        c = forward * stats.norm.cdf(d1) - k * stats.norm.cdf(d2)
        return c if call else c - forward + k  # put by parity on the conditional law

    sd_g = math.sqrt(var_g)
    value, _ = integrate.quad(
        lambda z: inner(mean_g + sd_g * z) * stats.norm.pdf(z), -10, 10, epsabs=1e-11, epsrel=1e-11, limit=200
    )
    return math.exp(-model.rate * times[-1]) * value


@pytest.mark.parametrize("start, fixings, ratio", [(0.0, 12, 1.0), (0.5, 5, 1.0), (0.0, 52, 0.9), (0.25, 7, 1.2)])
@pytest.mark.parametrize("cls, call", [(GeometricFloatingAsianCall, True), (GeometricFloatingAsianPut, False)])
def test_geometric_floating_closed_form_matches_quadrature(cls, call, start, fixings, ratio):
    p = cls(start=start, fixings=fixings, ratio=ratio)
    expected = _exchange_by_quadrature(p.dates(), MODEL, ratio, call)
    assert p.reference(MODEL) == pytest.approx(expected, rel=1e-8, abs=1e-10)


def test_geometric_floating_one_fixing_is_worthless_and_zero_ratio_is_the_asset():
    assert GeometricFloatingAsianCall(fixings=1).reference(MODEL) == pytest.approx(0.0, abs=1e-12)
    # ratio -> 0: the call pays S(T), worth S0 exp(-qT) (common practice)
    tiny = GeometricFloatingAsianCall(ratio=1e-12).reference(MODEL)
    assert tiny == pytest.approx(100.0 * math.exp(-0.02), rel=1e-9)


def test_average_forward_reference_is_the_mean_of_discounted_forwards():
    p = AverageForward(strike=95.0, start=0.25, fixings=3)
    t = np.array([0.5, 0.75, 1.0])
    expected = math.exp(-0.05) * (np.mean(100.0 * np.exp(0.03 * t)) - 95.0)
    assert p.reference(MODEL) == pytest.approx(expected, rel=1e-13)


# --- control variates ------------------------------------------------------------------


@pytest.mark.parametrize("cls, twin_cls", [(ArithmeticAsianCall, GeometricAsianCall), (ArithmeticAsianPut, GeometricAsianPut)])
def test_control_variate_is_the_geometric_asian_on_the_same_fixings(cls, twin_cls):
    p = cls(strike=95.0, fixings=7, start=0.2, maturity=1.5)
    ((cv, value),) = p.control_variates(MODEL)
    assert type(cv) is twin_cls
    assert cv.params() == p.params()
    np.testing.assert_array_equal(cv.dates(), p.dates())
    assert value == cv.reference(MODEL)


def test_no_control_variate_where_there_is_no_closed_form():
    assert ArithmeticAsianCall().control_variates(Heston()) == ()


# --- schedules and bad input -----------------------------------------------------------


def test_fixings_are_equally_spaced_over_the_window():
    np.testing.assert_allclose(ArithmeticAsianCall(start=0.4, fixings=3).dates(), [0.6, 0.8, 1.0], rtol=1e-15)
    np.testing.assert_allclose(ArithmeticAsianCall(fixings=4).dates(), [0.25, 0.5, 0.75, 1.0], rtol=1e-15)


@pytest.mark.parametrize(
    "kwargs, pattern",
    [
        ({"start": 1.0}, r"start=1\.0 is not before maturity=1\.0 for ArithmeticAsianCall.*0 <= start < maturity"),
        ({"start": -0.1}, r"start=-0\.1 is outside \[0, inf[])]"),
        ({"fixings": 0}, r"fixings=0 is outside \[1, 10000\] integer"),
        ({"fixings": 2.5}, r"fixings=2\.5 is not a whole number"),
        ({"strike": -1.0}, r"strike=-1\.0 is outside \[0, inf[])]"),
    ],
)
def test_bad_terms_are_refused_clearly(kwargs, pattern):
    with pytest.raises(ParamError, match=pattern):
        ArithmeticAsianCall(**kwargs)


def test_bad_ratio_is_refused_clearly():
    with pytest.raises(ParamError, match=r"ratio=-0\.5 is outside \[0, inf[])] for FloatingAsianCall"):
        FloatingAsianCall(ratio=-0.5)
