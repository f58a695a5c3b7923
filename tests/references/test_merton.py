"""Merton (1976) jump-diffusion: Poisson series against an independent Fourier price.

The independent price inverts a characteristic function written in this file (not the
library's) with the Gil-Pelaez formula (Gil-Pelaez 1951, "Note on the inversion
theorem", Biometrika 38), integrated with scipy quad.
"""

from __future__ import annotations

import cmath
import math

import numpy as np
import pytest
from scipy import integrate

from limitcase.errors import ParamError
from limitcase.references.merton import merton_charfn, merton_jump_price


def _n(x: float) -> float:
    return 0.5 * math.erfc(-x / math.sqrt(2.0))


def _bs(s, k, t, r, q, v, call=True):
    sd = v * math.sqrt(t)
    d1 = (math.log(s / k) + (r - q) * t) / sd + 0.5 * sd
    d2 = d1 - sd
    c = s * math.exp(-q * t) * _n(d1) - k * math.exp(-r * t) * _n(d2)
    return c if call else c - s * math.exp(-q * t) + k * math.exp(-r * t)


def _cf_log_return(u, t, r, q, v, lam, mu, delta):
    """E[exp(iu ln(S_T/S_0))] under Merton (1976), written independently of the library."""
    kbar = math.exp(mu + 0.5 * delta * delta) - 1.0
    drift = (r - q - lam * kbar - 0.5 * v * v) * t
    return cmath.exp(1j * u * drift - 0.5 * v * v * u * u * t
                     + lam * t * (cmath.exp(1j * u * mu - 0.5 * delta * delta * u * u) - 1.0))


def _gil_pelaez_call(s, k, t, r, q, v, lam, mu, delta):
    """Call = S e^{-qT} P1 - K e^{-rT} P2 with P_j from Gil-Pelaez inversion (scipy quad)."""
    x = math.log(k / s)
    fwd_ratio = _cf_log_return(-1j, t, r, q, v, lam, mu, delta).real  # E[S_T/S_0]

    def p2_integrand(u):
        return (cmath.exp(-1j * u * x) * _cf_log_return(u, t, r, q, v, lam, mu, delta) / (1j * u)).real

    def p1_integrand(u):
        return (cmath.exp(-1j * u * x) * _cf_log_return(u - 1j, t, r, q, v, lam, mu, delta)
                / (1j * u * fwd_ratio)).real

    # Gaussian decay exp(-v^2 u^2 T / 2) of the diffusion part: stop where it is 1e-22.
    upper = math.sqrt(2.0 * 50.0 / (v * v * t))
    p1 = 0.5 + integrate.quad(p1_integrand, 1e-14, upper, limit=2000, epsabs=1e-14, epsrel=1e-13)[0] / math.pi
    p2 = 0.5 + integrate.quad(p2_integrand, 1e-14, upper, limit=2000, epsabs=1e-14, epsrel=1e-13)[0] / math.pi
    return s * math.exp(-q * t) * p1 - k * math.exp(-r * t) * p2


GRID = [
    (k, t, v, lam, mu, delta)
    for k in (70.0, 100.0, 135.0)
    for t in (0.25, 2.0)
    for v in (0.1, 0.3)
    for (lam, mu, delta) in ((0.5, -0.2, 0.15), (3.0, 0.05, 0.1), (10.0, -0.02, 0.05))
]


@pytest.mark.parametrize("k,t,v,lam,mu,delta", GRID)
def test_series_agrees_with_gil_pelaez_quadrature(k, t, v, lam, mu, delta):
    r, q = 0.04, 0.01
    series = merton_jump_price(100.0, k, t, r, q, v, lam, mu, delta)
    fourier = _gil_pelaez_call(100.0, k, t, r, q, v, lam, mu, delta)
    # quad reaches about 1e-11 on each P_j here; 1e-9 on spot 100 leaves room for the
    # 1/u-type integrand near 0, and is far above the series' 1e-12 tail bound.
    assert abs(series - fourier) < 1e-9


@pytest.mark.published
def test_haug_merton_jump_diffusion_example():
    # Source: Haug, The Complete Guide to Option Pricing Formulas, 2nd ed., 2007, Merton
    # (1976) jump-diffusion example (from memory): S = 45, K = 55, T = 0.25, r = b = 0.10,
    # total vol sigma = 0.25, lambda = 3, gamma = 0.40 (share of the variance from jumps),
    # call 0.2417. Haug's parametrisation: delta^2 = gamma sigma^2 / lambda, diffusion
    # vol z = sqrt(sigma^2 - lambda delta^2), mean-one jumps (mu_J = -delta^2 / 2).
    # Printed to 4 decimals: tolerance 5e-5; recomputed with the Gil-Pelaez price here.
    s, k, t, r, sig, lam, gam = 45.0, 55.0, 0.25, 0.10, 0.25, 3.0, 0.40
    delta = math.sqrt(gam * sig * sig / lam)
    z = math.sqrt(sig * sig - lam * delta * delta)
    got = merton_jump_price(s, k, t, r, 0.0, z, lam, -0.5 * delta * delta, delta)
    assert abs(got - 0.2417) <= 5e-5
    assert abs(got - _gil_pelaez_call(s, k, t, r, 0.0, z, lam, -0.5 * delta * delta, delta)) < 1e-10


@pytest.mark.parametrize("k,t", [(80.0, 0.5), (100.0, 1.0), (130.0, 3.0)])
def test_no_jumps_is_black_scholes(k, t):
    r, q, v = 0.04, 0.01, 0.25
    for kind, call in (("call", True), ("put", False)):
        bs = _bs(100.0, k, t, r, q, v, call)
        # intensity 0: exactly Black-Scholes
        assert merton_jump_price(100.0, k, t, r, q, v, 0.0, -0.3, 0.4, kind) == pytest.approx(bs, abs=1e-13)
        # zero-size jumps (mu_J = delta = 0): any intensity, up to the 1e-12 tail bound
        assert abs(merton_jump_price(100.0, k, t, r, q, v, 5.0, 0.0, 0.0, kind) - bs) < 2e-12
        # intensity -> 0: the gap is first-order in lambda, so dividing lambda by 100
        # divides it by 100 (to 1% here: the second-order term is lambda/2 relative)
        g1 = abs(merton_jump_price(100.0, k, t, r, q, v, 1e-3, -0.3, 0.4, kind) - bs)
        g2 = abs(merton_jump_price(100.0, k, t, r, q, v, 1e-5, -0.3, 0.4, kind) - bs)
        assert g1 / g2 == pytest.approx(100.0, rel=0.01)


def test_jump_sizes_to_zero_tend_to_black_scholes():
    r, q, v, lam = 0.04, 0.01, 0.25, 4.0
    bs = _bs(100.0, 100.0, 1.0, r, q, v)
    gaps = [merton_jump_price(100.0, 100.0, 1.0, r, q, v, lam, -eps, eps) - bs for eps in (1e-2, 1e-4)]
    # Small compensated jumps act to first order as extra variance lam (mu_J^2 + delta^2)
    # per year (the second moment of the log jump), i.e. vol sqrt(v^2 + lam * 2 eps^2):
    # the gap is second-order in eps and close to Black-Scholes at that vol.
    eps = 1e-4
    bumped = _bs(100.0, 100.0, 1.0, r, q, math.sqrt(v * v + lam * 2 * eps * eps))
    assert abs(gaps[1] / (bumped - bs) - 1.0) < 0.01
    assert gaps[0] / gaps[1] == pytest.approx(1e4, rel=0.05)


@pytest.mark.parametrize("k,t,v,lam,mu,delta", GRID[::5])
def test_put_call_parity(k, t, v, lam, mu, delta):
    r, q = 0.04, 0.01
    c = merton_jump_price(100.0, k, t, r, q, v, lam, mu, delta, "call")
    p = merton_jump_price(100.0, k, t, r, q, v, lam, mu, delta, "put")
    # each series is within its 1e-12 tail bound; add rounding of ~50 terms of size 100
    assert abs(c - p - (100.0 * math.exp(-q * t) - k * math.exp(-r * t))) < 1e-11


def test_tail_bound_is_honoured_for_many_jumps():
    args = (100.0, 100.0, 5.0, 0.03, 0.0, 0.15, 40.0, 0.01, 0.05)  # 200 expected jumps
    default = merton_jump_price(*args)
    tight = merton_jump_price(*args, tail_tol=1e-15)
    loose = merton_jump_price(*args, tail_tol=1e-3)
    assert abs(default - tight) <= 1e-12
    assert abs(loose - tight) <= 1e-3
    assert abs(default - _gil_pelaez_call(*args)) < 1e-9


def test_charfn_matches_independent_formula_and_is_a_martingale():
    t, r, q, v, lam, mu, delta = 1.5, 0.04, 0.01, 0.2, 2.0, -0.1, 0.2
    u = np.array([0.0, 0.7, 3.0, -2.5, 1.0 - 0.5j])
    got = merton_charfn(u, t, r, q, v, lam, mu, delta)
    want = np.array([_cf_log_return(x, t, r, q, v, lam, mu, delta) for x in u])
    assert np.allclose(got, want, rtol=0, atol=1e-15)
    assert abs(merton_charfn(-1j, t, r, q, v, lam, mu, delta) - math.exp((r - q) * t)) < 1e-14


def test_broadcasting_and_zero_maturity():
    got = merton_jump_price(100.0, np.array([90.0, 110.0]), 1.0, 0.04, 0.0, 0.2, 1.0, -0.1, 0.2, "put")
    assert got.shape == (2,)
    assert abs(got[0] - merton_jump_price(100.0, 90.0, 1.0, 0.04, 0.0, 0.2, 1.0, -0.1, 0.2, "put")) < 1e-14
    assert merton_jump_price(100.0, 90.0, 0.0, 0.04, 0.0, 0.2, 1.0, -0.1, 0.2) == pytest.approx(10.0)


@pytest.mark.parametrize(
    "name,value,match",
    [
        ("intensity", -1.0, "intensity=-1.0"),
        ("jump_vol", -0.1, "jump_vol=-0.1"),
        ("jump_mean", float("inf"), "jump_mean=inf"),
        ("vol", -0.2, "vol=-0.2"),
        ("spot", 0.0, "spot=0.0"),
        ("strike", -1.0, "strike=-1.0"),
        ("maturity", -2.0, "maturity=-2.0"),
        ("kind", "digital", "kind='digital'"),
        ("tail_tol", 0.0, "tail_tol=0.0"),
    ],
)
def test_bad_input_raises_param_error(name, value, match):
    args = dict(spot=100.0, strike=100.0, maturity=1.0, rate=0.04, dividend=0.0, vol=0.2,
                intensity=1.0, jump_mean=-0.1, jump_vol=0.2)
    args[name] = value
    with pytest.raises(ParamError, match=match):
        merton_jump_price(**args)


def test_too_many_jumps_is_refused():
    with pytest.raises(ParamError, match="expected jumps"):
        merton_jump_price(100.0, 100.0, 10.0, 0.0, 0.0, 0.2, 1e6, 0.0, 0.01)
