"""Double barriers, touch and binary barrier options (continuous monitoring).

Independent routes written here with scipy alone: the double-barrier density by its
eigenfunction (Fourier sine) expansion, which shares nothing with the image series of the
module; the hitting-time density for payments at hit; and the single-barrier closed forms
of :mod:`limitcase.references.barriers` (a separate code path) for the one-barrier limits.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references import barrier_option, black_scholes, cash_or_nothing, asset_or_nothing
from limitcase.references.barrier_series import (
    binary_barrier,
    double_barrier_option,
    double_touch,
    touch_option,
)


def strip_density_sine(x, s, lo, hi, t, r, q, v, terms=400):
    """Density of ln(S_T/S) on paths inside (ln(lo/s), ln(hi/s)): the killed driftless
    density (2/w) sum_n exp(-n^2 pi^2 v^2 t / (2 w^2)) sin(n pi a/w) sin(n pi (x - l)/w)
    (separation of variables) times the Girsanov factor exp(k x - nu^2 t / (2 v^2))."""
    ell, u = math.log(lo / s), math.log(hi / s)
    w = u - ell
    n = np.arange(1, terms + 1)
    nu = r - q - 0.5 * v * v
    q0 = (2.0 / w) * np.sum(np.exp(-(n * math.pi * v / w) ** 2 * t / 2.0)
                            * np.sin(n * math.pi * (0.0 - ell) / w) * np.sin(n * math.pi * (x - ell) / w))
    return q0 * math.exp(nu * x / (v * v) - nu * nu * t / (2.0 * v * v))


def double_by_sine(call, s, k, lo, hi, t, r, q, v):
    ell, u = math.log(lo / s), math.log(hi / s)
    kx = math.log(k / s)
    a, b = (max(kx, ell), u) if call else (ell, min(kx, u))
    if a >= b:
        return 0.0
    pay = (lambda x: s * math.exp(x) - k) if call else (lambda x: k - s * math.exp(x))
    val, _ = integrate.quad(lambda x: pay(x) * strip_density_sine(x, s, lo, hi, t, r, q, v), a, b,
                            epsabs=1e-12, epsrel=1e-11, limit=300)
    return math.exp(-r * t) * val


@pytest.mark.parametrize("call", [True, False])
@pytest.mark.parametrize(
    "s,k,lo,hi,t,r,q,v",
    [
        (100.0, 100.0, 80.0, 120.0, 0.25, 0.1, 0.0, 0.25),
        (100.0, 95.0, 70.0, 130.0, 1.0, 0.03, 0.05, 0.3),
        (100.0, 60.0, 75.0, 140.0, 0.5, 0.05, 0.0, 0.2),  # strike below the corridor
        (100.0, 150.0, 75.0, 140.0, 0.5, 0.05, 0.0, 0.2),  # strike above the corridor
    ],
)
def test_double_knock_out_matches_sine_expansion(call, s, k, lo, hi, t, r, q, v):
    kind = "knock-out-call" if call else "knock-out-put"
    got = double_barrier_option(kind, s, k, lo, hi, t, r, q, v)
    assert got == pytest.approx(double_by_sine(call, s, k, lo, hi, t, r, q, v), abs=1e-9)


def test_double_no_touch_matches_sine_expansion():
    s, lo, hi, t, r, q, v = 100.0, 85.0, 112.0, 0.75, 0.04, 0.01, 0.22
    ell, u = math.log(lo / s), math.log(hi / s)
    p, _ = integrate.quad(lambda x: strip_density_sine(x, s, lo, hi, t, r, q, v), ell, u, epsabs=1e-13)
    assert double_touch("no-touch", s, lo, hi, t, r, q, v, 7.0) == pytest.approx(7.0 * math.exp(-r * t) * p, abs=1e-10)
    total = double_touch("no-touch", s, lo, hi, t, r, q, v) + double_touch("one-touch", s, lo, hi, t, r, q, v)
    assert total == pytest.approx(math.exp(-r * t), abs=1e-14)  # together: a zero-coupon bond


@pytest.mark.parametrize("option", ["call", "put"])
def test_double_barrier_limits(option):
    s, k, t, r, q, v = 100.0, 97.0, 0.5, 0.08, 0.04, 0.3
    # lower at 0 and upper at inf: the vanilla; one side absent: the single barrier
    assert double_barrier_option(f"knock-out-{option}", s, k, 0.0, math.inf, t, r, q, v) == pytest.approx(
        black_scholes(s, k, t, r, q, v, option), abs=1e-11)
    assert double_barrier_option(f"knock-out-{option}", s, k, 90.0, math.inf, t, r, q, v) == pytest.approx(
        barrier_option(f"down-and-out-{option}", s, k, 90.0, t, r, q, v), abs=1e-11)
    assert double_barrier_option(f"knock-in-{option}", s, k, 0.0, 108.0, t, r, q, v, rebate=2.0) == pytest.approx(
        barrier_option(f"up-and-in-{option}", s, k, 108.0, t, r, q, v, rebate=2.0), abs=1e-11)
    # barriers far away: the vanilla
    assert double_barrier_option(f"knock-out-{option}", s, k, 1.0, 1e4, t, r, q, v) == pytest.approx(
        black_scholes(s, k, t, r, q, v, option), abs=1e-11)
    # in + out = vanilla + rebate at expiry
    kin = double_barrier_option(f"knock-in-{option}", s, k, 88.0, 115.0, t, r, q, v, rebate=1.5)
    kout = double_barrier_option(f"knock-out-{option}", s, k, 88.0, 115.0, t, r, q, v, rebate=1.5)
    assert kin + kout == pytest.approx(black_scholes(s, k, t, r, q, v, option) + 1.5 * math.exp(-r * t), abs=1e-11)
    # spot outside the corridor: knocked already
    assert double_barrier_option(f"knock-out-{option}", 80.0, k, 88.0, 115.0, t, r, q, v, rebate=1.5) == pytest.approx(
        1.5 * math.exp(-r * t))


def test_discrete_double_barrier_approaches_continuous():
    """Many monitoring dates with the barriers moved in by exp(beta sigma sqrt(dt))
    (Broadie, Glasserman and Kou 1997) reach the continuous series to O(1/m)."""
    from limitcase.references.discrete_barriers import discrete_double_barrier_by_quadrature

    s, k, lo, hi, t, r, q, v = 100.0, 100.0, 80.0, 120.0, 0.25, 0.1, 0.0, 0.25
    m = 400
    shift = math.exp(0.5825971579 * v * math.sqrt(t / m))
    disc = discrete_double_barrier_by_quadrature("knock-out-call", s, k, lo * shift, hi / shift,
                                                 np.linspace(t / m, t, m), t, r, q, v)
    cont = double_barrier_option("knock-out-call", s, k, lo, hi, t, r, q, v)
    assert abs(disc - cont) < 2e-3 * cont


@pytest.mark.published
@pytest.mark.parametrize(
    "lo,hi,v,call_value",
    [
        # Haug (2007), double-barrier table (Ikeda-Kunitomo), S=X=100, T=0.25, r=b=0.1,
        # flat barriers; from memory, recomputed here (printed to 4 decimals).
        (50.0, 150.0, 0.15, 4.3515),
        (50.0, 150.0, 0.25, 6.1644),
        (50.0, 150.0, 0.35, 7.0373),
        (60.0, 140.0, 0.15, 4.3505),
    ],
)
def test_haug_double_barrier_table(lo, hi, v, call_value):
    got = double_barrier_option("knock-out-call", 100.0, 100.0, lo, hi, 0.25, 0.1, 0.0, v)
    assert abs(got - call_value) < 1.5e-4  # the 6.1644 cell is 6.16445 at full precision


# ---------------------------------------------------------------------------------------
# touch and binary barriers
# ---------------------------------------------------------------------------------------
def at_hit_by_quadrature(s, h, t, r, q, v):
    """E[e^{-r tau} 1{tau <= T}] from the first-passage density of ln S to ln(H/S)."""
    ell, nu = math.log(h / s), r - q - 0.5 * v * v
    dens = lambda u: abs(ell) / (v * math.sqrt(2 * math.pi * u**3)) * math.exp(-((ell - nu * u) ** 2) / (2 * v * v * u))
    val, _ = integrate.quad(lambda u: math.exp(-r * u) * dens(u), 0.0, t, epsabs=1e-13, epsrel=1e-12, limit=200)
    return val


@pytest.mark.parametrize("direction,h,t,r,q,v", [
    ("down", 90.0, 0.8, 0.05, 0.02, 0.27),
    ("up", 112.0, 0.8, 0.05, 0.02, 0.27),
    ("down", 90.0, 2.0, -0.03, -0.05, 0.1),  # r < 0 with mu^2 + 2r/sigma^2 < 0: lambda imaginary
])
def test_one_touch_at_hit_matches_first_passage_quadrature(direction, h, t, r, q, v):
    got = touch_option("one-touch", direction, 100.0, h, t, r, q, v, 3.0, at_hit=True)
    assert got == pytest.approx(3.0 * at_hit_by_quadrature(100.0, h, t, r, q, v), abs=1e-10)


@pytest.mark.parametrize("direction,h", [("down", 90.0), ("up", 112.0)])
def test_touch_relations_and_limits(direction, h):
    s, t, r, q, v = 100.0, 0.8, 0.05, 0.02, 0.27
    df = math.exp(-r * t)
    nt = touch_option("no-touch", direction, s, h, t, r, q, v, 2.0)
    ot = touch_option("one-touch", direction, s, h, t, r, q, v, 2.0)
    assert nt + ot == pytest.approx(2.0 * df, abs=1e-14)
    # no-touch = the knock-out rebate-only part of the single-barrier closed form
    ko_reb = barrier_option(f"{direction}-and-out-call", s, 1e12, h, t, r, q, v, rebate=2.0, rebate_at_hit=False)
    assert ot == pytest.approx(ko_reb, abs=1e-9)
    # paying at hit is worth more than paying at expiry when r > 0
    assert touch_option("one-touch", direction, s, h, t, r, q, v, 2.0, at_hit=True) > ot
    # unreachable barrier, barrier at spot
    far = 0.0 if direction == "down" else math.inf
    assert touch_option("no-touch", direction, s, far, t, r, q, v, 2.0) == pytest.approx(2.0 * df)
    assert touch_option("one-touch", direction, s, s, t, r, q, v, 2.0, at_hit=True) == 2.0


@pytest.mark.parametrize("kind", ["down-and-out", "up-and-out"])
@pytest.mark.parametrize("x", [95.0, 102.0])
def test_binary_barriers_rebuild_the_barrier_call(kind, x):
    """A knock-out call = asset-or-nothing above X minus X cash-or-nothing above X, both
    knocked out by the same barrier; checked against the separate single-barrier code."""
    s, t, r, q, v = 100.0, 0.5, 0.08, 0.04, 0.3
    h = 90.0 if kind.startswith("down") else 115.0
    asset = binary_barrier("asset", kind, s, h, x, t, r, q, v, condition="above")
    cash = binary_barrier("cash", kind, s, h, x, t, r, q, v, cash=x, condition="above")
    assert asset - cash == pytest.approx(barrier_option(f"{kind}-call", s, x, h, t, r, q, v), abs=1e-10)
    asset = binary_barrier("asset", kind, s, h, x, t, r, q, v, condition="below")
    cash = binary_barrier("cash", kind, s, h, x, t, r, q, v, cash=x, condition="below")
    assert cash - asset == pytest.approx(barrier_option(f"{kind}-put", s, x, h, t, r, q, v), abs=1e-10)


@pytest.mark.parametrize("payout", ["cash", "asset"])
@pytest.mark.parametrize("condition", [None, "above", "below"])
@pytest.mark.parametrize("direction", ["down", "up"])
def test_binary_in_plus_out_is_the_plain_binary(payout, condition, direction):
    s, h, x, t, r, q, v = 100.0, (92.0 if direction == "down" else 109.0), 101.0, 0.6, 0.03, 0.01, 0.25
    kin = binary_barrier(payout, f"{direction}-and-in", s, h, x, t, r, q, v, cash=4.0, condition=condition)
    kout = binary_barrier(payout, f"{direction}-and-out", s, h, x, t, r, q, v, cash=4.0, condition=condition)
    if condition is None:
        plain = 4.0 * math.exp(-r * t) if payout == "cash" else s * math.exp(-q * t)
    else:
        kind = "call" if condition == "above" else "put"
        plain = cash_or_nothing(s, x, t, r, q, v, 4.0, kind) if payout == "cash" else asset_or_nothing(s, x, t, r, q, v, kind)
    assert kin + kout == pytest.approx(plain, abs=1e-10)


@pytest.mark.published
@pytest.mark.parametrize(
    "payout,kind,s,x,condition,at_hit,value",
    [
        # Haug (2007), binary barrier table (Reiner and Rubinstein 1991): H=100, T=0.5,
        # r=b=0.1, sigma=0.2, cash K=15; S=105 under a down barrier, S=95 under an up one.
        # Values from memory, recomputed here; the case each belongs to was identified by the
        # recomputation.
        ("cash", "down-and-in", 105.0, 102.0, None, True, 9.7264),
        ("cash", "up-and-in", 95.0, 102.0, None, True, 11.6553),
        ("asset", "down-and-in", 105.0, 102.0, None, True, 64.8426),
        ("asset", "up-and-in", 95.0, 102.0, None, True, 77.7017),
        ("cash", "down-and-in", 105.0, 102.0, None, False, 9.3604),
        ("cash", "down-and-in", 105.0, 102.0, "above", False, 4.9289),
        ("asset", "down-and-in", 105.0, 102.0, "above", False, 37.2782),
        ("asset", "up-and-in", 95.0, 102.0, "above", False, 44.5294),
        ("cash", "down-and-in", 105.0, 102.0, "below", False, 4.4314),
        ("cash", "up-and-in", 95.0, 102.0, "below", False, 5.3297),
        ("asset", "down-and-in", 105.0, 102.0, "below", False, 27.5644),
    ],
)
def test_haug_binary_barrier_table(payout, kind, s, x, condition, at_hit, value):
    got = binary_barrier(payout, kind, s, 100.0, x, 0.5, 0.1, 0.0, 0.2, cash=15.0, condition=condition, at_hit=at_hit)
    assert abs(got - value) < 1.5e-4


def test_bad_input():
    with pytest.raises(ParamError, match="lower"):
        double_barrier_option("knock-out-call", 100.0, 100.0, 120.0, 110.0, 1.0, 0.05, 0.0, 0.2)
    with pytest.raises(ParamError, match="kind"):
        double_barrier_option("double-call", 100.0, 100.0, 80.0, 110.0, 1.0, 0.05, 0.0, 0.2)
    with pytest.raises(ParamError, match="at_hit"):
        binary_barrier("cash", "down-and-out", 100.0, 90.0, 100.0, 1.0, 0.05, 0.0, 0.2, at_hit=True)
    with pytest.raises(ParamError, match="vol"):
        touch_option("no-touch", "up", 100.0, 110.0, 1.0, 0.05, 0.0, -0.2)
