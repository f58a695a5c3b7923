"""Discretely monitored single and double barriers by recursive quadrature.

Independent routes, written here with scipy alone: for one monitoring date the price is a
one-dimensional integral of a Black-Scholes value against the normal density; for two dates
it is a one-dimensional integral of a closed-form one-date price. Limits: no dates or an
unreachable barrier gives the vanilla; many dates approach the published continuous table
once the barrier is shifted by the Broadie-Glasserman-Kou correction.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references.discrete_barriers import (
    DISCRETE_BARRIER_KINDS,
    DOUBLE_BARRIER_KINDS,
    discrete_barrier_by_quadrature,
    discrete_double_barrier_by_quadrature,
)

S, R, Q, V = 100.0, 0.05, 0.02, 0.3


def bs(call, s, k, tau, r=R, q=Q, v=V):
    """Black-Scholes-Merton price, written out (Black and Scholes 1973)."""
    if tau <= 0:
        return max(s - k, 0.0) if call else max(k - s, 0.0)
    sd = v * math.sqrt(tau)
    d1 = (math.log(s / k) + (r - q + 0.5 * v * v) * tau) / sd
    d2 = d1 - sd
    if call:
        return s * math.exp(-q * tau) * norm.cdf(d1) - k * math.exp(-r * tau) * norm.cdf(d2)
    return k * math.exp(-r * tau) * norm.cdf(-d2) - s * math.exp(-q * tau) * norm.cdf(-d1)


def _quad(f, a, b, pts=()):
    edges = [a, *sorted(p for p in pts if a < p < b), b]
    return sum(integrate.quad(f, lo, hi, epsabs=1e-13, epsrel=1e-12, limit=300)[0]
               for lo, hi in zip(edges[:-1], edges[1:]))


def one_date(call, k, lo, hi, t1, T, rebate, at_hit, s=S):
    """Knock-out monitored once at t1: live iff lo < S_t1 < hi. Scipy quadrature in z."""
    nu, sd = R - Q - 0.5 * V * V, V * math.sqrt(t1)
    z_of = lambda x: (math.log(x / s) - nu * t1) / sd
    zlo = z_of(lo) if lo > 0 else -40.0
    zhi = z_of(hi) if math.isfinite(hi) else 40.0
    live = _quad(lambda z: bs(call, s * math.exp(nu * t1 + sd * z), k, T - t1) * norm.pdf(z),
                 max(zlo, -40.0), min(zhi, 40.0), (z_of(k),) if k > 0 else ())
    p_out = norm.cdf(zlo) + norm.sf(zhi)
    paid = rebate * (1.0 if at_hit else math.exp(-R * (T - t1)))
    return math.exp(-R * t1) * (live + paid * p_out)


def two_dates_down_out_call(k, h, t1, T):
    """Down-and-out call monitored at t1 and T: the inner one-date price is closed form,
    E[(S_T - K)^+ 1{S_T > H}] = call(max(K, H)) + (max(K, H) - K) * cash digital(max(K, H))."""
    nu, sd = R - Q - 0.5 * V * V, V * math.sqrt(t1)
    kk = max(k, h)
    tau = T - t1

    def inner(s1):
        sd2 = V * math.sqrt(tau)
        d2 = (math.log(s1 / kk) + (R - Q - 0.5 * V * V) * tau) / sd2
        return bs(True, s1, kk, tau) + (kk - k) * math.exp(-R * tau) * norm.cdf(d2)

    zlo = (math.log(h / S) - nu * t1) / sd
    val = _quad(lambda z: inner(S * math.exp(nu * t1 + sd * z)) * norm.pdf(z), zlo, 40.0)
    return math.exp(-R * t1) * val


# ---------------------------------------------------------------------------------------
# independent recomputation
# ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("at_hit", [True, False])
@pytest.mark.parametrize("t1", [0.37, 1.0])
@pytest.mark.parametrize("kind,h", [("down-and-out-call", 92.0), ("down-and-out-put", 88.0),
                                    ("up-and-out-call", 131.0), ("up-and-out-put", 108.0)])
def test_one_date_matches_scipy_quadrature(kind, h, t1, at_hit):
    call, down = kind.endswith("call"), kind.startswith("down")
    lo, hi = (h, math.inf) if down else (0.0, h)
    want = one_date(call, 97.0, lo, hi, t1, 1.0, 2.5, at_hit)
    got = discrete_barrier_by_quadrature(kind, S, 97.0, h, [t1], 1.0, R, Q, V, 2.5, at_hit)
    assert got == pytest.approx(want, abs=1e-10)


@pytest.mark.parametrize("k,h,t1", [(100.0, 95.0, 0.5), (90.0, 95.0, 0.21), (120.0, 80.0, 0.83)])
def test_two_dates_match_nested_scipy_quadrature(k, h, t1):
    want = two_dates_down_out_call(k, h, t1, 1.0)
    got = discrete_barrier_by_quadrature("down-and-out-call", S, k, h, [t1, 1.0], 1.0, R, Q, V)
    assert got == pytest.approx(want, abs=1e-10)


def test_double_barrier_one_date_matches_scipy_quadrature():
    for call in (True, False):
        for at_hit in (True, False):
            want = one_date(call, 101.0, 85.0, 118.0, 0.6, 1.0, 1.75, at_hit)
            kind = "knock-out-call" if call else "knock-out-put"
            got = discrete_double_barrier_by_quadrature(kind, S, 101.0, 85.0, 118.0, [0.6], 1.0,
                                                        R, Q, V, 1.75, at_hit)
            assert got == pytest.approx(want, abs=1e-10)


def test_uneven_dates_grid_refinement():
    """Uneven spacing (a jittered schedule with a short stub): the default grid agrees with a
    grid 5/3 as fine."""
    times = np.linspace(0.025, 1.0, 40) + np.random.default_rng(7).uniform(-0.01, 0.01, 40)
    times = np.concatenate(([0.01], np.sort(np.clip(times[:-1], 0.02, 0.99)), [1.0]))
    a = discrete_barrier_by_quadrature("up-and-in-call", S, 100.0, 115.0, times, 1.0, R, Q, V, 1.0)
    b = discrete_barrier_by_quadrature("up-and-in-call", S, 100.0, 115.0, times, 1.0, R, Q, V, 1.0, panels_per_sd=1.25)
    assert abs(a - b) < 1e-9
    a = discrete_double_barrier_by_quadrature("knock-out-call", S, 100.0, 80.0, 125.0, times, 1.0, R, Q, V, 1.0)
    b = discrete_double_barrier_by_quadrature("knock-out-call", S, 100.0, 80.0, 125.0, times, 1.0, R, Q, V, 1.0,
                                              panels_per_sd=1.25)
    assert abs(a - b) < 1e-9


# ---------------------------------------------------------------------------------------
# relations and limits
# ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("option", ["call", "put"])
@pytest.mark.parametrize("direction,h", [("down", 93.0), ("up", 112.0)])
def test_in_plus_out_is_vanilla_plus_rebates(option, direction, h):
    """in + out = vanilla + rebate paid at expiry (in: never hit; out: hit), exactly."""
    times = np.linspace(0.05, 1.0, 20)
    out = discrete_barrier_by_quadrature(f"{direction}-and-out-{option}", S, 100.0, h, times, 1.0,
                                         R, Q, V, rebate=2.0, rebate_at_hit=False)
    kin = discrete_barrier_by_quadrature(f"{direction}-and-in-{option}", S, 100.0, h, times, 1.0,
                                         R, Q, V, rebate=2.0)
    assert out + kin == pytest.approx(bs(option == "call", S, 100.0, 1.0) + 2.0 * math.exp(-R), abs=1e-10)


@pytest.mark.parametrize("kind", DISCRETE_BARRIER_KINDS)
def test_limits_vanilla(kind):
    call, down, out = kind.endswith("call"), kind.startswith("down"), "-out-" in kind
    vanilla = bs(call, S, 105.0, 0.8)
    never = 0.0 if down else math.inf
    times = np.linspace(0.1, 0.8, 8)
    # barrier out of reach
    got = discrete_barrier_by_quadrature(kind, S, 105.0, never, times, 0.8, R, Q, V, rebate=1.0)
    assert got == pytest.approx(vanilla if out else math.exp(-0.8 * R), abs=1e-12)
    # no monitoring date
    got = discrete_barrier_by_quadrature(kind, S, 105.0, 95.0 if down else 105.0, [], 0.8, R, Q, V, rebate=1.0)
    assert got == pytest.approx(vanilla if out else math.exp(-0.8 * R), abs=1e-12)


def test_far_barrier_approaches_vanilla():
    times = np.linspace(0.02, 1.0, 50)
    got = discrete_barrier_by_quadrature("down-and-out-call", S, 100.0, 5.0, times, 1.0, R, Q, V)
    assert got == pytest.approx(bs(True, S, 100.0, 1.0), abs=1e-10)


def test_double_barrier_reduces_to_single():
    times = np.linspace(0.1, 1.0, 10)
    single = discrete_barrier_by_quadrature("up-and-out-put", S, 100.0, 115.0, times, 1.0, R, Q, V, 1.0)
    double = discrete_double_barrier_by_quadrature("knock-out-put", S, 100.0, 0.0, 115.0, times, 1.0, R, Q, V, 1.0)
    assert double == pytest.approx(single, abs=1e-12)
    single = discrete_barrier_by_quadrature("down-and-in-call", S, 100.0, 85.0, times, 1.0, R, Q, V, 1.0)
    double = discrete_double_barrier_by_quadrature("knock-in-call", S, 100.0, 85.0, math.inf, times, 1.0, R, Q, V, 1.0)
    assert double == pytest.approx(single, abs=1e-12)
    for kind in DOUBLE_BARRIER_KINDS:
        got = discrete_double_barrier_by_quadrature(kind, S, 100.0, 0.0, math.inf, times, 1.0, R, Q, V, 1.0)
        want = bs(kind.endswith("call"), S, 100.0, 1.0) if "out" in kind else math.exp(-R)
        assert got == pytest.approx(want, abs=1e-12)


def test_more_dates_knock_out_more():
    """Adding monitoring dates can only knock out more paths (monotone in the date set)."""
    few = discrete_barrier_by_quadrature("down-and-out-call", S, 100.0, 95.0, np.linspace(0.1, 1, 10), 1.0, R, Q, V)
    many = discrete_barrier_by_quadrature("down-and-out-call", S, 100.0, 95.0, np.linspace(0.05, 1, 20), 1.0, R, Q, V)
    assert many < few


@pytest.mark.published
@pytest.mark.parametrize(
    "kind,k,h,v,published",
    [
        # Haug (2007), standard barrier table, S=100, r=0.08, b=0.04, T=0.5, rebate 3
        # (Reiner and Rubinstein 1991 formulas); from memory, recomputed by the closed form.
        ("down-and-out-call", 90.0, 95.0, 0.25, 9.0246),
        ("up-and-out-call", 90.0, 105.0, 0.25, 2.6789),
        ("up-and-out-put", 100.0, 105.0, 0.30, 5.8032),
        ("down-and-in-put", 110.0, 95.0, 0.25, 11.9752),
        ("up-and-in-call", 100.0, 105.0, 0.30, 9.7278),
    ],
)
def test_many_dates_reach_the_published_continuous_table(kind, k, h, v, published):
    """250 dates, barrier moved away from the spot by exp(beta sigma sqrt(dt)): the
    Broadie-Glasserman-Kou correction makes the discrete price equal the continuous one up
    to O(1/m) (BGK 1997, Theorem 1). Measured: error 1.3e-3 at m=250, 3.4e-4 at m=1000,
    1.1e-4 at m=4000 (the O(1/m) rate); the tolerance is the m=250 bound, 2e-3."""
    m, T = 250, 0.5
    beta = 0.5825971579  # -zeta(1/2)/sqrt(2 pi), Broadie, Glasserman and Kou (1997)
    shift = math.exp(beta * v * math.sqrt(T / m))
    hs = h * shift if kind.startswith("down") else h / shift
    got = discrete_barrier_by_quadrature(kind, 100.0, k, hs, np.linspace(T / m, T, m), T, 0.08, 0.04, v, 3.0)
    assert abs(got - published) < 2e-3


def test_bgk_fifty_dates_table_recomputed():
    """Down-and-out call, S=K=100, sigma=0.3, r=0.1, T=0.2, m=50 (the setting of Broadie,
    Glasserman and Kou 1997). Values recomputed independently by backward induction (not read
    from the paper), to 4 decimals."""
    t = np.linspace(0.2 / 50, 0.2, 50)
    for h, want in [(85, 6.3222), (91, 5.9771), (95, 4.9068), (97, 3.8340), (99, 2.3364), (99.5, 1.9359)]:
        got = discrete_barrier_by_quadrature("down-and-out-call", 100.0, 100.0, h, t, 0.2, 0.1, 0.0, 0.3)
        assert abs(got - want) < 6e-5


def test_vectorised_over_strikes():
    ks = np.array([90.0, 100.0, 110.0])
    got = discrete_barrier_by_quadrature("up-and-out-call", S, ks, 130.0, [0.5, 1.0], 1.0, R, Q, V)
    assert got.shape == (3,)
    for k, g in zip(ks, got):
        assert g == discrete_barrier_by_quadrature("up-and-out-call", S, k, 130.0, [0.5, 1.0], 1.0, R, Q, V)


def test_zero_vol_is_deterministic():
    # forward path 100 e^{0.03 t} crosses 102 at t = ln(1.02)/0.03 = 0.66: knocked at the date 0.75
    got = discrete_barrier_by_quadrature("up-and-out-call", S, 90.0, 102.0, [0.25, 0.5, 0.75, 1.0], 1.0,
                                         R, Q, 0.0, rebate=4.0)
    assert got == pytest.approx(4.0 * math.exp(-R * 0.75), abs=1e-14)


@pytest.mark.parametrize(
    "kwargs,match",
    [
        (dict(kind="sideways-call"), "kind"),
        (dict(monitoring_times=[0.5, 0.5]), "strictly increasing"),
        (dict(monitoring_times=[0.0, 0.5]), "monitoring_times"),
        (dict(monitoring_times=[0.5, 1.5]), "maturity"),
        (dict(barrier=-1.0), "barrier"),
        (dict(vol=float("nan")), "vol"),
        (dict(rebate=-1.0), "rebate"),
    ],
)
def test_bad_input_names_the_parameter(kwargs, match):
    args = dict(kind="down-and-out-call", spot=S, strike=100.0, barrier=90.0, monitoring_times=[0.5, 1.0],
                maturity=1.0, rate=R, dividend=Q, vol=V)
    args.update(kwargs)
    with pytest.raises(ParamError, match=match):
        discrete_barrier_by_quadrature(**args)
    with pytest.raises(ParamError, match="lower"):
        discrete_double_barrier_by_quadrature("knock-out-call", S, 100.0, 120.0, 110.0, [1.0], 1.0, R, Q, V)
