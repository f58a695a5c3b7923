"""Black-Scholes family: published values, independent quadrature, reductions, edges, bad input.

The quadrature here is written inside the test file on purpose: it prices the discounted
payoff under the log-normal law with scipy alone, sharing nothing with the library.
"""

from __future__ import annotations

import math
import time

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references import (
    black76,
    black_scholes,
    implied_vol,
    prepaid_forward,
    put_call_parity_gap,
)


# ---------------------------------------------------------------------------------------
# independent quadrature: E[e^{-rT} payoff(S_T)], ln S_T ~ N(ln S + (r - q - v^2/2)T, v^2 T)
# ---------------------------------------------------------------------------------------
def lognormal_quad(payoff, spot, maturity, rate, dividend, vol, breaks=()):
    """Return (value, error estimate) of e^{-rT} E[payoff(S_T)] by adaptive quadrature in z,
    split at the z of every level in ``breaks`` (kinks and jumps of the payoff)."""
    sd = vol * math.sqrt(maturity)
    mu = math.log(spot) + (rate - dividend - 0.5 * vol * vol) * maturity

    def integrand(z):
        return payoff(math.exp(mu + sd * z)) * norm.pdf(z)

    cuts = sorted((math.log(b) - mu) / sd for b in breaks if b > 0)
    cuts = [c for c in cuts if -12.0 < c < 12.0]
    edges = [-12.0, *cuts, 12.0]
    total, err = 0.0, 0.0
    for a, b in zip(edges[:-1], edges[1:]):
        val, e = integrate.quad(integrand, a, b, epsabs=1e-13, epsrel=1e-12, limit=200)
        total += val
        err += e
    df = math.exp(-rate * maturity)
    return df * total, df * err


def quad_tolerance(err_estimate, scale):
    """Quadrature accuracy: 100 times quad's own error estimate, floored at 1e-10 * scale
    (double-precision round-off over a few hundred function values); the z range [-12, 12]
    loses a probability below 1e-32."""
    return max(100.0 * err_estimate, 1e-10 * scale)


# ---------------------------------------------------------------------------------------
# published values
# ---------------------------------------------------------------------------------------
@pytest.mark.published
@pytest.mark.parametrize(
    "kind, expected",
    [
        # J. C. Hull, Options, Futures, and Other Derivatives, Black-Scholes-Merton worked
        # example (S=42, K=40, r=0.10, sigma=0.20, T=0.5): call 4.76, put 0.81 printed;
        # 4.7594 / 0.8086 to four places, from memory, recomputed by quadrature below.
        ("call", 4.7594),
        ("put", 0.8086),
    ],
)
def test_hull_bsm_example(kind, expected):
    args = (42.0, 40.0, 0.5, 0.10, 0.0, 0.20)
    price = black_scholes(*args, kind=kind)
    assert isinstance(price, float)
    assert abs(price - expected) <= 5e-5  # published to 4 decimals
    payoff = (lambda s: max(s - 40.0, 0.0)) if kind == "call" else (lambda s: max(40.0 - s, 0.0))
    q, err = lognormal_quad(payoff, 42.0, 0.5, 0.10, 0.0, 0.20, breaks=(40.0,))
    assert abs(price - q) <= quad_tolerance(err, 42.0)


@pytest.mark.published
@pytest.mark.parametrize(
    "args, kind, expected, source",
    [
        # E. G. Haug, The Complete Guide to Option Pricing Formulas, 2nd ed., 2007,
        # generalised Black-Scholes example: S=60, K=65, T=0.25, r=b=0.08, sigma=0.30.
        ((60.0, 65.0, 0.25, 0.08, 0.0, 0.30), "call", 2.1334, "Haug 2007, generalised BS (from memory)"),
        # Haug 2007, Merton (1973) continuous-dividend example: S=100, K=95, T=0.5,
        # r=0.10, q=0.05, sigma=0.20, put.
        ((100.0, 95.0, 0.5, 0.10, 0.05, 0.20), "put", 2.4648, "Haug 2007, Merton 1973 (from memory)"),
        # Haug 2007, Garman and Kohlhagen (1983) currency example: S=1.56, K=1.60, T=0.5,
        # r=0.06 (domestic), rf=0.08 (foreign, the dividend yield), sigma=0.12, call.
        ((1.56, 1.60, 0.5, 0.06, 0.08, 0.12), "call", 0.0291, "Haug 2007, Garman-Kohlhagen (from memory)"),
    ],
)
def test_haug_bsm_examples(args, kind, expected, source):
    price = black_scholes(*args, kind=kind)
    assert abs(price - expected) <= 5e-5, source  # published to 4 decimals
    k = args[1]
    payoff = (lambda s: max(s - k, 0.0)) if kind == "call" else (lambda s: max(k - s, 0.0))
    q, err = lognormal_quad(payoff, *args[:1], *args[2:], breaks=(k,))
    assert abs(price - q) <= quad_tolerance(err, args[0]), source


@pytest.mark.published
@pytest.mark.parametrize("kind", ["call", "put"])
def test_haug_black76_example(kind):
    # Haug 2007, Black (1976) example: F=19, K=19, T=0.75, r=0.10, sigma=0.28:
    # call = put = 1.7011 (from memory; recomputed by quadrature with zero drift).
    price = black76(19.0, 19.0, 0.75, 0.10, 0.28, kind=kind)
    assert abs(price - 1.7011) <= 5e-5
    payoff = (lambda f: max(f - 19.0, 0.0)) if kind == "call" else (lambda f: max(19.0 - f, 0.0))
    q, err = lognormal_quad(payoff, 19.0, 0.75, 0.10, 0.10, 0.28, breaks=(19.0,))
    assert abs(price - q) <= quad_tolerance(err, 19.0)


# ---------------------------------------------------------------------------------------
# quadrature over a grid of inputs
# ---------------------------------------------------------------------------------------
def _grid(n=40, seed=20240601):
    rng = np.random.default_rng(seed)
    return [
        (
            float(rng.uniform(20, 200)),
            float(rng.uniform(10, 250)),
            float(rng.uniform(0.02, 5.0)),
            float(rng.uniform(-0.03, 0.12)),
            float(rng.uniform(-0.02, 0.10)),
            float(rng.uniform(0.03, 0.9)),
        )
        for _ in range(n)
    ]


@pytest.mark.parametrize("args", _grid())
@pytest.mark.parametrize("kind", ["call", "put"])
def test_black_scholes_matches_quadrature(args, kind):
    s, k, t, r, q, v = args
    payoff = (lambda x: max(x - k, 0.0)) if kind == "call" else (lambda x: max(k - x, 0.0))
    ref, err = lognormal_quad(payoff, s, t, r, q, v, breaks=(k,))
    assert abs(black_scholes(s, k, t, r, q, v, kind) - ref) <= quad_tolerance(err, max(s, k))


# ---------------------------------------------------------------------------------------
# relations and reductions
# ---------------------------------------------------------------------------------------
def test_put_call_parity_over_grid():
    g = np.array(_grid(200)).T
    c = black_scholes(*g, kind="call")
    p = black_scholes(*g, kind="put")
    gap = put_call_parity_gap(c, p, *g[:5])
    scale = np.maximum(g[0], g[1])
    assert np.all(np.abs(gap) <= 1e-12 * scale)


def test_parity_gap_detects_a_wrong_put():
    c = black_scholes(100.0, 100.0, 1.0, 0.05, 0.0, 0.2)
    p = black_scholes(100.0, 100.0, 1.0, 0.05, 0.0, 0.2, "put")
    assert put_call_parity_gap(c, p + 0.1, 100.0, 100.0, 1.0, 0.05, 0.0) == pytest.approx(-0.1, abs=1e-12)


def test_black76_is_black_scholes_on_the_forward():
    # common practice: Black-76 is generalised BS with cost of carry b = 0 (q = r)
    f, k, t, r, v = 57.0, np.linspace(30, 90, 13), 1.3, 0.04, 0.35
    for kind in ("call", "put"):
        np.testing.assert_allclose(black76(f, k, t, r, v, kind), black_scholes(f, k, t, r, r, v, kind), rtol=1e-14)


def test_prepaid_forward_is_strike_zero_call():
    s, t, q = np.array([1.0, 50.0, 120.0]), np.array([0.0, 0.5, 3.0]), np.array([0.03, -0.01, 0.08])
    np.testing.assert_allclose(prepaid_forward(s, t, q), s * np.exp(-q * t), rtol=1e-15)
    np.testing.assert_allclose(black_scholes(s, 0.0, t, 0.05, q, 0.3), prepaid_forward(s, t, q), rtol=1e-15)
    assert np.all(black_scholes(s, 0.0, t, 0.05, q, 0.3, "put") == 0.0)


@pytest.mark.parametrize("kind", ["call", "put"])
def test_zero_maturity_and_zero_vol_are_discounted_forward_intrinsic(kind):
    s = np.array([80.0, 100.0, 120.0])[:, None]
    k = np.array([90.0, 100.0, 110.0])[None, :]
    r, q, t = 0.07, 0.02, 1.5
    fwd = s * np.exp((r - q) * t)
    sign = 1.0 if kind == "call" else -1.0
    want = np.exp(-r * t) * np.maximum(sign * (fwd - k), 0.0)
    got = black_scholes(s, k, t, r, q, 0.0, kind)
    assert not np.any(np.isnan(got))
    np.testing.assert_allclose(got, want, rtol=1e-14, atol=1e-14)
    # maturity 0: plain intrinsic value
    got0 = black_scholes(s, k, 0.0, r, q, 0.25, kind)
    np.testing.assert_allclose(got0, np.maximum(sign * (s - k), 0.0), rtol=1e-15)
    # and the limit is approached continuously
    near = black_scholes(s, k, t, r, q, 1e-9, kind)
    np.testing.assert_allclose(near, want, atol=1e-6)


def test_zero_spot():
    assert black_scholes(0.0, 100.0, 1.0, 0.05, 0.0, 0.2) == 0.0
    assert black_scholes(0.0, 100.0, 1.0, 0.05, 0.0, 0.2, "put") == pytest.approx(100 * math.exp(-0.05), rel=1e-15)


def test_scalar_in_float_out_and_broadcasting():
    assert isinstance(black_scholes(100, 100, 1, 0.05, 0.0, 0.2), float)
    out = black_scholes(100.0, np.array([90.0, 100.0]), np.array([[0.5], [1.0], [2.0]]), 0.05, 0.0, 0.2)
    assert isinstance(out, np.ndarray) and out.shape == (3, 2)
    assert out[1, 1] == black_scholes(100.0, 100.0, 1.0, 0.05, 0.0, 0.2)


def test_ten_thousand_strikes_in_milliseconds():
    k = np.linspace(1.0, 400.0, 10_000)
    black_scholes(100.0, k, 1.0, 0.05, 0.01, 0.2)  # warm-up
    t0 = time.perf_counter()
    out = black_scholes(100.0, k, 1.0, 0.05, 0.01, 0.2)
    elapsed = time.perf_counter() - t0
    assert out.shape == (10_000,)
    # measured about 1 ms on a 2-core machine; a per-strike Python loop takes well over 0.2 s
    assert elapsed < 0.1


# ---------------------------------------------------------------------------------------
# implied volatility
# ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("kind", ["call", "put"])
def test_implied_vol_round_trip(kind):
    rng = np.random.default_rng(7)
    n = 10_000
    k = rng.uniform(50, 200, n)
    t = rng.uniform(0.05, 3.0, n)
    v = rng.uniform(0.05, 1.0, n)
    price = black_scholes(100.0, k, t, 0.03, 0.01, v, kind)
    t0 = time.perf_counter()
    iv = implied_vol(price, 100.0, k, t, 0.03, 0.01, kind)
    elapsed = time.perf_counter() - t0
    vega = 100.0 * np.exp(-0.01 * t) * norm.pdf(
        (np.log(100.0 / k) + (0.02 + 0.5 * v * v) * t) / (v * np.sqrt(t))
    ) * np.sqrt(t)
    # where the price moves at least 1e-8 per unit of vol, the vol is pinned to
    # (price rounding 1e-13) / vega; elsewhere only the price can be checked
    ok = vega > 1e-3
    assert ok.mean() > 0.9
    np.testing.assert_allclose(iv[ok], v[ok], atol=1e-8)
    np.testing.assert_allclose(black_scholes(100.0, k, t, 0.03, 0.01, iv, kind), price, atol=1e-10)
    assert elapsed < 2.0  # vectorised: ~30 ms measured


def test_implied_vol_scalar_and_lower_bound():
    p = black_scholes(100.0, 110.0, 0.7, 0.02, 0.0, 0.3)
    assert implied_vol(p, 100.0, 110.0, 0.7, 0.02, 0.0) == pytest.approx(0.3, abs=1e-12)
    intrinsic = 100.0 - 90.0 * math.exp(-0.02 * 0.7)
    assert implied_vol(intrinsic, 100.0, 90.0, 0.7, 0.02, 0.0) == 0.0


@pytest.mark.parametrize(
    "price, kind, match",
    [
        (-1.0, "call", r"price=-1\.0 is below the no-arbitrage lower bound"),
        (5.0, "call", r"price=5\.0 is below the no-arbitrage lower bound 1[0-9.]+ = max\(S e\^-qT - K e\^-rT, 0\)"),
        (100.0, "call", r"price=100\.0 is at or above the no-arbitrage upper bound 100\.0 = S e\^-qT"),
        (96.0, "put", r"price=96\.0 is at or above the no-arbitrage upper bound 8[0-9.]+ = K e\^-rT"),
    ],
)
def test_implied_vol_unreachable_price(price, kind, match):
    with pytest.raises(ParamError, match=match):
        implied_vol(price, 100.0, 90.0, 1.0, 0.05, 0.0, kind)


# ---------------------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------------------
BASE = dict(spot=100.0, strike=100.0, maturity=1.0, rate=0.05, dividend=0.0, vol=0.2)


@pytest.mark.parametrize(
    "field, value, match",
    [
        ("vol", -0.2, r"vol=-0\.2 is outside \[0\.0, inf\) in black_scholes"),
        ("maturity", -1.0, r"maturity=-1\.0 is outside \[0\.0, inf\)"),
        ("spot", -5.0, r"spot=-5\.0 is outside \[0\.0, inf\)"),
        ("strike", [100.0, -1.0], r"strike=-1\.0 \(at index \(1,\)\) is outside"),
        ("vol", float("nan"), r"vol=nan is outside"),
        ("rate", float("inf"), r"rate=inf is outside .* must be finite"),
        ("spot", "abc", r"spot='abc' is not a number"),
    ],
)
def test_black_scholes_bad_input(field, value, match):
    args = dict(BASE, **{field: value})
    with pytest.raises(ParamError, match=match):
        black_scholes(**args)


@pytest.mark.parametrize("kind", ["Call", "c", "straddle", None, 1])
def test_unknown_kind(kind):
    with pytest.raises(ParamError, match=r"kind=.* is not one of 'call', 'put' in black_scholes"):
        black_scholes(**BASE, kind=kind)
    with pytest.raises(ParamError, match=r"kind=.* is not one of 'call', 'put' in black76"):
        black76(100.0, 100.0, 1.0, 0.05, 0.2, kind=kind)


@pytest.mark.parametrize(
    "call, args, match",
    [
        (lambda: black76(-1.0, 100.0, 1.0, 0.05, 0.2), (), r"forward=-1\.0 is outside \[0\.0, inf\) in black76"),
        (lambda: prepaid_forward(100.0, -0.5, 0.0), (), r"maturity=-0\.5 is outside .* in prepaid_forward"),
        (lambda: implied_vol(10.0, 100.0, 100.0, 0.0, 0.05, 0.0), (), r"maturity=0\.0 is outside \(0\.0, inf\) in implied_vol"),
        (lambda: implied_vol(10.0, 100.0, 0.0, 1.0, 0.05, 0.0), (), r"strike=0\.0 is outside \(0\.0, inf\) in implied_vol"),
        (lambda: put_call_parity_gap(float("nan"), 1.0, 100, 100, 1, 0.05, 0), (), r"call=nan is outside"),
    ],
)
def test_other_bad_input(call, args, match):
    with pytest.raises(ParamError, match=match):
        call()


def test_param_error_is_a_value_error():
    with pytest.raises(ValueError):
        black_scholes(**dict(BASE, vol=-1.0))


# ---------------------------------------------------------------------------------------
# further published European values
# ---------------------------------------------------------------------------------------
@pytest.mark.published
@pytest.mark.parametrize(
    "spot, vol, maturity, expected",
    # F. A. Longstaff and E. S. Schwartz, "Valuing American Options by Simulation: A Simple
    # Least-Squares Approach", Review of Financial Studies 14(1), 2001, Table 1, column
    # "European" (closed-form European put): K=40, r=0.06, no dividend. From memory,
    # recomputed by quadrature in the same test; printed to 3 decimals.
    [
        (36.0, 0.2, 1.0, 3.844),
        (36.0, 0.2, 2.0, 3.763),
        (36.0, 0.4, 1.0, 6.711),
        (36.0, 0.4, 2.0, 7.700),
        (38.0, 0.2, 1.0, 2.852),
        (40.0, 0.2, 1.0, 2.066),
        (40.0, 0.4, 1.0, 5.060),
        (42.0, 0.2, 1.0, 1.465),
        (44.0, 0.2, 1.0, 1.017),
        (44.0, 0.4, 2.0, 5.202),
    ],
)
def test_longstaff_schwartz_european_column(spot, vol, maturity, expected):
    price = black_scholes(spot, 40.0, maturity, 0.06, 0.0, vol, "put")
    assert abs(price - expected) <= 5e-4
    ref, err = lognormal_quad(lambda s: max(40.0 - s, 0.0), spot, maturity, 0.06, 0.0, vol, breaks=(40.0,))
    assert abs(price - ref) <= quad_tolerance(err, 40.0)


@pytest.mark.published
def test_hull_european_put_in_crr_example():
    # J. C. Hull, Options, Futures, and Other Derivatives, basic numerical procedures chapter,
    # American put on a non-dividend stock, S=K=50, r=0.10, sigma=0.40, T=5/12: the European
    # (Black-Scholes) put is quoted as 4.08 (from memory; recomputed by quadrature).
    price = black_scholes(50.0, 50.0, 5.0 / 12.0, 0.10, 0.0, 0.40, "put")
    assert abs(price - 4.08) <= 5e-3
    ref, err = lognormal_quad(lambda s: max(50.0 - s, 0.0), 50.0, 5.0 / 12.0, 0.10, 0.0, 0.40, breaks=(50.0,))
    assert abs(price - ref) <= quad_tolerance(err, 50.0)
