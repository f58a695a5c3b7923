"""Geometric Asians and continuously monitored lookbacks.

Independent recomputations, written here with scipy alone: the geometric average by
quadrature under the normal law of its logarithm (mean and covariance built from the
fixing times by brute force), lookbacks by the layer-cake formula over the distribution of
the running maximum / minimum of a Brownian motion with drift (reflection principle).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.special import log_ndtr, ndtr
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references import (
    black_scholes,
    geometric_asian,
    geometric_asian_continuous,
    lookback_fixed,
    lookback_floating,
)


def _quad(f, a, b, points=()):
    edges = [a, *sorted(p for p in points if a < p < b), b]
    val = err = 0.0
    for lo, hi in zip(edges[:-1], edges[1:]):
        v, e = integrate.quad(f, lo, hi, epsabs=1e-13, epsrel=1e-12, limit=300)
        val += v
        err += e
    return val, err


def quad_tolerance(err_estimate, scale):
    """100 x quad's error estimate, floored at 1e-10 * scale (round-off)."""
    return max(100.0 * err_estimate, 1e-10 * scale)


# ---------------------------------------------------------------------------------------
# geometric Asians
# ---------------------------------------------------------------------------------------
def normal_payoff_quad(kind, strike, mean, sd, df):
    """df * E[payoff(exp(Y))], Y ~ N(mean, sd^2), by quadrature split at ln K."""
    payoff = (lambda g: max(g - strike, 0.0)) if kind == "call" else (lambda g: max(strike - g, 0.0))
    val, err = _quad(lambda y: payoff(math.exp(y)) * norm.pdf(y, mean, sd), mean - 12 * sd, mean + 12 * sd, (math.log(strike),))
    return df * val, df * err


def geometric_by_quadrature(kind, s, k, times, r, q, v):
    times = np.asarray(times, dtype=float)
    n = times.size
    cov = v * v * np.minimum.outer(times, times)  # Cov(ln S_ti, ln S_tj) = sigma^2 min(ti, tj)
    mean = math.log(s) + (r - q - 0.5 * v * v) * times.mean()
    sd = math.sqrt(cov.sum()) / n
    return normal_payoff_quad(kind, k, mean, sd, math.exp(-r * times.max()))


@pytest.mark.published
def test_kemna_vorst_haug_example():
    # E. G. Haug, The Complete Guide to Option Pricing Formulas, 2nd ed., 2007, geometric
    # average rate option (Kemna and Vorst 1990): put, S=80, K=85, T=0.25, r=0.05, b=0.08
    # (q=-0.03), sigma=0.2: 4.6922 (from memory; recomputed below from the law of ln G,
    # mean ln S + (b - sigma^2/2) T/2 and variance sigma^2 T/3).
    price = geometric_asian_continuous(80.0, 85.0, 0.25, 0.05, -0.03, 0.2, "put")
    assert abs(price - 4.6922) <= 5e-5
    ref, err = normal_payoff_quad("put", 85.0, math.log(80.0) + (0.08 - 0.02) * 0.125, 0.2 * math.sqrt(0.25 / 3), math.exp(-0.05 * 0.25))
    assert abs(price - ref) <= quad_tolerance(err, 85.0)


@pytest.mark.parametrize("kind", ["call", "put"])
@pytest.mark.parametrize(
    "times",
    [[0.0, 0.25, 0.5, 0.75, 1.0], [0.3, 0.1, 0.9, 0.9, 2.0], [0.0, 0.0, 1.5], np.linspace(0.05, 1.2, 37)],
)
def test_geometric_discrete_matches_quadrature(kind, times):
    for s, k, r, q, v in ((100.0, 95.0, 0.04, 0.01, 0.3), (50.0, 60.0, -0.01, 0.03, 0.6)):
        price = geometric_asian(s, k, times, r, q, v, kind)
        ref, err = geometric_by_quadrature(kind, s, k, times, r, q, v)
        assert abs(price - ref) <= quad_tolerance(err, max(s, k))


def test_geometric_one_fixing_is_black_scholes():
    rng = np.random.default_rng(4)
    s, k, t = rng.uniform(50, 150, 200), rng.uniform(40, 160, 200), rng.uniform(0.01, 3, 200)
    r, q, v = rng.uniform(-0.02, 0.1, 200), rng.uniform(-0.02, 0.1, 200), rng.uniform(0.05, 0.8, 200)
    for kind in ("call", "put"):
        got = geometric_asian(s, k, t[:, None], r, q, v, kind)
        np.testing.assert_allclose(got, black_scholes(s, k, t, r, q, v, kind), rtol=1e-12, atol=1e-12)


def test_geometric_discrete_tends_to_continuous():
    # with t_i = iT/n the mean time is T/2 + T/(2n) and the variance factor T/3 + T/(2n) + T/(6n^2),
    # so the error is a/n + O(1/n^2): doubling n halves it up to a relative O(1/n) correction
    s, k, t, r, q, v = 80.0, 85.0, 0.25, 0.05, -0.03, 0.2
    cont = geometric_asian_continuous(s, k, t, r, q, v, "put")

    def err(n):
        return geometric_asian(s, k, t * np.arange(1, n + 1) / n, r, q, v, "put") - cont

    e1, e2 = err(1000), err(2000)
    assert abs(e2 / e1 - 0.5) < 0.01  # O(1/n) = O(1e-3) correction, with margin
    assert abs(err(100_000)) < 1e-4  # a/n with |a| = 1000 |e1| about 0.3 here


def test_geometric_degenerate():
    # vol 0: G = S exp(b mean(t)), deterministic
    price = geometric_asian(100.0, 90.0, [0.0, 0.5, 1.0], 0.05, 0.01, 0.0)
    assert price == pytest.approx(math.exp(-0.05) * (100.0 * math.exp(0.04 * 0.5) - 90.0), rel=1e-14)
    # every fixing today: the payoff is known now, paid now
    assert geometric_asian(100.0, 90.0, [0.0, 0.0], 0.05, 0.01, 0.3) == pytest.approx(10.0, rel=1e-14)
    assert geometric_asian_continuous(100.0, 90.0, 0.0, 0.05, 0.01, 0.3) == 10.0
    out = geometric_asian(np.array([[100.0], [0.0]]), 90.0, [0.5, 1.0], 0.05, 0.01, np.array([0.0, 0.2]), "put")
    assert out.shape == (2, 2) and not np.any(np.isnan(out))


@pytest.mark.parametrize(
    "call, match",
    [
        (lambda: geometric_asian(100, 100, [0.5, -1.0], 0.05, 0, 0.2), r"fixing_times=-1\.0 \(at index \(1,\)\) is outside \[0\.0, inf\)"),
        (lambda: geometric_asian(100, 100, [], 0.05, 0, 0.2), r"fixing_times=\[\] is empty"),
        (lambda: geometric_asian(100, 100, [1.0], 0.05, 0, -0.2), r"vol=-0\.2 is outside"),
        (lambda: geometric_asian_continuous(100, 100, 1.0, 0.05, 0, 0.2, "average"), r"kind='average' is not one of"),
    ],
)
def test_asian_bad_input(call, match):
    with pytest.raises(ParamError, match=match):
        call()


# ---------------------------------------------------------------------------------------
# lookbacks: distribution of the running max / min of X_t = nu t + sigma W_t, X_0 = 0
# ---------------------------------------------------------------------------------------
def _surv_max(y, nu, v, t):
    """P(max_{u<=t} X_u > y), y >= 0."""
    sd = v * math.sqrt(t)
    return ndtr((nu * t - y) / sd) + math.exp(2 * nu * y / (v * v) + log_ndtr((-y - nu * t) / sd))


def _cdf_min(z, nu, v, t):
    """P(min_{u<=t} X_u <= z), z <= 0."""
    sd = v * math.sqrt(t)
    return ndtr((z - nu * t) / sd) + math.exp(2 * nu * z / (v * v) + log_ndtr((z + nu * t) / sd))


def lookback_by_quadrature(style, kind, s, t, r, q, v, strike=None, extreme=None):
    """Layer cake: E[Y] = int P(Y > x) dx for the payoff's running extreme."""
    nu = r - q - 0.5 * v * v
    sd = v * math.sqrt(t)
    df = math.exp(-r * t)
    big = abs(nu) * t + 14 * sd
    use_max = (style == "floating") == (kind == "put")
    if use_max:
        m0 = s if extreme is None else extreme
        level = m0 if style == "floating" else max(m0, strike)
        # E[max(level, S e^Y)] = level + int_{ln(level/S)}^inf S e^y P(Y > y) dy
        tail, err = _quad(lambda y: s * math.exp(y) * _surv_max(y, nu, v, t), math.log(level / s), big)
        emax = level + tail
        if style == "floating":
            return df * emax - s * math.exp(-q * t), df * err
        return df * (emax - strike), df * err
    m0 = s if extreme is None else extreme
    level = m0 if style == "floating" else min(m0, strike)
    # E[min(level, S e^Z)] = int_{-inf}^{c} S e^z P(Z > z) dz = level - int_{-inf}^{c} S e^z P(Z <= z) dz,
    # c = ln(level/S); P(Z <= z) is below 1e-40 under -big
    low, err = _quad(lambda z: s * math.exp(z) * _cdf_min(z, nu, v, t), -big, math.log(level / s))
    emin = level - low
    if style == "floating":
        return s * math.exp(-q * t) - df * emin, df * err
    return df * (strike - emin), df * err


@pytest.mark.published
def test_haug_floating_lookback_call():
    # E. G. Haug, The Complete Guide to Option Pricing Formulas, 2nd ed., 2007, floating-strike
    # lookback (Goldman, Sosin and Gatto 1979) example: S=120, S_min=100, T=0.5, r=0.10,
    # b=0.04 (q=0.06), sigma=0.30: call 25.3533 (from memory; recomputed by quadrature).
    # The quadrature gives 25.3533553, so the printed figure is truncated, not rounded, in
    # the fourth decimal: the published precision is one unit of that decimal, 1e-4.
    price = lookback_floating(120.0, 0.5, 0.10, 0.06, 0.30, "call", running_extreme=100.0)
    assert 0.0 <= price - 25.3533 < 1e-4
    ref, err = lookback_by_quadrature("floating", "call", 120.0, 0.5, 0.10, 0.06, 0.30, extreme=100.0)
    assert abs(price - ref) <= quad_tolerance(err, 120.0)


def _lookback_cases(seed=17, n=8):
    rng = np.random.default_rng(seed)
    cases = []
    for style in ("floating", "fixed"):
        for kind in ("call", "put"):
            for i in range(n):
                s = float(rng.uniform(50, 150))
                t = float(rng.uniform(0.05, 3.0))
                r = float(rng.uniform(-0.03, 0.12))
                q = r if i == 0 else float(rng.uniform(-0.03, 0.1))  # b = 0 in the first case
                v = float(rng.uniform(0.08, 0.7))
                strike = float(rng.uniform(0.6, 1.4)) * s if style == "fixed" else None
                use_max = (style == "floating") == (kind == "put")
                extreme = None if i % 3 == 0 else s * float(rng.uniform(1.0, 1.3) if use_max else rng.uniform(0.75, 1.0))
                cases.append(pytest.param(style, kind, s, t, r, q, v, strike, extreme, id=f"{style}-{kind}-{i}"))
    return cases


@pytest.mark.parametrize("style, kind, s, t, r, q, v, strike, extreme", _lookback_cases())
def test_lookbacks_match_quadrature(style, kind, s, t, r, q, v, strike, extreme):
    if style == "floating":
        price = lookback_floating(s, t, r, q, v, kind, running_extreme=extreme)
    else:
        price = lookback_fixed(s, strike, t, r, q, v, kind, running_extreme=extreme)
    ref, err = lookback_by_quadrature(style, kind, s, t, r, q, v, strike=strike, extreme=extreme)
    assert abs(price - ref) <= quad_tolerance(err, s)


@pytest.mark.parametrize("kind", ["call", "put"])
def test_lookbacks_continuous_through_zero_carry(kind):
    # rate == dividend is the 0/0 point of sigma^2/(2b); the price is smooth in b there
    s, k, t, r, v = 100.0, 105.0, 0.75, 0.05, 0.25
    eps = np.array([-1e-5, -1e-8, 0.0, 1e-8, 1e-5])
    floating = lookback_floating(s, t, r, r + eps, v, kind)
    fixed = lookback_fixed(s, k, t, r, r + eps, v, kind)
    for prices in (floating, fixed):
        assert not np.any(np.isnan(prices))
        # first-order smooth: the b = 0 value is the midpoint of b = +/- eps up to O(eps^2)
        assert abs(prices[2] - 0.5 * (prices[1] + prices[3])) < 1e-10
        assert abs(prices[2] - 0.5 * (prices[0] + prices[4])) < 1e-7
        # and the b = +/- 1e-8 values differ by about 2e-8 x (derivative in b, a few hundred)
        assert abs(prices[3] - prices[1]) < 1e-4


def test_lookback_relations():
    s, t, r, q, v = 100.0, 1.0, 0.05, 0.02, 0.3
    # fixed-strike call with K at or below the running max is (M0 - K) e^{-rT} + floating-put-like value:
    # max(M0, M_T) - K = (max(M0, M_T) - S_T) + S_T - K
    for k in (80.0, 100.0):
        lhs = lookback_fixed(s, k, t, r, q, v, "call")
        rhs = lookback_floating(s, t, r, q, v, "put") + s * math.exp(-q * t) - k * math.exp(-r * t)
        assert lhs == pytest.approx(rhs, rel=1e-13)
    # fixed put with K >= running min: K - min = (S_T - min) + K - S_T
    for k in (100.0, 120.0):
        lhs = lookback_fixed(s, k, t, r, q, v, "put")
        rhs = lookback_floating(s, t, r, q, v, "call") + k * math.exp(-r * t) - s * math.exp(-q * t)
        assert lhs == pytest.approx(rhs, rel=1e-13)
    # a lookback is worth at least the vanilla with the same strike
    for k in (90.0, 110.0):
        assert lookback_fixed(s, k, t, r, q, v, "call") > black_scholes(s, k, t, r, q, v, "call")
        assert lookback_fixed(s, k, t, r, q, v, "put") > black_scholes(s, k, t, r, q, v, "put")


def test_lookback_degenerate():
    r, q = 0.05, 0.02
    # maturity 0: floating call S - m0, fixed call max(M0 - K, 0)
    assert lookback_floating(100.0, 0.0, r, q, 0.3, "call", running_extreme=90.0) == 10.0
    assert lookback_fixed(100.0, 95.0, 0.0, r, q, 0.3, "call", running_extreme=110.0) == 15.0
    # vol 0, b > 0: path rises, max = S e^{bT}, min = S
    t = 2.0
    end = 100.0 * math.exp((r - q) * t)
    assert lookback_floating(100.0, t, r, q, 0.0, "call") == pytest.approx(math.exp(-r * t) * (end - 100.0), rel=1e-14)
    assert lookback_floating(100.0, t, r, q, 0.0, "put") == pytest.approx(0.0, abs=1e-13)
    assert lookback_fixed(100.0, 95.0, t, r, q, 0.0, "call") == pytest.approx(math.exp(-r * t) * (end - 95.0), rel=1e-14)
    small = lookback_floating(100.0, t, r, q, 1e-4, "call")
    assert abs(small - math.exp(-r * t) * (end - 100.0)) < 1e-3
    out = lookback_floating(np.array([90.0, 100.0]), np.array([[0.5], [1.0]]), r, q, 0.2, "put")
    assert out.shape == (2, 2)


@pytest.mark.parametrize(
    "call, match",
    [
        (lambda: lookback_floating(100, 1, 0.05, 0, 0.2, "call", running_extreme=110), r"running_extreme=110\.0 with spot=100\.0 .* must be at most the spot"),
        (lambda: lookback_floating(100, 1, 0.05, 0, 0.2, "put", running_extreme=90), r"running_extreme=90\.0 with spot=100\.0 .* must be at least the spot"),
        (lambda: lookback_fixed(100, 100, 1, 0.05, 0, 0.2, "call", running_extreme=95), r"must be at least the spot"),
        (lambda: lookback_fixed(100, 100, 1, 0.05, 0, 0.2, "put", running_extreme=0.0), r"running_extreme=0\.0 is outside \(0\.0, inf\)"),
        (lambda: lookback_floating(0.0, 1, 0.05, 0, 0.2), r"spot=0\.0 is outside \(0\.0, inf\) in lookback_floating"),
        (lambda: lookback_floating(100, -1, 0.05, 0, 0.2), r"maturity=-1\.0 is outside"),
        (lambda: lookback_fixed(100, 100, 1, 0.05, 0, 0.2, "max"), r"kind='max' is not one of"),
    ],
)
def test_lookback_bad_input(call, match):
    with pytest.raises(ParamError, match=match):
        call()
