"""Continuous single barriers and the Broadie-Glasserman-Kou correction.

Every published value is recomputed here by an independent route: quadrature of the payoff
against the density of a Brownian motion with drift killed at the barrier (reflection
principle), and of the rebate against the first-passage-time density. Both are written in
this file with scipy alone.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.special import zeta
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references import (
    BARRIER_KINDS,
    BGK_BETA,
    barrier_option,
    bgk_barrier_shift,
    black_scholes,
    discrete_barrier_option,
)


# ---------------------------------------------------------------------------------------
# independent quadrature
# ---------------------------------------------------------------------------------------
def _quad(f, a, b, points=()):
    pts = sorted(p for p in points if a < p < b)
    edges = [a, *pts, b]
    val = err = 0.0
    for lo, hi in zip(edges[:-1], edges[1:]):
        v, e = integrate.quad(f, lo, hi, epsabs=1e-13, epsrel=1e-12, limit=300)
        val += v
        err += e
    return val, err


def barrier_by_quadrature(kind, s, k, h, t, r, q, v, rebate=0.0, rebate_at_hit=True):
    """Price of a barrier option by quadrature. X_t = ln(S_t/S) = nu t + v W_t; with the
    barrier at l = ln(H/S), the density of X_T on paths that never touched l is
    phi(x; nu T, v^2 T) - exp(2 nu l / v^2) phi(x - 2l; nu T, v^2 T) on the live side, and
    the first-passage time to l has density |l| / (v sqrt(2 pi t^3)) exp(-(l - nu t)^2 / (2 v^2 t))."""
    down = kind.startswith("down")
    out = "-out-" in kind
    call = kind.endswith("call")
    payoff = (lambda x: max(x - k, 0.0)) if call else (lambda x: max(k - x, 0.0))
    df = math.exp(-r * t)
    sd = v * math.sqrt(t)
    nu = r - q - 0.5 * v * v
    lo, hi = nu * t - 12 * sd, nu * t + 12 * sd
    kink = (math.log(k / s),) if k > 0 else ()
    van, e_van = _quad(lambda x: payoff(s * math.exp(x)) * norm.pdf(x, nu * t, sd), lo, hi, kink)
    van *= df
    if (down and s <= h) or (not down and s >= h):
        return ((rebate if rebate_at_hit else rebate * df) if out else van), e_van
    ell = math.log(h / s)
    refl = math.exp(2 * nu * ell / (v * v))

    def killed(x):
        return norm.pdf(x, nu * t, sd) - refl * norm.pdf(x - 2 * ell, nu * t, sd)

    a, b = (ell, max(hi, ell + 12 * sd)) if down else (min(lo, ell - 12 * sd), ell)
    ko, e_ko = _quad(lambda x: payoff(s * math.exp(x)) * killed(x), a, b, kink)
    ko *= df
    p_live, e_live = _quad(killed, a, b)
    if out:
        if rebate_at_hit:
            dens = lambda u: abs(ell) / (v * math.sqrt(2 * math.pi * u**3)) * math.exp(-((ell - nu * u) ** 2) / (2 * v * v * u))
            reb, e_reb = _quad(lambda u: math.exp(-r * u) * dens(u), 0.0, t)
        else:
            reb, e_reb = df * (1.0 - p_live), df * e_live
        return ko + rebate * reb, e_ko * df + rebate * e_reb
    return van - ko + rebate * df * p_live, e_van + e_ko + rebate * e_live


def quad_tolerance(err_estimate, scale):
    """100 x quad's error estimate, floored at 1e-9 * scale (round-off of the reflected
    term, which subtracts two densities of similar size near the barrier)."""
    return max(100.0 * err_estimate, 1e-9 * scale)


# ---------------------------------------------------------------------------------------
# Haug's standard barrier table: S=100, T=0.5, r=0.08, b=0.04 (q=0.04), rebate 3
# E. G. Haug, The Complete Guide to Option Pricing Formulas, 2nd ed., 2007, table of
# standard barrier option values (Reiner and Rubinstein 1991 formulas); from memory,
# recomputed by quadrature (test_haug_table_recomputed_by_quadrature). Tolerance 2e-4:
# a few printed cells differ from full precision in the last digit.
# ---------------------------------------------------------------------------------------
HAUG_TABLE = {
    # (kind, barrier): [(K=90: sigma .25, .30), (K=100: ...), (K=110: ...)]
    ("down-and-out-call", 95.0): [(9.0246, 8.8334), (6.7924, 7.0285), (4.8759, 5.4137)],
    ("down-and-out-call", 100.0): [(3.0000, 3.0000), (3.0000, 3.0000), (3.0000, 3.0000)],
    ("up-and-out-call", 105.0): [(2.6789, 2.6341), (2.3580, 2.4389), (2.3453, 2.4315)],
    ("down-and-in-call", 95.0): [(7.7627, 9.0093), (4.0109, 5.1370), (2.0576, 2.8517)],
    ("down-and-in-call", 100.0): [(13.8333, 14.8816), (7.8494, 9.2045), (3.9795, 5.3043)],
    ("up-and-in-call", 105.0): [(14.1112, 15.2098), (8.4482, 9.7278), (4.5910, 5.8350)],
    ("down-and-out-put", 95.0): [(2.2798, 2.4170), (2.2947, 2.4258), (2.6252, 2.6246)],
    ("down-and-out-put", 100.0): [(3.0000, 3.0000), (3.0000, 3.0000), (3.0000, 3.0000)],
    ("up-and-out-put", 105.0): [(3.7760, 4.2293), (5.4932, 5.8032), (7.5187, 7.5649)],
    ("down-and-in-put", 95.0): [(2.9586, 3.8769), (6.5677, 7.7989), (11.9752, 13.3078)],
    ("down-and-in-put", 100.0): [(2.2845, 3.3328), (5.9085, 7.2636), (11.6465, 12.9713)],
    ("up-and-in-put", 105.0): [(1.4653, 2.0658), (3.3721, 4.4226), (7.0846, 8.3686)],
}
HAUG_CELLS = [
    pytest.param(kind, h, strike, vol, value, id=f"{kind}-H{h:g}-K{strike:g}-v{vol:g}")
    for (kind, h), row in HAUG_TABLE.items()
    for strike, pair in zip((90.0, 100.0, 110.0), row)
    for vol, value in zip((0.25, 0.30), pair)
]
assert len(HAUG_CELLS) == 72


@pytest.mark.published
@pytest.mark.parametrize("kind, barrier, strike, vol, expected", HAUG_CELLS)
def test_haug_standard_barrier_table(kind, barrier, strike, vol, expected):
    price = barrier_option(kind, 100.0, strike, barrier, 0.5, 0.08, 0.04, vol, rebate=3.0)
    assert abs(price - expected) <= 2e-4


@pytest.mark.parametrize("kind, barrier, strike, vol, expected", HAUG_CELLS)
def test_haug_table_recomputed_by_quadrature(kind, barrier, strike, vol, expected):
    price = barrier_option(kind, 100.0, strike, barrier, 0.5, 0.08, 0.04, vol, rebate=3.0)
    ref, err = barrier_by_quadrature(kind, 100.0, strike, barrier, 0.5, 0.08, 0.04, vol, rebate=3.0)
    assert abs(price - ref) <= quad_tolerance(err, 100.0)


# ---------------------------------------------------------------------------------------
# Broadie, Glasserman and Kou (1997)
# ---------------------------------------------------------------------------------------
@pytest.mark.published
def test_bgk_beta_constant():
    # M. Broadie, P. Glasserman and S. Kou, "A Continuity Correction for Discrete Barrier
    # Options", Mathematical Finance 7(4), 1997: beta = -zeta(1/2)/sqrt(2 pi) = 0.5825971579
    # (printed to 10 decimals).
    assert abs(BGK_BETA - 0.5825971579) <= 5e-11
    assert BGK_BETA == pytest.approx(-zeta(0.5) / math.sqrt(2.0 * math.pi), rel=1e-15)


@pytest.mark.published
@pytest.mark.parametrize(
    "barrier, expected",
    # Broadie, Glasserman and Kou 1997, Mathematical Finance 7(4), down-and-out call table,
    # continuous-monitoring column: S=K=100, sigma=0.3, r=0.1, q=0, T=0.2 (from memory;
    # recomputed by quadrature in the same test). Printed to 3 decimals.
    [(85, 6.308), (88, 6.185), (91, 5.808), (94, 4.888), (95, 4.398), (97, 3.060), (99, 1.171), (99.5, 0.605)],
)
def test_bgk_continuous_column(barrier, expected):
    price = barrier_option("down-and-out-call", 100.0, 100.0, barrier, 0.2, 0.1, 0.0, 0.3)
    assert abs(price - expected) <= 5e-4
    ref, err = barrier_by_quadrature("down-and-out-call", 100.0, 100.0, barrier, 0.2, 0.1, 0.0, 0.3)
    assert abs(price - ref) <= quad_tolerance(err, 100.0)


def test_bgk_shift_formula_and_direction():
    h, v, dt = np.array([90.0, 110.0]), 0.3, 0.2 / 50
    np.testing.assert_allclose(bgk_barrier_shift(h, v, dt, "down"), h * np.exp(-BGK_BETA * v * math.sqrt(dt)), rtol=1e-15)
    np.testing.assert_allclose(bgk_barrier_shift(h, v, dt, "up"), h * np.exp(BGK_BETA * v * math.sqrt(dt)), rtol=1e-15)
    assert bgk_barrier_shift(95.0, 0.3, 0.0, "down") == 95.0


def test_discrete_barrier_is_continuous_at_shifted_barrier():
    args = (100.0, 100.0, 0.2, 0.1, 0.0, 0.3)
    for kind, h in (("down-and-out-call", 95.0), ("up-and-in-put", 108.0)):
        direction = "down" if kind.startswith("down") else "up"
        shifted = bgk_barrier_shift(h, 0.3, 0.2 / 50, direction)
        want = barrier_option(kind, 100.0, 100.0, shifted, 0.2, 0.1, 0.0, 0.3)
        assert discrete_barrier_option(kind, 100.0, 100.0, h, 0.2, 0.1, 0.0, 0.3, 50) == want
        assert discrete_barrier_option(kind, 100.0, 100.0, h, 0.2, 0.1, 0.0, 0.3, dt=0.2 / 50) == want
    del args


# ---------------------------------------------------------------------------------------
# quadrature over a grid, all eight kinds, both rebate timings
# ---------------------------------------------------------------------------------------
def _grid_cases(seed=3, n=6):
    rng = np.random.default_rng(seed)
    cases = []
    for kind in BARRIER_KINDS:
        for i in range(n):
            down = kind.startswith("down")
            s = float(rng.uniform(60, 140))
            h = s * float(rng.uniform(0.6, 0.98) if down else rng.uniform(1.02, 1.5))
            k = float(rng.uniform(0.6, 1.5)) * s
            t = float(rng.uniform(0.1, 3.0))
            r = float(rng.uniform(-0.04, 0.12))
            q = float(rng.uniform(-0.03, 0.1))
            v = float(rng.uniform(0.08, 0.7))
            cases.append(pytest.param(kind, s, k, h, t, r, q, v, bool(i % 2), id=f"{kind}-{i}"))
    return cases


@pytest.mark.parametrize("kind, s, k, h, t, r, q, v, at_hit", _grid_cases())
def test_barrier_matches_quadrature(kind, s, k, h, t, r, q, v, at_hit):
    price = barrier_option(kind, s, k, h, t, r, q, v, rebate=2.5, rebate_at_hit=at_hit)
    ref, err = barrier_by_quadrature(kind, s, k, h, t, r, q, v, rebate=2.5, rebate_at_hit=at_hit)
    assert abs(price - ref) <= quad_tolerance(err, max(s, k))


def test_rebate_at_hit_with_imaginary_lambda():
    # r < 0 with mu^2 + 2r/sigma^2 < 0: lambda is imaginary, the rebate is still real
    s, h, t, r, q, v = 100.0, 80.0, 2.0, -0.03, -0.145, 0.5
    mu = (r - q - 0.5 * v * v) / (v * v)
    assert mu * mu + 2 * r / (v * v) < 0
    price = barrier_option("down-and-out-call", s, 100.0, h, t, r, q, v, rebate=5.0)
    ref, err = barrier_by_quadrature("down-and-out-call", s, 100.0, h, t, r, q, v, rebate=5.0)
    assert isinstance(price, float)
    assert abs(price - ref) <= quad_tolerance(err, 100.0)


# ---------------------------------------------------------------------------------------
# relations and reductions
# ---------------------------------------------------------------------------------------
def _random_inputs(n=4000, seed=9):
    rng = np.random.default_rng(seed)
    s = rng.uniform(50, 150, n)
    k = rng.uniform(0, 200, n)
    h = rng.uniform(40, 160, n)
    t = rng.uniform(0, 3, n)
    r = rng.uniform(-0.05, 0.1, n)
    q = rng.uniform(-0.05, 0.1, n)
    v = rng.uniform(0, 0.8, n)
    v[:200] = 0.0  # deterministic paths
    t[200:400] = 0.0
    k[400:600] = 0.0
    v[600:800] = 1e-3  # huge mu: (H/S)^(2 mu) overflows unless done in logs
    h[800:1000] = s[800:1000]  # barrier at the spot
    return s, k, h, t, r, q, v


@pytest.mark.parametrize("option", ["call", "put"])
@pytest.mark.parametrize("direction", ["down", "up"])
def test_in_plus_out_is_vanilla(option, direction):
    s, k, h, t, r, q, v = _random_inputs()
    kin = barrier_option(f"{direction}-and-in-{option}", s, k, h, t, r, q, v)
    kout = barrier_option(f"{direction}-and-out-{option}", s, k, h, t, r, q, v)
    van = black_scholes(s, k, t, r, q, v, option)
    assert not np.any(np.isnan(kin)) and not np.any(np.isnan(kout))
    assert np.all(kin >= -1e-9) and np.all(kout >= -1e-9)
    np.testing.assert_allclose(kin + kout, van, atol=1e-9 * 200)


@pytest.mark.parametrize("option", ["call", "put"])
def test_barrier_moving_away_tends_to_vanilla(option):
    s, k, t, r, q, v = 100.0, 100.0, 1.0, 0.05, 0.02, 0.25
    van = black_scholes(s, k, t, r, q, v, option)
    down = [barrier_option(f"down-and-out-{option}", s, k, h, t, r, q, v) for h in (90, 70, 50, 30, 10, 1e-3)]
    up = [barrier_option(f"up-and-out-{option}", s, k, h, t, r, q, v) for h in (110, 140, 200, 400, 1e3, 1e6)]
    # knock-outs increase towards the vanilla as the barrier recedes
    assert np.all(np.diff(down) >= 0) and np.all(np.diff(up) >= 0)
    assert abs(down[-1] - van) <= 1e-12 * s and abs(up[-1] - van) <= 1e-12 * s
    # unreachable barriers are handled exactly
    assert barrier_option(f"down-and-out-{option}", s, k, 0.0, t, r, q, v) == van
    assert barrier_option(f"up-and-out-{option}", s, k, math.inf, t, r, q, v, rebate=3.0) == van
    assert barrier_option(f"down-and-in-{option}", s, k, 0.0, t, r, q, v) == 0.0
    assert barrier_option(f"up-and-in-{option}", s, k, math.inf, t, r, q, v, rebate=3.0) == pytest.approx(3.0 * math.exp(-r * t), rel=1e-15)


def test_barrier_breached_at_start():
    s, k, t, r, q, v = 100.0, 95.0, 1.0, 0.05, 0.02, 0.25
    df = math.exp(-r * t)
    for option in ("call", "put"):
        van = black_scholes(s, k, t, r, q, v, option)
        for kind, h in ((f"down-and-in-{option}", 100.0), (f"down-and-in-{option}", 120.0),
                        (f"up-and-in-{option}", 100.0), (f"up-and-in-{option}", 80.0)):
            assert barrier_option(kind, s, k, h, t, r, q, v, rebate=4.0) == van
        for kind, h in ((f"down-and-out-{option}", 100.0), (f"up-and-out-{option}", 90.0)):
            assert barrier_option(kind, s, k, h, t, r, q, v, rebate=4.0) == 4.0
            assert barrier_option(kind, s, k, h, t, r, q, v, rebate=4.0, rebate_at_hit=False) == pytest.approx(4.0 * df, rel=1e-15)


def test_barrier_just_inside_tends_to_breached_value():
    # continuity at the barrier: a knock-out just above a down barrier is nearly its rebate
    near = barrier_option("down-and-out-call", 100.0, 100.0, 100.0 - 1e-9, 1.0, 0.05, 0.0, 0.2, rebate=3.0)
    assert abs(near - 3.0) < 1e-6


def test_deterministic_paths():
    # vol 0: S_t = S e^{bt}. Down barrier 95, b = -0.1: hit at tau = ln(0.95)/(-0.1) < T = 1
    s, h, t, r, q = 100.0, 95.0, 1.0, 0.02, 0.12
    tau = math.log(h / s) / (r - q)
    assert 0 < tau < t
    assert barrier_option("down-and-out-call", s, 80.0, h, t, r, q, 0.0, rebate=2.0) == pytest.approx(2.0 * math.exp(-r * tau), rel=1e-14)
    assert barrier_option("down-and-out-call", s, 80.0, h, t, r, q, 0.0, rebate=2.0, rebate_at_hit=False) == pytest.approx(2.0 * math.exp(-r * t), rel=1e-14)
    fwd = s * math.exp((r - q) * t)
    assert barrier_option("down-and-in-call", s, 80.0, h, t, r, q, 0.0) == pytest.approx(math.exp(-r * t) * (fwd - 80.0), rel=1e-14)
    # not hit (barrier below the whole path): knock-out = discounted intrinsic of the forward
    assert barrier_option("down-and-out-call", s, 80.0, 85.0, t, r, q, 0.0, rebate=2.0) == pytest.approx(math.exp(-r * t) * (fwd - 80.0), rel=1e-14)
    # maturity 0: nothing can be hit
    assert barrier_option("up-and-out-put", 100.0, 110.0, 105.0, 0.0, r, q, 0.3, rebate=2.0) == 10.0
    assert barrier_option("up-and-in-put", 100.0, 110.0, 105.0, 0.0, r, q, 0.3, rebate=2.0) == 2.0
    # the formula approaches the deterministic value as vol -> 0
    small = barrier_option("down-and-out-call", s, 80.0, 85.0, t, r, q, 1e-4, rebate=2.0)
    assert abs(small - math.exp(-r * t) * (fwd - 80.0)) < 1e-8


def test_rebate_timing_order():
    # with r > 0 a rebate paid at the hit is worth more than the same rebate paid at expiry
    s, k, h, t, r, q, v = 100.0, 100.0, 90.0, 2.0, 0.06, 0.01, 0.3
    at_hit = barrier_option("down-and-out-put", s, k, h, t, r, q, v, rebate=5.0)
    at_exp = barrier_option("down-and-out-put", s, k, h, t, r, q, v, rebate=5.0, rebate_at_hit=False)
    none = barrier_option("down-and-out-put", s, k, h, t, r, q, v)
    assert at_hit > at_exp > none


def test_vectorised_shapes():
    out = barrier_option("up-and-out-call", 100.0, np.linspace(80, 120, 5), np.array([[110.0], [130.0]]), 1.0, 0.05, 0.0, 0.2)
    assert out.shape == (2, 5)
    assert isinstance(barrier_option("up-and-out-call", 100.0, 100.0, 120.0, 1.0, 0.05, 0.0, 0.2), float)


# ---------------------------------------------------------------------------------------
# bad input
# ---------------------------------------------------------------------------------------
@pytest.mark.parametrize(
    "call, match",
    [
        (lambda: barrier_option("down-out-call", 100, 100, 90, 1, 0.05, 0, 0.2), r"kind='down-out-call' is not a barrier kind"),
        (lambda: barrier_option("down-and-out-call", 100, 100, -5, 1, 0.05, 0, 0.2), r"barrier=-5\.0 is outside \[0\.0, inf\)"),
        (lambda: barrier_option("down-and-out-call", 100, 100, float("nan"), 1, 0.05, 0, 0.2), r"barrier=nan is outside"),
        (lambda: barrier_option("down-and-out-call", 100, 100, 90, 1, 0.05, 0, 0.2, rebate=-1), r"rebate=-1\.0 is outside"),
        (lambda: barrier_option("down-and-out-call", 100, 100, 90, 1, 0.05, 0, -0.2), r"vol=-0\.2 is outside"),
        (lambda: barrier_option("down-and-out-call", 100, 100, 90, 1, 0.05, 0, 0.2, rebate_at_hit="yes"), r"rebate_at_hit='yes' is not a bool"),
        (lambda: bgk_barrier_shift(100, 0.2, 0.01, "sideways"), r"direction='sideways' is not 'up' or 'down'"),
        (lambda: bgk_barrier_shift(100, 0.2, -0.01, "up"), r"dt=-0\.01 is outside"),
        (lambda: discrete_barrier_option("down-and-out-call", 100, 100, 90, 1, 0.05, 0, 0.2), r"give exactly one of them"),
        (lambda: discrete_barrier_option("down-and-out-call", 100, 100, 90, 1, 0.05, 0, 0.2, 50, dt=0.02), r"give exactly one of them"),
        (lambda: discrete_barrier_option("down-and-out-call", 100, 100, 90, 1, 0.05, 0, 0.2, 0), r"n_monitoring=0 is not an integer >= 1"),
        (lambda: discrete_barrier_option("down-and-out-call", 100, 100, 90, 1, 0.05, 0, 0.2, 2.5), r"n_monitoring=2\.5 is not an integer"),
    ],
)
def test_bad_input(call, match):
    with pytest.raises(ParamError, match=match):
        call()
