"""European prices by log-normal quadrature against closed forms written here.

The closed forms below are the Black-Scholes-Merton call/put and the cash-or-nothing and
asset-or-nothing digitals (Reiner and Rubinstein 1991, as in Haug, *The Complete Guide to
Option Pricing Formulas*, 2nd ed., 2007, section 4.19), coded independently of the
library with :mod:`math` only.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase.errors import ParamError, PayoffError
from limitcase.references.quadrature import european_by_quadrature


def _n(x: float) -> float:
    return 0.5 * math.erfc(-x / math.sqrt(2.0))


def _d12(s, k, t, r, q, v):
    d1 = (math.log(s / k) + (r - q + 0.5 * v * v) * t) / (v * math.sqrt(t))
    return d1, d1 - v * math.sqrt(t)


def _bs(s, k, t, r, q, v, call):
    d1, d2 = _d12(s, k, t, r, q, v)
    if call:
        return s * math.exp(-q * t) * _n(d1) - k * math.exp(-r * t) * _n(d2)
    return k * math.exp(-r * t) * _n(-d2) - s * math.exp(-q * t) * _n(-d1)


def _cash_digital(s, k, t, r, q, v, cash, call):
    _, d2 = _d12(s, k, t, r, q, v)
    return cash * math.exp(-r * t) * _n(d2 if call else -d2)


def _asset_digital(s, k, t, r, q, v, call):
    d1, _ = _d12(s, k, t, r, q, v)
    return s * math.exp(-q * t) * _n(d1 if call else -d1)


GRID = [
    (k, t, v)
    for k in (50.0, 80.0, 100.0, 125.0, 200.0)
    for t in (0.02, 0.5, 3.0)
    for v in (0.05, 0.25, 0.8)
]
S, R, Q = 100.0, 0.05, 0.02
# Target accuracy stated in the docstring (1e-11 at spot 100); quad is asked for 1e-12
# relative / 1e-13 absolute per piece, with at most ~6 pieces.
TOL = 1e-11


@pytest.mark.parametrize("k,t,v", GRID)
def test_calls_and_puts_match_black_scholes(k, t, v):
    call = european_by_quadrature(lambda x: np.maximum(x - k, 0.0), S, t, R, Q, v, kinks=(k,))
    put = european_by_quadrature(lambda x: np.maximum(k - x, 0.0), S, t, R, Q, v, kinks=(k,))
    assert abs(call - _bs(S, k, t, R, Q, v, True)) < TOL
    assert abs(put - _bs(S, k, t, R, Q, v, False)) < TOL


@pytest.mark.parametrize("k,t,v", GRID)
def test_digitals_match_closed_forms(k, t, v):
    cash = 7.0
    c_call = european_by_quadrature(lambda x: np.where(x > k, cash, 0.0), S, t, R, Q, v, kinks=(k,))
    c_put = european_by_quadrature(lambda x: np.where(x < k, cash, 0.0), S, t, R, Q, v, kinks=(k,))
    a_call = european_by_quadrature(lambda x: np.where(x > k, x, 0.0), S, t, R, Q, v, kinks=(k,))
    a_put = european_by_quadrature(lambda x: np.where(x < k, x, 0.0), S, t, R, Q, v, kinks=(k,))
    assert abs(c_call - _cash_digital(S, k, t, R, Q, v, cash, True)) < TOL
    assert abs(c_put - _cash_digital(S, k, t, R, Q, v, cash, False)) < TOL
    assert abs(a_call - _asset_digital(S, k, t, R, Q, v, True)) < TOL
    assert abs(a_put - _asset_digital(S, k, t, R, Q, v, False)) < TOL


def test_moments_of_the_lognormal():
    # E[S_T^n] = S^n exp(n (r - q) T + n (n - 1) sigma^2 T / 2): a fact of the log-normal law.
    t, v = 2.0, 0.6
    for n in (1, 2, 3):
        got = european_by_quadrature(lambda x, n=n: x**n, S, t, R, Q, v)
        want = math.exp(-R * t) * S**n * math.exp(n * (R - Q) * t + 0.5 * n * (n - 1) * v * v * t)
        assert abs(got / want - 1.0) < 1e-12


def test_strangle_with_two_kinks_is_sum_of_put_and_call():
    k1, k2, t, v = 90.0, 115.0, 0.75, 0.3
    got = european_by_quadrature(
        lambda x: np.maximum(k1 - x, 0.0) + np.maximum(x - k2, 0.0), S, t, R, Q, v, kinks=(k1, k2)
    )
    assert abs(got - _bs(S, k1, t, R, Q, v, False) - _bs(S, k2, t, R, Q, v, True)) < TOL


def test_zero_vol_and_zero_maturity_are_discounted_payoff_of_forward():
    k = 95.0
    got = european_by_quadrature(lambda x: np.maximum(x - k, 0.0), S, 1.5, R, Q, 0.0)
    fwd = S * math.exp((R - Q) * 1.5)
    assert got == pytest.approx(math.exp(-R * 1.5) * (fwd - k), abs=1e-12)
    assert european_by_quadrature(lambda x: np.maximum(x - k, 0.0), S, 0.0, R, Q, 0.3) == pytest.approx(5.0)


def test_array_inputs_broadcast():
    ks = 100.0
    vols = np.array([0.1, 0.2, 0.4])
    got = european_by_quadrature(lambda x: np.maximum(x - ks, 0.0), S, 1.0, R, Q, vols, kinks=(ks,))
    assert got.shape == (3,)
    for g, v in zip(got, vols):
        assert abs(g - _bs(S, ks, 1.0, R, Q, v, True)) < TOL


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"spot": 0.0}, "spot=0.0"),
        ({"spot": -1.0}, "spot=-1.0"),
        ({"maturity": -0.5}, "maturity=-0.5"),
        ({"vol": -0.2}, "vol=-0.2"),
        ({"rate": float("nan")}, "rate=nan"),
        ({"kinks": (-3.0,)}, "kinks=-3.0"),
        ({"kinks": "abc"}, "kinks="),
    ],
)
def test_bad_input_raises_param_error(kwargs, match):
    args = {"spot": 100.0, "maturity": 1.0, "rate": 0.05, "dividend": 0.0, "vol": 0.2}
    kinks = kwargs.pop("kinks", ())
    args.update(kwargs)
    with pytest.raises(ParamError, match=match):
        european_by_quadrature(lambda x: x, kinks=kinks, **args)


def test_bad_payoff_raises_payoff_error():
    with pytest.raises(PayoffError, match="non-finite"):
        european_by_quadrature(lambda x: np.full_like(x, np.nan), 100.0, 1.0, 0.05, 0.0, 0.2)
    with pytest.raises(PayoffError, match="raised ZeroDivisionError"):
        european_by_quadrature(lambda x: 1 / 0, 100.0, 1.0, 0.05, 0.0, 0.2)
    with pytest.raises(ParamError, match="not callable"):
        european_by_quadrature(3.0, 100.0, 1.0, 0.05, 0.0, 0.2)
