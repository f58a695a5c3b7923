"""Compound options and the complex chooser: Haug's worked examples, an independent scipy
quadrature over the spot at the first expiry (with the Black-Scholes value written out
here), and the limits (simple chooser, compound strike 0, first expiry 0)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, optimize
from scipy.stats import multivariate_normal, norm

from limitcase.errors import ParamError
from limitcase.references import black_scholes, simple_chooser
from limitcase.references.compound import bivariate_normal_cdf, complex_chooser, compound_option


def bs(call, s, k, tau, r, q, v):
    sd = v * math.sqrt(tau)
    d1 = (math.log(s / k) + (r - q + 0.5 * v * v) * tau) / sd
    d2 = d1 - sd
    n = lambda x: 0.5 * math.erfc(-x / math.sqrt(2.0))
    if call:
        return s * math.exp(-q * tau) * n(d1) - k * math.exp(-r * tau) * n(d2)
    return k * math.exp(-r * tau) * n(-d2) - s * math.exp(-q * tau) * n(-d1)


def at_first_expiry(value_at_t1, kink_of, s, t1, r, q, v):
    """e^{-r t1} E[value(S_t1)] by scipy quadrature over the standard normal, split where
    kink_of(z) (monotone in z) changes sign: there the compound is exercised or not."""
    nu, sd = r - q - 0.5 * v * v, v * math.sqrt(t1)
    spot = lambda z: s * math.exp(nu * t1 + sd * z)
    f = lambda z: value_at_t1(spot(z)) * _pdf(z)
    edges = [-12.0, 12.0]
    if kink_of(spot(-12.0)) * kink_of(spot(12.0)) < 0:
        edges.insert(1, optimize.brentq(lambda z: kink_of(spot(z)), -12.0, 12.0, xtol=1e-14))
    total = sum(integrate.quad(f, a, b, epsabs=1e-13, epsrel=1e-12, limit=300)[0] for a, b in zip(edges[:-1], edges[1:]))
    return math.exp(-r * t1) * total


def _pdf(z):
    return math.exp(-0.5 * z * z) / math.sqrt(2.0 * math.pi)


@pytest.mark.parametrize("kind", ["call-on-call", "put-on-call", "call-on-put", "put-on-put"])
@pytest.mark.parametrize("s,x1,x2,t1,t2,r,q,v", [
    (100.0, 105.0, 6.0, 0.3, 1.0, 0.05, 0.02, 0.3),
    (500.0, 520.0, 50.0, 0.25, 0.5, 0.08, 0.03, 0.35),
])
def test_compound_matches_quadrature(kind, s, x1, x2, t1, t2, r, q, v):
    outer, inner = kind.split("-on-")
    gap = lambda st: bs(inner == "call", st, x1, t2 - t1, r, q, v) - x2
    value = lambda st: max((1 if outer == "call" else -1) * gap(st), 0.0)
    want = at_first_expiry(value, gap, s, t1, r, q, v)
    assert compound_option(kind, s, x1, x2, t1, t2, r, q, v) == pytest.approx(want, abs=1e-8)


def test_compound_parity_and_limits():
    s, x1, x2, t1, t2, r, q, v = 100.0, 100.0, 7.0, 0.4, 1.0, 0.05, 0.01, 0.25
    for inner in ("call", "put"):
        c = compound_option(f"call-on-{inner}", s, x1, x2, t1, t2, r, q, v)
        p = compound_option(f"put-on-{inner}", s, x1, x2, t1, t2, r, q, v)
        # call - put on the same option = the option - X2 e^{-r t1} (parity at t1)
        assert c - p == pytest.approx(black_scholes(s, x1, t2, r, q, v, inner) - x2 * math.exp(-r * t1), abs=1e-10)
        # compound strike 0: the option itself
        assert compound_option(f"call-on-{inner}", s, x1, 0.0, t1, t2, r, q, v) == pytest.approx(
            black_scholes(s, x1, t2, r, q, v, inner), abs=1e-12)
        # first expiry -> 0: exercise now against today's price
        near = compound_option(f"call-on-{inner}", s, x1, x2, 1e-8, t2, r, q, v)
        assert near == pytest.approx(max(black_scholes(s, x1, t2, r, q, v, inner) - x2, 0.0), abs=1e-5)


@pytest.mark.parametrize("s,xc,xp,t,tc,tp,r,q,v", [
    (50.0, 55.0, 48.0, 0.25, 0.5, 0.5833, 0.10, 0.05, 0.35),
    (100.0, 95.0, 110.0, 0.4, 1.2, 0.9, 0.03, 0.0, 0.2),
])
def test_complex_chooser_matches_quadrature(s, xc, xp, t, tc, tp, r, q, v):
    value = lambda st: max(bs(True, st, xc, tc - t, r, q, v), bs(False, st, xp, tp - t, r, q, v))
    nu, sd = r - q - 0.5 * v * v, v * math.sqrt(t)
    f = lambda z: value(s * math.exp(nu * t + sd * z)) * _pdf(z)
    gap = lambda z: (bs(True, s * math.exp(nu * t + sd * z), xc, tc - t, r, q, v)
                     - bs(False, s * math.exp(nu * t + sd * z), xp, tp - t, r, q, v))
    zc = optimize.brentq(gap, -12.0, 12.0, xtol=1e-14)
    want = math.exp(-r * t) * sum(integrate.quad(f, a, b, epsabs=1e-13, epsrel=1e-12, limit=300)[0]
                                  for a, b in ((-12.0, zc), (zc, 12.0)))
    assert complex_chooser(s, xc, xp, t, tc, tp, r, q, v) == pytest.approx(want, abs=1e-8)


def test_complex_chooser_limits():
    # equal strikes and maturities: the simple chooser (Rubinstein 1991), Haug's example inputs
    assert complex_chooser(50.0, 50.0, 50.0, 0.25, 0.5, 0.5, 0.08, 0.0, 0.25) == pytest.approx(
        simple_chooser(50.0, 50.0, 0.25, 0.5, 0.08, 0.0, 0.25), abs=1e-11)
    # choose now: the larger of the two
    c = black_scholes(100.0, 95.0, 1.0, 0.03, 0.0, 0.2, "call")
    p = black_scholes(100.0, 110.0, 0.8, 0.03, 0.0, 0.2, "put")
    assert complex_chooser(100.0, 95.0, 110.0, 0.0, 1.0, 0.8, 0.03, 0.0, 0.2) == pytest.approx(max(c, p), abs=1e-12)


@pytest.mark.published
def test_haug_examples():
    # Haug (2007), options on options: put-on-call, S=500, X1=520, X2=50, t1=0.25, T2=0.5,
    # r=0.08, b=0.05, sigma=0.35: 21.1965 (from memory, recomputed: 21.19635).
    assert abs(compound_option("put-on-call", 500.0, 520.0, 50.0, 0.25, 0.5, 0.08, 0.03, 0.35) - 21.1965) < 2e-4
    # Haug (2007), complex chooser: S=50, Xc=55, Xp=48, t=0.25, Tc=0.5, Tp=0.5833, r=0.1,
    # b=0.05, sigma=0.35: 6.0508 (from memory, recomputed: 6.05072).
    assert abs(complex_chooser(50.0, 55.0, 48.0, 0.25, 0.5, 0.5833, 0.10, 0.05, 0.35) - 6.0508) < 2e-4


@pytest.mark.parametrize("a,b,rho", [(0.3, -0.2, 0.5), (-1.0, 2.0, -0.8), (1.5, 1.2, 0.95), (0.0, 0.0, -0.3)])
def test_bivariate_normal_against_scipy(a, b, rho):
    want, _ = integrate.dblquad(
        lambda y, x: math.exp(-(x * x - 2 * rho * x * y + y * y) / (2 * (1 - rho * rho)))
        / (2 * math.pi * math.sqrt(1 - rho * rho)),
        -12.0, a, -12.0, b, epsabs=1e-13, epsrel=1e-12)
    assert bivariate_normal_cdf(a, b, rho) == pytest.approx(want, abs=1e-11)
    mvn = multivariate_normal([0.0, 0.0], [[1.0, rho], [rho, 1.0]]).cdf([a, b])
    assert bivariate_normal_cdf(a, b, rho) == pytest.approx(mvn, abs=1e-6)


def test_bad_input():
    with pytest.raises(ParamError, match="first_expiry"):
        compound_option("call-on-call", 100.0, 100.0, 5.0, 1.0, 0.5, 0.05, 0.0, 0.2)
    with pytest.raises(ParamError, match="kind"):
        compound_option("call-on-straddle", 100.0, 100.0, 5.0, 0.5, 1.0, 0.05, 0.0, 0.2)
    with pytest.raises(ParamError, match="choose_time"):
        complex_chooser(100.0, 100.0, 100.0, 1.0, 0.5, 1.5, 0.05, 0.0, 0.2)
