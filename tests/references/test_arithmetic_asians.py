"""Arithmetic-average Asians by Vecer's PDE: published continuous-average values, an
independent scipy quadrature for two fixings, and the limits (one fixing is European, all
fixings at the start is a forward, many fixings approach the continuous average)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase.errors import ParamError
from limitcase.references import black_scholes, geometric_asian
from limitcase.references.arithmetic_asians import arithmetic_asian, arithmetic_asian_continuous


# V. Linetsky, "Spectral expansions for Asian (average price) options", Operations Research
# 52(6), 2004, Table 3: continuously averaged calls, q = 0, K = 2.0, computed there to ten
# digits by the eigenfunction expansion (from memory; the same digits appear in the copies of
# the table reproduced in later papers).
LINETSKY_TABLE_3 = [
    # r,    sigma, T,   S0,  price
    (0.02, 0.10, 1.0, 2.0, 0.0559860415),
    (0.18, 0.30, 1.0, 2.0, 0.2183875466),
    (0.0125, 0.25, 2.0, 2.0, 0.1722687410),
    (0.05, 0.50, 1.0, 1.9, 0.1931737903),
    (0.05, 0.50, 1.0, 2.0, 0.2464156905),
    (0.05, 0.50, 1.0, 2.1, 0.3062203648),
    (0.05, 0.50, 2.0, 2.0, 0.3500952190),
]


@pytest.mark.published
@pytest.mark.parametrize("r,v,t,s,price", LINETSKY_TABLE_3)
def test_linetsky_table_3(r, v, t, s, price):
    """Stated accuracy 1e-6 relative; measured 1e-9 at the default resolution."""
    got = arithmetic_asian_continuous(s, 2.0, t, r, 0.0, v)
    assert abs(got - price) <= 1e-6 * price


def two_fixings(kind, s, k, t1, t2, T, r, q, v):
    """E[e^{-rT} (A - K)^+], A = (S_t1 + S_t2)/2: given S_t1, a Black-Scholes option on S_t2
    with strike 2K - S_t1 (a forward when that is negative); one scipy quadrature over S_t1."""
    nu, sd = r - q - 0.5 * v * v, v * math.sqrt(t1)
    tau = t2 - t1

    def inner(z):
        s1 = s * math.exp(nu * t1 + sd * z)
        k2 = 2.0 * k - s1
        if k2 <= 0.0:
            val = 0.5 * (s1 * math.exp(-q * tau) - k2 * math.exp(-r * tau)) if kind == "call" else 0.0
        else:
            val = 0.5 * black_scholes(s1, k2, tau, r, q, v, kind)
        return val * norm.pdf(z)

    zk = (math.log(2.0 * k / s) - nu * t1) / sd
    total = sum(integrate.quad(inner, a, b, epsabs=1e-13, epsrel=1e-12, limit=300)[0]
                for a, b in ((-15.0, zk), (zk, 15.0)))
    return total * math.exp(-r * t1) * math.exp(-r * (T - t2))


@pytest.mark.parametrize("kind", ["call", "put"])
@pytest.mark.parametrize(
    "s,k,t1,t2,T,r,q,v",
    [
        (100.0, 95.0, 0.4, 0.9, 1.0, 0.05, 0.03, 0.3),
        (100.0, 110.0, 0.1, 0.5, 0.5, 0.02, 0.0, 0.2),
        (50.0, 48.0, 0.7, 1.3, 1.5, -0.01, 0.02, 0.45),
    ],
)
def test_two_fixings_match_scipy_quadrature(kind, s, k, t1, t2, T, r, q, v):
    want = two_fixings(kind, s, k, t1, t2, T, r, q, v)
    got = arithmetic_asian(s, k, [t1, t2], T, r, q, v, kind)
    assert abs(got - want) <= 1e-6 * want + 1e-8 * s


@pytest.mark.parametrize("kind", ["call", "put"])
@pytest.mark.parametrize("t1,T", [(1.0, 1.0), (0.6, 1.0)])
def test_one_fixing_is_european(kind, t1, T):
    r, q = 0.04, 0.01
    want = black_scholes(100.0, 103.0, t1, r, q, 0.25, kind) * math.exp(-r * (T - t1))
    got = arithmetic_asian(100.0, 103.0, [t1], T, r, q, 0.25, kind)
    assert abs(got - want) <= 1e-6 * want


def test_fixings_at_start_and_zero_vol():
    # every fixing at time 0: the average is the spot, a known number paid at T
    assert arithmetic_asian(100.0, 90.0, [0.0, 0.0], 1.0, 0.05, 0.0, 0.3) == pytest.approx(10.0 * math.exp(-0.05))
    # zero vol: the average of the forwards
    t = np.array([0.25, 0.5, 0.75, 1.0])
    avg = 100.0 * np.mean(np.exp(0.03 * t))
    got = arithmetic_asian(100.0, 99.0, t, 1.0, 0.05, 0.02, 0.0)
    assert got == pytest.approx(math.exp(-0.05) * (avg - 99.0), abs=1e-12)


def test_many_fixings_approach_the_continuous_average():
    """Right-point fixings iT/n: the discrete price is V_cont + c/n + d/n^2 + ...; the
    three-point Richardson extrapolation over n = 100, 200, 400 reaches Linetsky's case 5
    (Table 3) to O(1/n^3)."""
    v = [arithmetic_asian(2.0, 2.0, np.linspace(1.0 / n, 1.0, n), 1.0, 0.05, 0.0, 0.5, resolution=2)
         for n in (100, 200, 400)]
    extrapolated = (8.0 * v[2] - 6.0 * v[1] + v[0]) / 3.0
    assert abs(extrapolated - 0.2464156905) < 2e-6


def test_arithmetic_above_geometric_and_parity():
    t = np.linspace(0.1, 1.0, 10)
    arith = arithmetic_asian(100.0, 100.0, t, 1.0, 0.05, 0.01, 0.35)
    geo = geometric_asian(100.0, 100.0, t, 0.05, 0.01, 0.35, "call")
    assert arith > geo  # the arithmetic mean dominates the geometric mean path by path
    put = arithmetic_asian(100.0, 100.0, t, 1.0, 0.05, 0.01, 0.35, "put")
    fwd_avg = 100.0 * np.mean(np.exp(0.04 * t))
    assert arith - put == pytest.approx(math.exp(-0.05) * (fwd_avg - 100.0), abs=1e-10)


def test_uneven_fixings_converge():
    t = np.array([0.02, 0.05, 0.3, 0.31, 0.32, 0.7, 0.95])
    a = arithmetic_asian(100.0, 97.0, t, 1.0, 0.03, 0.0, 0.4)
    b = arithmetic_asian(100.0, 97.0, t, 1.0, 0.03, 0.0, 0.4, resolution=4)
    assert abs(a - b) <= 1e-7 * b


def test_vectorised_over_strikes():
    got = arithmetic_asian_continuous(2.0, np.array([1.9, 2.0]), 1.0, 0.05, 0.0, 0.5, resolution=1)
    assert got.shape == (2,)


@pytest.mark.parametrize(
    "args,match",
    [
        (dict(fixing_times=[0.5, 0.2]), "non-decreasing"),
        (dict(fixing_times=[0.5, 1.5]), "maturity"),
        (dict(fixing_times=[]), "non-empty"),
        (dict(vol=-0.1), "vol"),
        (dict(kind="straddle"), "kind"),
    ],
)
def test_bad_input(args, match):
    base = dict(spot=100.0, strike=100.0, fixing_times=[0.5, 1.0], maturity=1.0, rate=0.05, dividend=0.0, vol=0.2)
    base.update(args)
    with pytest.raises(ParamError, match=match):
        arithmetic_asian(**base)
