"""The two-asset rainbow calls (Stulz) and the Gauss-Hermite weighted-sum options against
published values and against computations that share nothing with them (plain Monte Carlo
with its standard error, Margrabe, Black-Scholes, the best + worst identity)."""

from __future__ import annotations

import math

import numpy as np
import pytest

from limitcase.errors import ParamError
from limitcase.references import black_scholes, margrabe_exchange, two_asset_rainbow_call, weighted_sum_option

# a two-asset market (invented numbers)
S1, S2, T, R, Q1, Q2, V1, V2 = 100.0, 95.0, 1.0, 0.05, 0.01, 0.02, 0.25, 0.30


def _monte_carlo_two_assets(payoff, rho, paths=400_000, seed=11):
    """e^{-rT} E[payoff(S1, S2)] and its standard error by plain Monte Carlo (numpy normals,
    correlated by hand): independent of the code under test. Agreement is |diff| <= 4.5 SE
    (two-sided level about 7e-6 per check)."""
    x, y = np.random.default_rng(seed).standard_normal((2, paths))
    z2 = rho * x + math.sqrt(1.0 - rho * rho) * y
    a = S1 * np.exp((R - Q1 - 0.5 * V1 * V1) * T + V1 * math.sqrt(T) * x)
    b = S2 * np.exp((R - Q2 - 0.5 * V2 * V2) * T + V2 * math.sqrt(T) * z2)
    pay = math.exp(-R * T) * payoff(a, b)
    return pay.mean(), pay.std(ddof=1) / math.sqrt(paths)


@pytest.mark.published
def test_stulz_call_on_the_maximum_matches_haug():
    # E. G. Haug, The Complete Guide to Option Pricing Formulas, 2nd ed., 2007, "Options on
    # the maximum or the minimum of two risky assets" (Stulz 1982), worked example:
    # S1=100, S2=105, X=98, T=0.5, r=0.05, b1=-0.01, b2=-0.04, sigma1=0.11, sigma2=0.16,
    # rho=0.63: call on the maximum 8.0701 (from memory). q_i = r - b_i.
    value = two_asset_rainbow_call("max", 100.0, 105.0, 98.0, 0.5, 0.05, 0.06, 0.09, 0.11, 0.16, 0.63)
    assert value == pytest.approx(8.0701, abs=5e-5)


@pytest.mark.parametrize("rho", [-0.7, 0.0, 0.5, 0.95])
@pytest.mark.parametrize("strike", [0.0, 80.0, 100.0, 130.0])
def test_best_plus_worst_is_the_two_single_asset_calls(rho, strike):
    # max(a - K, 0) + max(b - K, 0) = max(max(a, b) - K, 0) + max(min(a, b) - K, 0), path by path
    best = two_asset_rainbow_call("max", S1, S2, strike, T, R, Q1, Q2, V1, V2, rho)
    worst = two_asset_rainbow_call("min", S1, S2, strike, T, R, Q1, Q2, V1, V2, rho)
    calls = black_scholes(S1, strike, T, R, Q1, V1) + black_scholes(S2, strike, T, R, Q2, V2)
    assert best + worst == pytest.approx(calls, abs=1e-9)


@pytest.mark.parametrize("rho", [-0.5, 0.5])
def test_worst_of_call_against_monte_carlo(rho):
    mean, se = _monte_carlo_two_assets(lambda a, b: np.maximum(np.minimum(a, b) - 90.0, 0.0), rho)
    value = two_asset_rainbow_call("min", S1, S2, 90.0, T, R, Q1, Q2, V1, V2, rho)
    assert abs(value - mean) <= 4.5 * se


def test_zero_strike_worst_of_is_the_asset_less_the_exchange_option():
    # min(a, b) = a - max(a - b, 0): Margrabe (1978)
    worst = two_asset_rainbow_call("min", S1, S2, 0.0, T, R, Q1, Q2, V1, V2, 0.3)
    margrabe = margrabe_exchange(S1, S2, T, Q1, Q2, V1, V2, 0.3)
    assert worst == pytest.approx(S1 * math.exp(-Q1 * T) - margrabe, abs=1e-10)


def test_rainbow_refuses_assets_that_move_as_one():
    with pytest.raises(ParamError, match="no volatility"):
        two_asset_rainbow_call("max", S1, S2, 100.0, T, R, Q1, Q2, 0.2, 0.2, 1.0)
    with pytest.raises(ParamError, match="kind='avg'"):
        two_asset_rainbow_call("avg", S1, S2, 100.0, T, R, Q1, Q2, V1, V2, 0.0)


# ---------------------------------------------------------------------------------------
# weighted sums by Gauss-Hermite quadrature


@pytest.mark.published
def test_zero_strike_spread_matches_haug_exchange_example():
    # Haug 2007, exchange-one-asset-for-another example (Margrabe 1978): S1=22, S2=20,
    # T=0.1, r=0.1, b1=0.04, b2=0.06, sigma1=0.2, sigma2=0.15, rho=-0.5: 2.1251 (from memory)
    value, err = weighted_sum_option("call", [1.0, -1.0], 0.0, 0.1, [22.0, 20.0], [0.2, 0.15], [0.06, 0.04], -0.5, 0.1)
    assert value == pytest.approx(2.1251, abs=5e-5)
    assert err < 1e-7


@pytest.mark.parametrize("rho", [-0.8, 0.0, 0.5, 0.9])
def test_zero_strike_spread_is_margrabe(rho):
    value, err = weighted_sum_option("call", [1.0, -1.0], 0.0, T, [S1, S2], [V1, V2], [Q1, Q2], rho, R)
    assert value == pytest.approx(margrabe_exchange(S1, S2, T, Q1, Q2, V1, V2, rho), abs=1e-7)
    assert err < 1e-6


@pytest.mark.parametrize(
    "weights, strike, rho",
    [([1.0, -1.0], 5.0, 0.5), ([1.0, -1.0], 10.0, -0.3), ([0.5, 0.5], 100.0, 0.5), ([0.7, 0.3], 90.0, 0.8)],
)
def test_two_asset_weighted_sum_against_monte_carlo(weights, strike, rho):
    w1, w2 = weights
    mean, se = _monte_carlo_two_assets(lambda a, b: np.maximum(w1 * a + w2 * b - strike, 0.0), rho)
    value, err = weighted_sum_option("call", weights, strike, T, [S1, S2], [V1, V2], [Q1, Q2], rho, R)
    assert err < 1e-6
    assert abs(value - mean) <= 4.5 * se


def test_put_by_parity_against_monte_carlo():
    mean, se = _monte_carlo_two_assets(lambda a, b: np.maximum(100.0 - 0.5 * a - 0.5 * b, 0.0), 0.5)
    value, _ = weighted_sum_option("put", [0.5, 0.5], 100.0, T, [S1, S2], [V1, V2], [Q1, Q2], 0.5, R)
    assert abs(value - mean) <= 4.5 * se


def test_one_asset_is_black_scholes():
    value, err = weighted_sum_option("call", [1.0], 100.0, T, [S1], [V1], [Q1], [[1.0]], R)
    assert value == pytest.approx(black_scholes(S1, 100.0, T, R, Q1, V1), abs=1e-10)
    assert err == 0.0


def test_assets_that_move_as_one_are_refused_not_mispriced():
    # correlation 1: no asset keeps any variance given the others; the quadrature would meet a kink
    w = np.array([4.0, 2.0, 1.0]) / 7.0
    with pytest.raises(ParamError, match="degenerate market"):
        weighted_sum_option("call", w, 100.0, T, [100.0, 95.0, 105.0], [V1] * 3, [Q1] * 3, np.ones((3, 3)), R)


def test_three_assets_with_a_rank_two_correlation_match_two_assets():
    # asset 3 is asset 1 again (correlation 1, same numbers): weights (0.3, 0.4, 0.3) on it
    # equal weights (0.6, 0.4) on two assets; the rank-deficient factor is exercised
    corr = np.array([[1.0, 0.5, 1.0], [0.5, 1.0, 0.5], [1.0, 0.5, 1.0]])
    three, _ = weighted_sum_option("call", [0.3, 0.4, 0.3], 100.0, T, [S1, S2, S1], [V1, V2, V1], [Q1, Q2, Q1], corr, R)
    two, _ = weighted_sum_option("call", [0.6, 0.4], 100.0, T, [S1, S2], [V1, V2], [Q1, Q2], 0.5, R)
    assert three == pytest.approx(two, abs=1e-6)


def test_three_assets_with_a_zero_weight_reduce_to_two():
    corr = np.array([[1.0, 0.5, 0.25], [0.5, 1.0, 0.5], [0.25, 0.5, 1.0]])
    spots, vols, divs = [S1, S2, 105.0], [V1, V2, 0.2], [Q1, Q2, 0.0]
    three, err3 = weighted_sum_option("call", [0.6, 0.0, 0.4], 100.0, T, spots, vols, divs, corr, R)
    two, _ = weighted_sum_option("call", [0.6, 0.4], 100.0, T, [S1, 105.0], [V1, 0.2], [Q1, 0.0], 0.25, R)
    assert err3 < 1e-6
    assert three == pytest.approx(two, abs=1e-6)


def test_three_asset_basket_against_monte_carlo_with_its_standard_error():
    # an independent check of the full three-dimensional case: plain Monte Carlo (numpy),
    # |diff| <= 4.5 SE (two-sided level about 7e-6)
    corr = np.array([[1.0, 0.5, 0.25], [0.5, 1.0, 0.5], [0.25, 0.5, 1.0]])
    spots, vols, divs = np.array([100.0, 95.0, 105.0]), np.array([0.25, 0.3, 0.2]), np.array([0.01, 0.02, 0.0])
    value, err = weighted_sum_option("call", [1 / 3] * 3, 100.0, T, spots, vols, divs, corr, R)
    z = np.random.default_rng(2024).standard_normal((400_000, 3)) @ np.linalg.cholesky(corr).T
    s = spots * np.exp((R - divs - 0.5 * vols**2) * T + vols * math.sqrt(T) * z)
    pay = math.exp(-R * T) * np.maximum(s.mean(axis=1) - 100.0, 0.0)
    se = pay.std(ddof=1) / math.sqrt(pay.size)
    assert err < 1e-6
    assert abs(value - pay.mean()) <= 4.5 * se


def test_weighted_sum_names_what_it_cannot_do():
    with pytest.raises(ParamError, match="4 assets.*1 to 3"):
        weighted_sum_option("call", [0.25] * 4, 100.0, T, [S1] * 4, [V1] * 4, [Q1] * 4, np.eye(4), R)
    with pytest.raises(ParamError, match="positive weight"):
        weighted_sum_option("call", [-1.0, -1.0], 0.0, T, [S1, S2], [V1, V2], [Q1, Q2], 0.0, R)
    with pytest.raises(ParamError, match="not positive semi-definite"):
        bad = [[1.0, 0.9, -0.9], [0.9, 1.0, 0.9], [-0.9, 0.9, 1.0]]
        weighted_sum_option("call", [1 / 3] * 3, 100.0, T, [S1] * 3, [V1] * 3, [Q1] * 3, bad, R)
