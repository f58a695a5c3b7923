"""Heston (1993) prices against published values and an independent formulation.

The independent formulation in this file is Heston's original pair of probabilities
P_1, P_2 (Gil-Pelaez inversion), with the branch-cut-free g of Albrecher et al. (2007),
integrated with scipy quad (double precision) or mpmath quad (30 digits); the library
uses Lewis' single integral on a fixed Gauss-Legendre grid instead.
"""

from __future__ import annotations

import cmath
import math
import time

import mpmath as mp
import numpy as np
import pytest
from scipy import integrate

from limitcase.errors import ParamError
from limitcase.references.heston import heston_charfn, heston_price


def _n(x: float) -> float:
    return 0.5 * math.erfc(-x / math.sqrt(2.0))


def _bs(s, k, t, r, q, v, call=True):
    sd = v * math.sqrt(t)
    d1 = (math.log(s / k) + (r - q) * t) / sd + 0.5 * sd
    d2 = d1 - sd
    c = s * math.exp(-q * t) * _n(d1) - k * math.exp(-r * t) * _n(d2)
    return c if call else c - s * math.exp(-q * t) + k * math.exp(-r * t)


def _heston_pj_scipy(s, k, t, r, q, v0, kap, th, sig, rho):
    """Call by Heston's P1/P2 (Heston 1993, eqs. 17-18), little-trap g, scipy quad."""
    x = math.log(s)

    def f(u, j):
        uj, bj = (0.5, kap - rho * sig) if j == 1 else (-0.5, kap)
        b = bj - rho * sig * 1j * u
        d = cmath.sqrt(b * b - sig * sig * (2 * uj * 1j * u - u * u))
        g = (b - d) / (b + d)
        e = cmath.exp(-d * t)
        c = (r - q) * 1j * u * t + kap * th / sig**2 * ((b - d) * t - 2 * cmath.log((1 - g * e) / (1 - g)))
        dd = (b - d) / sig**2 * (1 - e) / (1 - g * e)
        return (cmath.exp(c + dd * v0 + 1j * u * (x - math.log(k))) / (1j * u)).real

    # |integrand| decays like exp(-c u), c = sqrt(1 - rho^2)(v0 + kappa theta T)/sigma
    # (large-u asymptote of the Heston exponent): integrate until exp(-c u) < 1e-19.
    c_decay = math.sqrt(max(1.0 - rho * rho, 1e-4)) * (v0 + kap * th * t) / sig
    upper = max(400.0, 44.0 / c_decay)

    def p(j):
        val, _ = integrate.quad(f, 1e-12, upper, args=(j,), limit=5000, epsabs=1e-13, epsrel=1e-13)
        return 0.5 + val / math.pi

    return s * math.exp(-q * t) * p(1) - k * math.exp(-r * t) * p(2)


def _heston_pj_mpmath(s, k, t, r, q, v0, kap, th, sig, rho, dps=30):
    """The same P1/P2 formula in mpmath at ``dps`` digits (tanh-sinh quadrature)."""
    with mp.workdps(dps):
        s, k, t, r, q, v0, kap, th, sig, rho = (mp.mpf(str(z)) for z in (s, k, t, r, q, v0, kap, th, sig, rho))

        def f(u, j):
            uj, bj = (mp.mpf(0.5), kap - rho * sig) if j == 1 else (mp.mpf(-0.5), kap)
            b = bj - rho * sig * 1j * u
            d = mp.sqrt(b * b - sig**2 * (2 * uj * 1j * u - u * u))
            g = (b - d) / (b + d)
            e = mp.exp(-d * t)
            c = (r - q) * 1j * u * t + kap * th / sig**2 * ((b - d) * t - 2 * mp.log((1 - g * e) / (1 - g)))
            dd = (b - d) / sig**2 * (1 - e) / (1 - g * e)
            return mp.re(mp.exp(c + dd * v0 + 1j * u * mp.log(s / k)) / (1j * u))

        p1 = mp.mpf(0.5) + mp.quad(lambda u: f(u, 1), [0, 1, 5, 20, 50, 100, 200, mp.inf]) / mp.pi
        p2 = mp.mpf(0.5) + mp.quad(lambda u: f(u, 2), [0, 1, 5, 20, 50, 100, 200, mp.inf]) / mp.pi
        return float(s * mp.exp(-q * t) * p1 - k * mp.exp(-r * t) * p2)


# Integration target of the library: 1e-13 on the integral, times sqrt(S K)/pi on the price.
def _num_tol(s, k):
    return 1e-13 * math.sqrt(s * k) / math.pi


# ---------------------------------------------------------------------------------------
# published values
# ---------------------------------------------------------------------------------------
LEWIS = dict(spot=100.0, maturity=1.0, rate=0.01, dividend=0.02, v0=0.04, kappa=4.0, theta=0.25,
             vol_of_vol=1.0, rho=-0.5)
LEWIS_CALLS = [(80, 26.774758743999), (90, 20.933349000597), (100, 16.070154917029),
               (110, 12.132211516710), (120, 9.024913483458)]
LEWIS_PUTS = [(80, 7.958878113257), (90, 12.017966707346), (100, 17.055270961270),
              (110, 23.017825898443), (120, 29.811026202683)]


@pytest.mark.published
@pytest.mark.parametrize("kind,table", [("call", LEWIS_CALLS), ("put", LEWIS_PUTS)])
def test_lewis_reference_prices(kind, table):
    # Source: A. Lewis, "Heston - Reference Prices", Wilmott forum, 2012 (seen in a
    # retrieved copy). Printed to 12 decimals: tolerance half a unit (5e-13) plus the
    # library's integration target.
    strikes = np.array([k for k, _ in table], dtype=float)
    got = heston_price(strike=strikes, kind=kind, **LEWIS)
    for g, (k, want) in zip(got, table):
        assert abs(g - want) <= 5e-13 + _num_tol(100.0, k)


FO = dict(spot=100.0, strike=100.0, maturity=1.0, rate=0.0, dividend=0.0, v0=0.0175, kappa=1.5768,
          theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)


@pytest.mark.published
def test_fang_oosterlee_cos_reference_value():
    # Source: F. Fang and C. W. Oosterlee, "A novel pricing method for European options
    # based on Fourier-cosine series expansions", SIAM J. Sci. Comput. 31(2), 2008, Heston
    # test (reference value 5.785155450, from memory). Recomputed here with 30-digit mpmath
    # quadrature of Heston's P1/P2: 5.78515543438, 1.6e-8 below the recalled number, so
    # only its first 7 decimals are trusted: tolerance 1e-7 on the recalled value; the
    # recomputation is checked to the library's integration target.
    got = heston_price(**FO)
    exact = _heston_pj_mpmath(100.0, 100.0, 1.0, 0.0, 0.0, 0.0175, 1.5768, 0.0398, 0.5751, -0.5711)
    assert abs(exact - 5.785155450) < 1e-7
    assert abs(got - 5.785155450) < 1e-7
    assert abs(got - exact) <= _num_tol(100.0, 100.0) + 1e-13


@pytest.mark.published
@pytest.mark.parametrize(
    "case,kappa,sigma,rho,t,want",
    [("I", 0.5, 1.0, -0.9, 10.0, 13.0847), ("II", 0.3, 0.9, -0.5, 15.0, 16.6492)],
)
def test_andersen_qe_test_cases(case, kappa, sigma, rho, t, want):
    # Source: L. Andersen, "Simple and efficient simulation of the Heston stochastic
    # volatility model", J. Computational Finance 11(3), 2008, test cases I and II
    # (parameters from memory; prices recomputed): S = K = 100, r = 0, v0 = theta = 0.04.
    # Printed to 4 decimals: tolerance 5e-5. Also checked against scipy quad of P1/P2.
    got = heston_price(100.0, 100.0, t, 0.0, 0.0, 0.04, kappa, 0.04, sigma, rho)
    assert abs(got - want) <= 5e-5
    indep = _heston_pj_scipy(100.0, 100.0, t, 0.0, 0.0, 0.04, kappa, 0.04, sigma, rho)
    assert abs(got - indep) < 1e-9


# ---------------------------------------------------------------------------------------
# independent formulation over a grid; fixed grid vs adaptive quad
# ---------------------------------------------------------------------------------------
GRID = [
    (k, t, v0, kap, th, sig, rho)
    for k in (70.0, 100.0, 140.0)
    for t in (0.1, 1.0, 5.0)
    for (v0, kap, th, sig, rho) in ((0.04, 1.5, 0.06, 0.4, -0.7), (0.09, 3.0, 0.04, 1.2, 0.3),
                                    (0.02, 0.2, 0.1, 0.8, -0.95))
]


@pytest.mark.parametrize("k,t,v0,kap,th,sig,rho", GRID)
def test_agrees_with_heston_p1_p2_formulation(k, t, v0, kap, th, sig, rho):
    got = heston_price(100.0, k, t, 0.03, 0.01, v0, kap, th, sig, rho)
    indep = _heston_pj_scipy(100.0, k, t, 0.03, 0.01, v0, kap, th, sig, rho)
    # scipy quad on the P_j integrands (1/u-type, oscillating) reaches about 1e-10 on spot 100.
    assert abs(got - indep) < 1e-9


@pytest.mark.parametrize("k,t,v0,kap,th,sig,rho", GRID[::3])
def test_fixed_grid_agrees_with_adaptive_quad(k, t, v0, kap, th, sig, rho):
    fixed = heston_price(100.0, k, t, 0.03, 0.01, v0, kap, th, sig, rho)
    quad = heston_price(100.0, k, t, 0.03, 0.01, v0, kap, th, sig, rho, method="quad")
    assert abs(fixed - quad) < 1e-11


def test_smile_is_vectorised_and_fast():
    strikes = np.linspace(70.0, 130.0, 20)
    best = math.inf
    for _ in range(3):
        start = time.perf_counter()
        smile = heston_price(100.0, strikes, 0.5, 0.02, 0.01, 0.04, 2.0, 0.05, 0.6, -0.7)
        best = min(best, time.perf_counter() - start)
    assert smile.shape == (20,)
    assert best < 0.05  # tens of milliseconds at most for a 20-strike smile
    one = heston_price(100.0, strikes[7], 0.5, 0.02, 0.01, 0.04, 2.0, 0.05, 0.6, -0.7)
    assert abs(one - smile[7]) < 1e-11


# ---------------------------------------------------------------------------------------
# reductions and relations
# ---------------------------------------------------------------------------------------
@pytest.mark.parametrize("k,t", [(80.0, 0.5), (100.0, 1.0), (125.0, 3.0)])
def test_vol_of_vol_to_zero_tends_to_black_scholes(k, t):
    # v0 = theta: deterministic variance theta, Black-Scholes with vol sqrt(theta).
    # The price moves linearly in vol_of_vol (first-order term proportional to rho), so
    # the gap must shrink by 100 when vol_of_vol does.
    bs = _bs(100.0, k, t, 0.03, 0.01, 0.2)
    gaps = [abs(heston_price(100.0, k, t, 0.03, 0.01, 0.04, 2.0, 0.04, s, -0.5) - bs) for s in (1e-2, 1e-4)]
    assert gaps[1] < gaps[0] / 50.0
    assert gaps[1] < 1e-3
    assert heston_price(100.0, k, t, 0.03, 0.01, 0.04, 2.0, 0.04, 0.0, -0.5) == pytest.approx(bs, abs=1e-12)


def test_vol_of_vol_zero_uses_time_averaged_variance():
    # dv = kappa(theta - v)dt: integrated variance theta T + (v0 - theta)(1 - e^{-kappa T})/kappa
    # (common practice: Black-Scholes with the average of a deterministic variance).
    v0, kap, th, t = 0.09, 1.3, 0.03, 2.0
    vbar = th + (v0 - th) * (1 - math.exp(-kap * t)) / (kap * t)
    want = _bs(100.0, 105.0, t, 0.02, 0.0, math.sqrt(vbar))
    assert heston_price(100.0, 105.0, t, 0.02, 0.0, v0, kap, th, 0.0, 0.4) == pytest.approx(want, abs=1e-12)
    # continuity: a tiny vol of vol is within O(sigma) of it
    near = heston_price(100.0, 105.0, t, 0.02, 0.0, v0, kap, th, 1e-7, 0.4)
    assert abs(near - want) < 1e-5
    # kappa = 0: the variance stays at v0
    assert heston_price(100.0, 105.0, t, 0.02, 0.0, v0, 0.0, th, 0.0, 0.4) == pytest.approx(
        _bs(100.0, 105.0, t, 0.02, 0.0, 0.3), abs=1e-12)


@pytest.mark.parametrize("k,t,v0,kap,th,sig,rho", GRID[::4])
def test_put_call_parity_and_independent_put(k, t, v0, kap, th, sig, rho):
    r, q = 0.03, 0.01
    c = heston_price(100.0, k, t, r, q, v0, kap, th, sig, rho, "call")
    p = heston_price(100.0, k, t, r, q, v0, kap, th, sig, rho, "put")
    assert abs(c - p - (100.0 * math.exp(-q * t) - k * math.exp(-r * t))) < 1e-11
    # the put from the independent P1/P2 call and parity
    indep_put = _heston_pj_scipy(100.0, k, t, r, q, v0, kap, th, sig, rho) - 100.0 * math.exp(-q * t) + k * math.exp(-r * t)
    assert abs(p - indep_put) < 1e-9
    # no-arbitrage bounds, up to the integration target (deep out-of-the-money calls are ~0)
    assert p > -_num_tol(100.0, k) and c > -_num_tol(100.0, k)


def test_charfn_normalisation_martingale_and_lognormal_limit():
    args = dict(maturity=2.0, rate=0.03, dividend=0.01, v0=0.05, kappa=1.2, theta=0.07, vol_of_vol=0.9, rho=-0.6)
    assert abs(heston_charfn(0.0, **args) - 1.0) < 1e-15
    # E[S_T/S_0] = e^{(r-q)T}: phi(-i)
    assert abs(heston_charfn(-1j, **args) - math.exp(0.02 * 2.0)) < 1e-13
    # conjugate symmetry for real u
    u = np.array([0.3, 2.0, 7.5])
    assert np.allclose(heston_charfn(-u, **args), np.conj(heston_charfn(u, **args)), atol=1e-15)
    # vol_of_vol = 0, v0 = theta: log-normal CF exp(iu(r - q - v/2)T - u^2 v T / 2)
    lognormal = dict(args, v0=0.04, theta=0.04, vol_of_vol=0.0)
    want = np.exp(1j * u * (0.02 - 0.02) * 2.0 - 0.5 * u**2 * 0.04 * 2.0)
    assert np.allclose(heston_charfn(u, **lognormal), want, atol=1e-15)


def test_charfn_is_continuous_where_heston_original_form_jumps():
    # Albrecher et al. (2007): Heston's original g = (b + d)/(b - d) with e^{+dT} makes the
    # complex log jump by 2 pi i for long maturities; the library's form must be smooth.
    # Check smoothness along u: the ratio of neighbouring values stays close to 1.
    args = dict(maturity=10.0, rate=0.0, dividend=0.0, v0=0.04, kappa=0.5, theta=0.04, vol_of_vol=1.0, rho=-0.9)
    u = np.linspace(0.0, 30.0, 30001)
    phi = heston_charfn(u, **args)
    step = np.abs(np.diff(phi))
    assert np.max(step) < 1e-2
    # and it equals the P1/P2 construction at a few points (j = 2 of Heston's CF is phi)
    for uu in (0.5, 3.0, 11.0):
        b = 0.5 - (-0.9) * 1.0 * 1j * uu
        d = cmath.sqrt(b * b + 1.0 * (1j * uu + uu * uu))
        g = (b - d) / (b + d)
        e = cmath.exp(-d * 10.0)
        c = 0.5 * 0.04 / 1.0 * ((b - d) * 10.0 - 2 * cmath.log((1 - g * e) / (1 - g)))
        dd = (b - d) * (1 - e) / (1 - g * e)
        assert abs(heston_charfn(uu, **args) - cmath.exp(c + dd * 0.04)) < 1e-13


def test_zero_maturity_and_broadcasting():
    assert heston_price(100.0, 90.0, 0.0, 0.01, 0.0, 0.04, 1.0, 0.04, 0.5, -0.5) == 10.0
    got = heston_price(100.0, [90.0, 110.0], [0.5, 1.0], 0.01, 0.0, 0.04, 1.0, 0.04, 0.5, -0.5, "put")
    assert got.shape == (2,)
    assert abs(got[1] - heston_price(100.0, 110.0, 1.0, 0.01, 0.0, 0.04, 1.0, 0.04, 0.5, -0.5, "put")) < 1e-12


@pytest.mark.parametrize(
    "name,value,match",
    [
        ("v0", -0.01, "v0=-0.01"),
        ("kappa", -1.0, "kappa=-1.0"),
        ("theta", -0.04, "theta=-0.04"),
        ("vol_of_vol", -0.3, "vol_of_vol=-0.3"),
        ("rho", 1.2, "rho=1.2"),
        ("rho", -1.5, "rho=-1.5"),
        ("spot", 0.0, "spot=0.0"),
        ("strike", -5.0, "strike=-5.0"),
        ("maturity", -1.0, "maturity=-1.0"),
        ("rate", float("nan"), "rate=nan"),
        ("kind", "straddle", "kind='straddle'"),
        ("method", "cos", "method='cos'"),
    ],
)
def test_bad_input_raises_param_error(name, value, match):
    args = dict(spot=100.0, strike=100.0, maturity=1.0, rate=0.01, dividend=0.0, v0=0.04, kappa=1.0,
                theta=0.04, vol_of_vol=0.5, rho=-0.5)
    args[name] = value
    with pytest.raises(ParamError, match=match):
        heston_price(**args)


def test_charfn_bad_input():
    with pytest.raises(ParamError, match="rho=2.0"):
        heston_charfn(1.0, 1.0, 0.0, 0.0, 0.04, 1.0, 0.04, 0.5, 2.0)
    with pytest.raises(ParamError, match="u="):
        heston_charfn("x", 1.0, 0.0, 0.0, 0.04, 1.0, 0.04, 0.5, 0.0)


def test_long_tailed_integrand_falls_back_to_adaptive_quadrature():
    """Tiny variance with a large vol-of-vol: the fixed grid cannot settle, the adaptive
    quadrature takes over; the result must satisfy put-call parity and the no-arbitrage
    bounds (common practice) rather than crash."""
    import numpy as np

    from limitcase.references import heston_price

    K = np.array([80.0, 100.0, 120.0])
    args = (100.0, K, 1.0, 0.01, 0.0, 2e-4, 0.2, 2e-4, 1.9, -0.3)
    c = heston_price(*args, kind="call")
    p = heston_price(*args, kind="put")
    assert np.all(np.isfinite(c))
    assert np.allclose(c - p, 100.0 - K * np.exp(-0.01), atol=1e-8)
    assert np.all(c >= np.maximum(100.0 - K * np.exp(-0.01), 0.0) - 1e-10) and np.all(c <= 100.0)


# ---------------------------------------------------------------------------------------
# stated accuracy or an error; never outside the no-arbitrage bounds
# ---------------------------------------------------------------------------------------
def _bounds(s, k, t, r, q, call):
    fs, fk = s * math.exp(-q * t), k * np.exp(-r * t)
    return (np.maximum(fs - fk, 0.0), fs) if call else (np.maximum(fk - fs, 0.0), fk)


def test_small_variance_large_vol_of_vol_short_maturity_is_priced_within_bounds():
    # Before: v0 = 1e-4, vol of vol 4, T = 0.01 gave a put of -0.96 at K = 90 and a call of
    # -0.042 at K = 110 (the fixed grid ran out, the adaptive fallback failed silently).
    from limitcase.references.heston import ACCURACY

    k = np.array([90.0, 99.0, 100.0, 101.0, 110.0])
    args = (100.0, k, 0.01, 0.02, 0.01, 1e-4, 1.0, 1e-4, 4.0, 0.0)
    c = heston_price(*args, kind="call")
    p = heston_price(*args, kind="put")
    for v, call in ((c, True), (p, False)):
        lo, hi = _bounds(100.0, k, 0.01, 0.02, 0.01, call)
        assert np.all(v >= lo) and np.all(v <= hi)
    # independent: Heston's P1/P2 by scipy quad (its own error near 1e-9 on spot 100)
    indep = _heston_pj_scipy(100.0, 100.0, 0.01, 0.02, 0.01, 1e-4, 1.0, 1e-4, 4.0, 0.0)
    assert abs(c[2] - indep) <= ACCURACY * 100.0 + 1e-9


def _pj_call_with_error(s, k, t, r, q, v0, kap, th, sig, rho):
    """Heston (1993) P1/P2 call with Albrecher et al. (2007) g by scipy quad on [0, inf),
    returning (price, error bound from quad's estimates) or None when quad reports failure."""
    x = math.log(s / k)

    def f(u, j):
        uj, bj = (0.5, kap - rho * sig) if j == 1 else (-0.5, kap)
        b = bj - rho * sig * 1j * u
        d = cmath.sqrt(b * b - sig * sig * (2 * uj * 1j * u - u * u))
        g = (b - d) / (b + d)
        e = cmath.exp(-d * t)
        c = (r - q) * 1j * u * t + kap * th / sig**2 * ((b - d) * t - 2 * cmath.log((1 - g * e) / (1 - g)))
        dd = (b - d) / sig**2 * (1 - e) / (1 - g * e)
        return (cmath.exp(c + dd * v0 + 1j * u * x) / (1j * u)).real

    # decay: exp(-c u) at large u (the Heston exponent's asymptote) and exp(-w u^2 / 2),
    # w >= min(v0, theta) T the integrated variance, before it: cut where both are < e^-44
    # (the larger of the two: which regime holds at a given u depends on vol_of_vol * u * T)
    c_decay = math.sqrt(max(1.0 - rho * rho, 1e-4)) * (v0 + kap * th * t) / sig
    upper = max(400.0, 44.0 / c_decay, math.sqrt(88.0 / (min(v0, th) * t)))
    vals, errs = [], []
    for j in (1, 2):
        res = integrate.quad(f, 1e-12, upper, args=(j,), limit=2000, epsabs=1e-12, epsrel=1e-12, full_output=1)
        if len(res) == 4:  # quad's own warning: no reliable error estimate
            return None
        vals.append(0.5 + res[0] / math.pi)
        errs.append(res[1] / math.pi)
    price = s * math.exp(-q * t) * vals[0] - k * math.exp(-r * t) * vals[1]
    return price, s * math.exp(-q * t) * errs[0] + k * math.exp(-r * t) * errs[1]


from hypothesis import HealthCheck, given, settings  # noqa: E402
from hypothesis import strategies as st  # noqa: E402


@settings(max_examples=40, deadline=None, derandomize=True, suppress_health_check=[HealthCheck.too_slow])
@given(
    v0=st.floats(1e-4, 1.0), kappa=st.floats(1e-2, 20.0), theta=st.floats(1e-4, 1.0),
    sig=st.floats(1e-2, 4.0), rho=st.floats(-0.99, 0.99), t=st.floats(0.01, 5.0),
    m=st.floats(-2.0, 2.0), call=st.booleans(),
)
def test_property_bounds_hold_or_it_raises_and_agrees_with_p1_p2(v0, kappa, theta, sig, rho, t, m, call):
    """Over the calibration's search box (v0, theta 1e-4..1, kappa 0.01..20, vol of vol
    0.01..4, |rho| <= 0.99) and maturities 0.01..5 years, strikes within two at-the-money
    standard deviations (at 20% vol) of the forward: a price is inside the no-arbitrage
    bounds (Merton 1973) or the reference raises ParamError; where it returns, it agrees
    with Heston's P1/P2 by scipy quad within ACCURACY * sqrt(S K) plus quad's own error
    estimate (skipped, via assume, where quad itself reports a failure or where vol of vol
    < 0.1 makes the double-precision P1/P2 lose more digits than that)."""
    from hypothesis import assume

    from limitcase.references.heston import ACCURACY

    s, r, q = 100.0, 0.02, 0.01
    k = s * math.exp((r - q) * t + m * 0.2 * math.sqrt(t))
    try:
        got = heston_price(s, k, t, r, q, v0, kappa, theta, sig, rho, "call" if call else "put")
    except ParamError as exc:
        assert "accuracy" in str(exc) or "bounds" in str(exc) or "decay" in str(exc)
        return
    lo, hi = _bounds(s, k, t, r, q, call)
    assert lo <= got <= hi
    # The P1/P2 exponent divides differences of O(sigma^2) by sigma^2: in double precision
    # it loses about eps (kappa theta T + v0) / sigma^2 (measured: 1.5e-8 on a price of 38 at
    # sigma = 0.01, where a 30-digit mpmath evaluation agrees with the library to 1e-13),
    # more than the stated accuracy; so it is the independent value only for sigma >= 0.1.
    assume(sig >= 0.1)
    indep = _pj_call_with_error(s, k, t, r, q, v0, kappa, theta, sig, rho)
    assume(indep is not None and indep[1] < 1e-6)
    want = indep[0] if call else indep[0] - s * math.exp(-q * t) + k * math.exp(-r * t)
    assert abs(got - want) <= ACCURACY * math.sqrt(s * k) + indep[1] + 1e-12
