"""Discretely monitored barriers under local volatility by finite differences.

Checked against sources outside the scheme: the "true discrete" down-and-out prices of
Broadie, Glasserman and Kou (1997, Mathematical Finance 7(4), their table for S = K = 100,
sigma = 0.3, r = 0.1, T = 0.2, 50 monitoring dates), Schroder's (1989) closed form for the
constant-elasticity-of-variance call (written out below with scipy's non-central
chi-square), the recursive quadrature of the Black-Scholes family at constant volatility,
and in-out parity.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import ncx2

from limitcase.errors import ParamError
from limitcase.references import (
    LOCAL_VOL_BARRIER_KINDS,
    black_scholes,
    discrete_barrier_by_quadrature,
    local_vol_barrier_by_pde,
)


def flat(vol: float):
    return lambda k, t: np.full_like(np.asarray(k, dtype=float), vol * vol)


# Broadie, Glasserman and Kou (1997), down-and-out call, m = 50: the price by backward
# induction they call the true discrete price (4 decimals published).
BGK_TRUE_DISCRETE = [(85.0, 6.3222), (88.0, 6.2422), (91.0, 5.9771), (94.0, 5.2879), (95.0, 4.9068),
                     (97.0, 3.8340), (99.0, 2.3364), (99.5, 1.9359)]


@pytest.mark.parametrize("barrier,want", BGK_TRUE_DISCRETE)
def test_constant_vol_meets_the_published_discrete_barrier_table(barrier, want):
    dates = np.arange(1, 51) * 0.2 / 50
    got = local_vol_barrier_by_pde("down-and-out-call", 100.0, 100.0, barrier, dates, 0.2, 0.1, 0.0, flat(0.3))
    # scheme accuracy (measured 3.5e-4 at the defaults) plus half a unit of the 4th decimal
    assert got == pytest.approx(want, abs=5e-4)


@pytest.mark.parametrize("kind", [k for k in LOCAL_VOL_BARRIER_KINDS if k not in ("call", "put")])
@pytest.mark.parametrize("vol,n", [(0.15, 12), (0.45, 52)])
def test_constant_vol_meets_the_recursive_quadrature(kind, vol, n):
    down = kind.startswith("down")
    h = 88.0 if down else 115.0
    dates = np.arange(1, n + 1) / n
    got = local_vol_barrier_by_pde(kind, 100.0, 97.0, h, dates, 1.0, 0.04, 0.01, flat(vol), rebate=1.5)
    want = discrete_barrier_by_quadrature(kind, 100.0, 97.0, h, dates, 1.0, 0.04, 0.01, vol, rebate=1.5)
    assert got == pytest.approx(want, abs=2.5e-3)  # measured at most 1.8e-3 (2e-5 per unit of spot)


def schroder_cev_call(s: float, k: float, t: float, r: float, q: float, vol: float, beta: float) -> float:
    """Schroder (1989), "Computing the constant elasticity of variance option pricing
    formula", J. Finance 44(1): dS = (r - q) S dt + vol S0^(1-beta) S^beta dW, 0 < beta < 1."""
    mu, one = r - q, 1.0 - beta
    sigma = vol * s**one
    x = 2.0 * mu * (beta - 1.0) * t
    v = sigma * sigma * (t * math.expm1(x) / x if x else t)
    a = (k * math.exp(-mu * t)) ** (2 * one) / (one * one * v)
    c = s ** (2 * one) / (one * one * v)
    return s * math.exp(-q * t) * (1 - ncx2.cdf(a, 1 / one + 2, c)) - k * math.exp(-r * t) * ncx2.cdf(c, 1 / one, a)


@pytest.mark.parametrize("beta", [0.5, 0.8])
@pytest.mark.parametrize("t,k", [(0.5, 80.0), (0.5, 120.0), (2.0, 100.0)])
def test_a_cev_local_vol_meets_schroders_closed_form(beta, t, k):
    r, q, vol = 0.05, 0.01, 0.25

    def cev(x, tt):
        spot = 100.0 * math.exp((r - q) * tt) * np.exp(x)
        return vol * vol * (spot / 100.0) ** (2.0 * (beta - 1.0))

    got = local_vol_barrier_by_pde("call", 100.0, k, math.inf, [], t, r, q, cev)
    assert got == pytest.approx(schroder_cev_call(100.0, k, t, r, q, vol, beta), abs=5e-4)  # measured 2.3e-4


def test_a_cev_knock_out_lies_between_zero_and_the_vanilla_and_parity_holds():
    r, q = 0.03, 0.0

    def cev(x, tt):
        return 0.09 * (np.exp(x + (r - q) * tt)) ** (-1.0)  # beta = 0.5 about S0 = 100

    dates = np.arange(1, 13) / 12
    args = (100.0, 100.0, 90.0, dates, 1.0, r, q, cev)
    out = local_vol_barrier_by_pde("down-and-out-call", *args)
    kin = local_vol_barrier_by_pde("down-and-in-call", *args)
    vanilla = local_vol_barrier_by_pde("call", 100.0, 100.0, math.inf, dates, 1.0, r, q, cev)  # same grid
    assert 0.0 < out < vanilla
    assert out + kin == pytest.approx(vanilla, abs=1e-10)


def test_an_unreachable_barrier_gives_the_black_scholes_vanilla():
    got = local_vol_barrier_by_pde("up-and-out-put", 100.0, 105.0, math.inf, [0.25, 0.5], 0.5, 0.02, 0.0, flat(0.2))
    assert got == pytest.approx(black_scholes(100.0, 105.0, 0.5, 0.02, 0.0, 0.2, "put"), abs=2e-4)


@pytest.mark.parametrize("kwargs,names", [
    (dict(kind="sideways-call"), "kind"),
    (dict(spot=-1.0), "spot"),
    (dict(monitoring_times=[0.5, 0.25]), "monitoring_times"),
    (dict(monitoring_times=[0.5, 2.0]), "monitoring_times"),
    (dict(local_variance=0.04), "local_variance"),
    (dict(local_variance=lambda k, t: np.full_like(k, -0.01)), "local_variance"),
    (dict(local_variance=lambda k, t: np.full(3, 0.04)), "local_variance"),
    (dict(steps_per_interval=1), "steps_per_interval"),
])
def test_bad_input_names_what_is_wrong(kwargs, names):
    args = dict(kind="down-and-out-call", spot=100.0, strike=100.0, barrier=90.0, monitoring_times=[0.5, 1.0],
                maturity=1.0, rate=0.0, dividend=0.0, local_variance=flat(0.2))
    args.update(kwargs)
    with pytest.raises(ParamError, match=names):
        local_vol_barrier_by_pde(**args)
