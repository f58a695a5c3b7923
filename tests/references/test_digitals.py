"""Cash-or-nothing, asset-or-nothing and gap options: published values, quadrature, relations."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references import asset_or_nothing, black_scholes, cash_or_nothing, gap_option


def lognormal_quad(payoff, spot, maturity, rate, dividend, vol, breaks=()):
    """e^{-rT} E[payoff(S_T)] under Black-Scholes by adaptive quadrature in the normal
    variable, split at the payoff's jumps; returns (value, error estimate)."""
    sd = vol * math.sqrt(maturity)
    mu = math.log(spot) + (rate - dividend - 0.5 * vol * vol) * maturity
    cuts = sorted((math.log(b) - mu) / sd for b in breaks if b > 0)
    edges = [-12.0, *[c for c in cuts if -12.0 < c < 12.0], 12.0]
    total, err = 0.0, 0.0
    for a, b in zip(edges[:-1], edges[1:]):
        val, e = integrate.quad(
            lambda z: payoff(math.exp(mu + sd * z)) * norm.pdf(z), a, b, epsabs=1e-13, epsrel=1e-12, limit=200
        )
        total += val
        err += e
    df = math.exp(-rate * maturity)
    return df * total, df * err


def quad_tolerance(err_estimate, scale):
    """100 x quad's error estimate, floored at 1e-10 * scale (round-off)."""
    return max(100.0 * err_estimate, 1e-10 * scale)


# ---------------------------------------------------------------------------------------
# published values
# ---------------------------------------------------------------------------------------
@pytest.mark.published
def test_haug_cash_or_nothing_put():
    # E. G. Haug, The Complete Guide to Option Pricing Formulas, 2nd ed., 2007, cash-or-nothing
    # example (Reiner and Rubinstein 1991): S=100, K=80, cash 10, T=0.75, r=0.06, b=0,
    # sigma=0.35: put 2.6710 (from memory; recomputed by quadrature).
    args = (100.0, 80.0, 0.75, 0.06, 0.06, 0.35)
    price = cash_or_nothing(*args, cash=10.0, kind="put")
    assert abs(price - 2.6710) <= 5e-5
    q, err = lognormal_quad(lambda s: 10.0 if s < 80.0 else 0.0, 100.0, 0.75, 0.06, 0.06, 0.35, breaks=(80.0,))
    assert abs(price - q) <= quad_tolerance(err, 10.0)


@pytest.mark.published
def test_haug_asset_or_nothing_put():
    # Haug 2007, asset-or-nothing example: S=70, K=65, T=0.5, r=0.07, b=0.02 (q=0.05),
    # sigma=0.27: put 20.2069 (from memory; recomputed by quadrature).
    args = (70.0, 65.0, 0.5, 0.07, 0.05, 0.27)
    price = asset_or_nothing(*args, kind="put")
    assert abs(price - 20.2069) <= 5e-5
    q, err = lognormal_quad(lambda s: s if s < 65.0 else 0.0, 70.0, 0.5, 0.07, 0.05, 0.27, breaks=(65.0,))
    assert abs(price - q) <= quad_tolerance(err, 70.0)


@pytest.mark.published
def test_haug_gap_call():
    # Haug 2007, gap option example: S=50, K1=50 (trigger), K2=57 (payoff strike), T=0.5,
    # r=b=0.09, sigma=0.20: call -0.0053 (from memory; recomputed by quadrature).
    price = gap_option(50.0, strike=57.0, trigger=50.0, maturity=0.5, rate=0.09, dividend=0.0, vol=0.20)
    assert abs(price - (-0.0053)) <= 5e-5
    q, err = lognormal_quad(lambda s: s - 57.0 if s > 50.0 else 0.0, 50.0, 0.5, 0.09, 0.0, 0.20, breaks=(50.0,))
    assert abs(price - q) <= quad_tolerance(err, 57.0)


# ---------------------------------------------------------------------------------------
# quadrature over a grid
# ---------------------------------------------------------------------------------------
def _grid(n=25, seed=11):
    rng = np.random.default_rng(seed)
    out = []
    for _ in range(n):
        out.append(
            (
                float(rng.uniform(20, 200)),
                float(rng.uniform(10, 250)),
                float(rng.uniform(10, 250)),
                float(rng.uniform(0.02, 4.0)),
                float(rng.uniform(-0.03, 0.12)),
                float(rng.uniform(-0.02, 0.10)),
                float(rng.uniform(0.03, 0.9)),
            )
        )
    return out


@pytest.mark.parametrize("s, k, k2, t, r, q, v", _grid())
@pytest.mark.parametrize("kind", ["call", "put"])
def test_digitals_and_gap_match_quadrature(s, k, k2, t, r, q, v, kind):
    up = kind == "call"
    hit = (lambda x: x > k) if up else (lambda x: x < k)
    ref, err = lognormal_quad(lambda x: 3.5 if hit(x) else 0.0, s, t, r, q, v, breaks=(k,))
    assert abs(cash_or_nothing(s, k, t, r, q, v, cash=3.5, kind=kind) - ref) <= quad_tolerance(err, 3.5)
    ref, err = lognormal_quad(lambda x: x if hit(x) else 0.0, s, t, r, q, v, breaks=(k,))
    assert abs(asset_or_nothing(s, k, t, r, q, v, kind=kind) - ref) <= quad_tolerance(err, s)
    # gap: trigger k, payoff strike k2
    pay = (lambda x: (x - k2) if x > k else 0.0) if up else (lambda x: (k2 - x) if x < k else 0.0)
    ref, err = lognormal_quad(pay, s, t, r, q, v, breaks=(k,))
    assert abs(gap_option(s, k2, k, t, r, q, v, kind=kind) - ref) <= quad_tolerance(err, max(s, k2))


# ---------------------------------------------------------------------------------------
# relations
# ---------------------------------------------------------------------------------------
def _arrays(n=300, seed=5):
    rng = np.random.default_rng(seed)
    return (
        rng.uniform(20, 200, n), rng.uniform(0, 250, n), rng.uniform(0, 4, n),
        rng.uniform(-0.03, 0.12, n), rng.uniform(-0.02, 0.1, n), rng.uniform(0, 0.9, n),
    )


def test_asset_minus_strike_cash_is_vanilla():
    # common practice: a call is an asset-or-nothing call less K cash-or-nothing calls
    s, k, t, r, q, v = _arrays()
    for kind in ("call", "put"):
        sign = 1.0 if kind == "call" else -1.0
        combo = sign * (asset_or_nothing(s, k, t, r, q, v, kind) - k * cash_or_nothing(s, k, t, r, q, v, 1.0, kind))
        np.testing.assert_allclose(combo, black_scholes(s, k, t, r, q, v, kind), atol=1e-10 * 250)


def test_call_plus_put_digitals():
    s, k, t, r, q, v = _arrays()
    np.testing.assert_allclose(
        cash_or_nothing(s, k, t, r, q, v, 2.0, "call") + cash_or_nothing(s, k, t, r, q, v, 2.0, "put"),
        2.0 * np.exp(-r * t), rtol=1e-13,
    )
    np.testing.assert_allclose(
        asset_or_nothing(s, k, t, r, q, v, "call") + asset_or_nothing(s, k, t, r, q, v, "put"),
        s * np.exp(-q * t), rtol=1e-13,
    )


def test_gap_with_trigger_at_strike_is_vanilla():
    s, k, t, r, q, v = _arrays()
    for kind in ("call", "put"):
        np.testing.assert_allclose(gap_option(s, k, k, t, r, q, v, kind), black_scholes(s, k, t, r, q, v, kind), atol=1e-10 * 250)


def test_degenerate_digitals_no_nan():
    # vol 0: the payment is certain or absent (F vs K), half at F == K exactly (the vol->0 limit)
    r, q, t = 0.05, 0.05, 1.0  # forward equals spot
    got = cash_or_nothing(100.0, np.array([90.0, 100.0, 110.0]), t, r, q, 0.0)
    np.testing.assert_allclose(got, math.exp(-r) * np.array([1.0, 0.5, 0.0]), rtol=1e-15)
    # the formula tends to the same values as vol -> 0
    near = cash_or_nothing(100.0, np.array([90.0, 100.0, 110.0]), t, r, q, 1e-10)
    np.testing.assert_allclose(near, got, atol=1e-8)
    # maturity 0 and strike 0
    assert asset_or_nothing(100.0, 90.0, 0.0, r, q, 0.3) == 100.0
    assert asset_or_nothing(100.0, 0.0, 2.0, r, 0.03, 0.3) == pytest.approx(100.0 * math.exp(-0.06), rel=1e-15)
    assert cash_or_nothing(100.0, 0.0, 2.0, r, 0.03, 0.3, kind="put") == 0.0
    out = gap_option(np.array([0.0, 50.0]), 40.0, np.array([0.0, 45.0]), np.array([1.0, 0.0]), r, q, 0.2)
    assert not np.any(np.isnan(out))
    # spot 0 stays at 0: the call pays only when S_T > trigger, never here
    np.testing.assert_allclose(out, [0.0, 10.0])
    assert cash_or_nothing(0.0, 0.0, 1.0, r, q, 0.2, kind="put") == 0.0
    assert cash_or_nothing(0.0, 5.0, 1.0, r, q, 0.2, kind="put") == pytest.approx(math.exp(-r), rel=1e-15)


@pytest.mark.parametrize(
    "call, match",
    [
        (lambda: cash_or_nothing(100, 100, 1, 0.05, 0, -0.1), r"vol=-0\.1 is outside \[0\.0, inf\) in cash_or_nothing"),
        (lambda: cash_or_nothing(100, 100, 1, 0.05, 0, 0.2, cash=float("nan")), r"cash=nan is outside"),
        (lambda: asset_or_nothing(100, -3, 1, 0.05, 0, 0.2), r"strike=-3\.0 is outside .* in asset_or_nothing"),
        (lambda: gap_option(100, 100, -1, 1, 0.05, 0, 0.2), r"trigger=-1\.0 is outside .* in gap_option"),
        (lambda: gap_option(100, 100, 90, 1, 0.05, 0, 0.2, kind="digital"), r"kind='digital' is not one of"),
    ],
)
def test_bad_input(call, match):
    with pytest.raises(ParamError, match=match):
        call()
