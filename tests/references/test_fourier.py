"""The Fourier reference (Lewis 2001) against closed forms, independent pricers and
published tables; its no-arbitrage guard and its refusals.

The characteristic functions here are written out in the tests (Black-Scholes, variance
gamma, CGMY) or taken from the reference modules (Heston, Merton), never from the models:
the models' own characteristic functions are tested in tests/models/test_characteristic.py.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate, special

from limitcase.errors import NoReference, ParamError
from limitcase.references import (
    FOURIER_KINDS,
    asset_or_nothing,
    black_scholes,
    cash_or_nothing,
    fourier_price,
    heston_charfn,
    heston_price,
    merton_charfn,
    merton_jump_price,
)

STRIKES = np.array([1.0, 20.0, 50.0, 80.0, 95.0, 100.0, 105.0, 120.0, 200.0, 400.0, 1000.0])


def bs_cf(spot: float, rate: float, dividend: float, vol: float):
    """E[exp(iu ln S_T)] of Black-Scholes: ln S_T normal (Black and Scholes 1973)."""
    def cf(u, t):
        mean = math.log(spot) + (rate - dividend - 0.5 * vol * vol) * t
        return np.exp(1j * u * mean - 0.5 * vol * vol * t * u * u)
    return cf


def bs_reference(kind, spot, strike, t, rate, dividend, vol):
    if kind in ("call", "put"):
        return black_scholes(spot, strike, t, rate, dividend, vol, kind)
    if kind.startswith("cash"):
        return cash_or_nothing(spot, strike, t, rate, dividend, vol, 1.0, kind[5:])
    if kind.startswith("asset"):
        return asset_or_nothing(spot, strike, t, rate, dividend, vol, kind[6:])
    return spot * math.exp(-dividend * t) - strike * math.exp(-rate * t)


def heston_cf(spot, rate, dividend, **p):
    return lambda u, t: heston_charfn(u, t, rate, dividend, **p) * np.exp(1j * np.asarray(u) * math.log(spot))


def merton_cf(spot, rate, dividend, **p):
    return lambda u, t: merton_charfn(u, t, rate, dividend, **p) * np.exp(1j * np.asarray(u) * math.log(spot))


# --------------------------------------------------------------------------------------
# against the Black-Scholes closed forms
# --------------------------------------------------------------------------------------
@pytest.mark.parametrize("kind", FOURIER_KINDS)
@pytest.mark.parametrize("t, vol, rate, dividend", [
    (0.01, 0.2, 0.05, 0.02), (1.0, 0.2, 0.05, 0.02), (10.0, 0.2, 0.05, 0.02),
    (0.5, 0.05, -0.01, 0.03), (2.0, 1.0, 0.1, 0.0),
])
def test_black_scholes_every_kind(kind, t, vol, rate, dividend):
    """Stated accuracy: about exp(-rT) sqrt(F K) 1e-12 for calls, puts and asset digitals,
    exp(-rT) sqrt(F/K) 1e-12 for cash digitals. Measured worst over this grid: 1.3e-12."""
    spot = 100.0
    got = fourier_price(bs_cf(spot, rate, dividend, vol), STRIKES, t, rate, kind)
    want = bs_reference(kind, spot, STRIKES, t, rate, dividend, vol)
    fwd = spot * math.exp((rate - dividend) * t)
    scale = math.exp(-rate * t) * (np.sqrt(fwd * STRIKES) if not kind.startswith("cash") else np.sqrt(fwd / STRIKES))
    assert np.all(np.abs(got - want) <= 1e-10 * np.maximum(scale, 1.0))


def test_scalar_strike_gives_float_and_zero_strike_limits():
    cf = bs_cf(100.0, 0.05, 0.02, 0.2)
    assert isinstance(fourier_price(cf, 100.0, 1.0, 0.05), float)
    df, pf = math.exp(-0.05), 100.0 * math.exp(-0.02)
    got = {k: fourier_price(cf, 0.0, 1.0, 0.05, k) for k in FOURIER_KINDS}
    assert got["call"] == pytest.approx(pf, abs=1e-12) and got["asset_call"] == pytest.approx(pf, abs=1e-12)
    assert got["cash_call"] == pytest.approx(df, abs=1e-15)
    assert got["put"] == got["cash_put"] == got["asset_put"] == 0.0
    assert got["forward"] == pytest.approx(pf, abs=1e-12)


def test_put_call_parity_and_digital_decomposition():
    """call - put = forward and asset call - K cash call = call (exact identities of the
    payoffs), on a Heston law, from independent integrals of one run each."""
    cf = heston_cf(100.0, 0.03, 0.01, v0=0.04, kappa=1.5, theta=0.05, vol_of_vol=0.8, rho=-0.7)
    k = STRIKES[2:-1]
    p = {kind: fourier_price(cf, k, 2.0, 0.03, kind) for kind in FOURIER_KINDS}
    assert np.max(np.abs(p["call"] - p["put"] - p["forward"])) < 1e-10
    assert np.max(np.abs(p["asset_call"] - k * p["cash_call"] - p["call"])) < 1e-10
    assert np.max(np.abs(k * p["cash_put"] - p["asset_put"] - p["put"])) < 1e-10
    assert np.max(np.abs(p["cash_call"] + p["cash_put"] - math.exp(-0.06))) < 1e-14


# --------------------------------------------------------------------------------------
# against the package's Heston and Merton pricers (other methods, other code)
# --------------------------------------------------------------------------------------
HESTON_CASES = [
    dict(v0=0.04, kappa=1.5, theta=0.04, vol_of_vol=0.5, rho=-0.7),
    dict(v0=0.01, kappa=0.3, theta=0.02, vol_of_vol=0.05, rho=-0.9),
    dict(v0=0.09, kappa=3.0, theta=0.2, vol_of_vol=1.0, rho=0.0),
    dict(v0=0.01, kappa=3.0, theta=0.2, vol_of_vol=2.5, rho=0.9),
    dict(v0=0.04, kappa=2.0, theta=0.04, vol_of_vol=0.0, rho=-0.5),
]


@pytest.mark.parametrize("p", HESTON_CASES)
@pytest.mark.parametrize("t", [0.05, 1.0, 5.0])
def test_heston_calls_puts_match_heston_price(p, t):
    """Measured worst over a 576-point parameter grid: 1.5e-12."""
    cf = heston_cf(100.0, 0.03, 0.01, **p)
    for kind in ("call", "put"):
        got = fourier_price(cf, STRIKES[2:-1], t, 0.03, kind)
        want = heston_price(100.0, STRIKES[2:-1], t, 0.03, 0.01, kind=kind, **p)
        assert np.max(np.abs(got - want)) < 1e-10


def gil_pelaez(cf, strike: float, t: float) -> tuple[float, float]:
    """P(S_T > K) and P*(S_T > K) (share measure) by the inversion formula of Gil-Pelaez
    (1951), "Note on the inversion theorem", Biometrika 38, integrated by scipy quad:
    P(X > x) = 1/2 + (1/pi) int_0^inf Im[e^{-iux} phi(u)] / u du."""
    x = math.log(strike)
    fwd = cf(np.array([-1j]), t)[0].real

    def tail(shift):
        def f(u):
            c = cf(np.array([u - shift]), t)[0] / (fwd if shift else 1.0)
            return (np.exp(-1j * u * x) * c).imag / u
        val, _ = integrate.quad(f, 1e-12, np.inf, epsabs=1e-12, epsrel=1e-12, limit=2000)
        return 0.5 + val / math.pi

    return tail(0.0), tail(1j)


@pytest.mark.parametrize("p", HESTON_CASES[:3])
def test_heston_digitals_match_gil_pelaez(p):
    """Digitals under Heston against another inversion (Gil-Pelaez on the real line, both
    measures, scipy quad): agreement to 1e-8, the quadrature's own accuracy."""
    cf = heston_cf(100.0, 0.03, 0.01, **p)
    t, df = 1.0, math.exp(-0.03)
    fwd = 100.0 * math.exp(0.02)
    for k in (70.0, 100.0, 130.0):
        prob, prob_share = gil_pelaez(cf, k, t)
        assert fourier_price(cf, k, t, 0.03, "cash_call") == pytest.approx(df * prob, abs=1e-8)
        assert fourier_price(cf, k, t, 0.03, "cash_put") == pytest.approx(df * (1 - prob), abs=1e-8)
        assert fourier_price(cf, k, t, 0.03, "asset_call") == pytest.approx(df * fwd * prob_share, abs=1e-6)
        assert fourier_price(cf, k, t, 0.03, "asset_put") == pytest.approx(df * fwd * (1 - prob_share), abs=1e-6)


MERTON_CASES = [
    dict(vol=0.2, intensity=1.0, jump_mean=-0.1, jump_vol=0.15),
    dict(vol=0.05, intensity=5.0, jump_mean=-0.3, jump_vol=0.0),
    dict(vol=0.3, intensity=0.5, jump_mean=0.1, jump_vol=0.2),
    dict(vol=0.3, intensity=0.0, jump_mean=0.1, jump_vol=0.2),
]


@pytest.mark.parametrize("p", MERTON_CASES)
@pytest.mark.parametrize("t", [0.05, 1.0, 5.0])
def test_merton_calls_puts_match_poisson_series(p, t):
    """Against Merton's Poisson series of Black-Scholes prices; measured worst 2.5e-11
    (the multimodal law with vol 0.05 and jumps of -0.3), within exp(-rT) sqrt(FK) 1e-12."""
    cf = merton_cf(100.0, 0.05, 0.02, **p)
    for kind in ("call", "put"):
        got = fourier_price(cf, STRIKES[2:-1], t, 0.05, kind)
        want = merton_jump_price(100.0, STRIKES[2:-1], t, 0.05, 0.02, kind=kind, **p)
        assert np.max(np.abs(got - want)) < 1e-10


@pytest.mark.parametrize("p", MERTON_CASES[:3])
def test_merton_digitals_match_poisson_mixture(p):
    """Merton's law is a Poisson mixture of log-normals (Merton 1976): each digital is the
    mixture of Black-Scholes digitals (Rubinstein and Reiner 1991) with n jumps, weights
    Poisson(lambda T), summed to 1e-15 of the weight."""
    spot, r, q, t = 100.0, 0.05, 0.02, 1.0
    lam, mu, dj, vol = p["intensity"], p["jump_mean"], p["jump_vol"], p["vol"]
    kbar = math.expm1(mu + 0.5 * dj * dj)
    cf = merton_cf(spot, r, q, **p)
    k = np.array([60.0, 90.0, 100.0, 110.0, 150.0])
    for kind in ("cash_call", "cash_put", "asset_call", "asset_put"):
        want = np.zeros_like(k)
        n = 0
        while special.pdtrc(n - 1, lam * t) > 1e-15 if n else True:
            w = math.exp(-lam * t) * (lam * t) ** n / math.factorial(n)
            q_n = q + lam * kbar - n * math.log1p(kbar) / t
            vol_n = math.sqrt(vol * vol + n * dj * dj / t)
            want += w * bs_reference(kind, spot, k, t, r, q_n, vol_n)
            n += 1
        got = fourier_price(cf, k, t, r, kind)
        assert np.max(np.abs(got - want)) < 1e-10, kind


# --------------------------------------------------------------------------------------
# published values
# --------------------------------------------------------------------------------------
@pytest.mark.published
def test_fang_oosterlee_gbm_table():
    """F. Fang and C. W. Oosterlee, "A novel pricing method for European options based on
    Fourier-cosine series expansions", SIAM J. Sci. Comput. 31(2), 2008, the GBM calls:
    S0 = 100, r = 0.1, q = 0, T = 0.1, sigma = 0.25, K = 80, 100, 120 (from memory,
    recomputed by Black-Scholes)."""
    got = fourier_price(bs_cf(100.0, 0.1, 0.0, 0.25), [80.0, 100.0, 120.0], 0.1, 0.1)
    assert np.max(np.abs(got - [20.799226309, 3.659968453, 0.044577814])) < 1e-9


@pytest.mark.published
def test_fang_oosterlee_cash_or_nothing():
    """Fang and Oosterlee (2008), Table 3: cash-or-nothing paying K = 120 under GBM,
    S0 = 100, r = 0.05, q = 0, T = 0.1, sigma = 0.2: 0.273306496497."""
    got = 120.0 * fourier_price(bs_cf(100.0, 0.05, 0.0, 0.2), 120.0, 0.1, 0.05, "cash_call")
    assert got == pytest.approx(0.273306496497, abs=1e-12)


@pytest.mark.published
def test_fang_oosterlee_heston():
    """Fang and Oosterlee (2008), the Heston call: S0 = K = 100, r = q = 0, T = 1,
    kappa = 1.5768, theta = 0.0398, sigma = 0.5751, rho = -0.5711, v0 = 0.0175:
    5.785155450 (from memory; a 30-digit quadrature gives 5.78515543438, 1.6e-8 below)."""
    cf = heston_cf(100.0, 0.0, 0.0, v0=0.0175, kappa=1.5768, theta=0.0398, vol_of_vol=0.5751, rho=-0.5711)
    got = fourier_price(cf, 100.0, 1.0, 0.0)
    assert got == pytest.approx(5.78515543438, abs=1e-10)
    assert got == pytest.approx(5.785155450, abs=1e-7)


@pytest.mark.published
def test_lewis_heston_reference_prices():
    """A. L. Lewis, high-precision Heston reference prices (Wilmott forum, 2012), printed
    to 12 decimals: r = 0.01, q = 0.02, S = 100, T = 1, v0 = 0.04, kappa = 4, theta = 0.25,
    sigma = 1, rho = -0.5."""
    cf = heston_cf(100.0, 0.01, 0.02, v0=0.04, kappa=4.0, theta=0.25, vol_of_vol=1.0, rho=-0.5)
    k = [80.0, 90.0, 100.0, 110.0, 120.0]
    calls = [26.774758743999, 20.933349000597, 16.070154917029, 12.132211516710, 9.024913483458]
    puts = [7.958878113257, 12.017966707346, 17.055270961270, 23.017825898443, 29.811026202683]
    assert np.max(np.abs(fourier_price(cf, k, 1.0, 0.01) - calls)) < 1e-11
    assert np.max(np.abs(fourier_price(cf, k, 1.0, 0.01, "put") - puts)) < 1e-11


def vg_cf(spot, rate, dividend, sigma, theta, nu):
    """Variance gamma (Madan, Carr and Chang 1998), with the martingale correction omega."""
    omega = math.log(1.0 - theta * nu - 0.5 * sigma * sigma * nu) / nu
    return lambda u, t: (np.exp(1j * u * (math.log(spot) + (rate - dividend + omega) * t))
                         * (1.0 - 1j * u * theta * nu + 0.5 * sigma * sigma * nu * u * u) ** (-t / nu))


def cgmy_cf(spot, rate, dividend, c, g, m, y):
    """CGMY (Carr, Geman, Madan and Yor 2002), with the martingale correction."""
    def psi(u):
        return c * special.gamma(-y) * ((m - 1j * u) ** y - m ** y + (g + 1j * u) ** y - g ** y)
    omega = -psi(np.array(-1j)).real
    return lambda u, t: np.exp(1j * u * (math.log(spot) + (rate - dividend + omega) * t) + t * psi(u))


@pytest.mark.published
@pytest.mark.parametrize("t, want", [(0.1, 10.993703187), (1.0, 19.099354724)])
def test_fang_oosterlee_variance_gamma(t, want):
    """Fang and Oosterlee (2008), the variance-gamma call: S0 = 100, K = 90, r = 0.1, q = 0,
    sigma = 0.12, theta = -0.14, nu = 0.2 (from memory). At T = 0.1 the characteristic
    function decays only like 1/u: the slow-decay path of the truncation is exercised."""
    got = fourier_price(vg_cf(100.0, 0.1, 0.0, 0.12, -0.14, 0.2), 90.0, t, 0.1)
    assert got == pytest.approx(want, abs=1e-9)


@pytest.mark.published
@pytest.mark.parametrize("y, want", [(0.5, 19.812948843), (1.5, 49.790905469), (1.98, 99.999905510)])
def test_fang_oosterlee_cgmy(y, want):
    """Fang and Oosterlee (2008), the CGMY call: S0 = K = 100, r = 0.1, q = 0, T = 1,
    C = 1, G = M = 5 (from memory)."""
    got = fourier_price(cgmy_cf(100.0, 0.1, 0.0, 1.0, 5.0, 5.0, y), 100.0, 1.0, 0.1)
    assert got == pytest.approx(want, abs=1e-9)


# --------------------------------------------------------------------------------------
# the no-arbitrage guard and the refusals
# --------------------------------------------------------------------------------------
def test_not_a_characteristic_function_is_refused_not_priced():
    """1.5 phi(sigma=0.1) - 0.5 phi(sigma=0.8) has phi(0) = 1 and the right forward but a
    negative density: the far out-of-the-money call would be negative. Raised, not returned."""
    a, b = bs_cf(100.0, 0.05, 0.0, 0.1), bs_cf(100.0, 0.05, 0.0, 0.8)
    cf = lambda u, t: 1.5 * a(u, t) - 0.5 * b(u, t)  # noqa: E731
    with pytest.raises(ParamError, match="outside its no-arbitrage bounds"):
        fourier_price(cf, [100.0, 250.0], 1.0, 0.05, "call")


def test_prices_are_inside_their_bounds():
    """Far strikes where the true price is below the integrals' accuracy: still in bounds."""
    cf = bs_cf(100.0, 0.05, 0.02, 0.1)
    k = np.array([1e-3, 1.0, 10.0, 500.0, 1e4])
    t = 0.25
    f = cf(np.array([-1j]), t)[0].real  # the forward the pricer reads from phi(-i)
    df = math.exp(-0.05 * t)
    call, put = fourier_price(cf, k, t, 0.05), fourier_price(cf, k, t, 0.05, "put")
    assert np.all(call >= df * np.maximum(f - k, 0.0)) and np.all(call <= df * f)
    assert np.all(put >= df * np.maximum(k - f, 0.0)) and np.all(put <= df * k)
    assert np.all(put[-2:] > 0.0) and np.all(call[:2] > 0.0)
    for kind in ("cash_call", "cash_put"):
        p = fourier_price(cf, k, t, 0.05, kind)
        assert np.all((p >= 0.0) & (p <= df))


def test_wrong_forward_is_refused():
    cf = bs_cf(100.0, 0.05, 0.0, 0.2)  # drift without the dividend
    with pytest.raises(ParamError, match="forward"):
        fourier_price(cf, 100.0, 1.0, 0.05, forward=100.0 * math.exp(0.05 - 0.02))


def test_bad_inputs_name_what_is_wrong():
    cf = bs_cf(100.0, 0.05, 0.0, 0.2)
    with pytest.raises(ParamError, match="kind='digital'"):
        fourier_price(cf, 100.0, 1.0, 0.05, "digital")
    with pytest.raises(ParamError, match="strike=-1.0"):
        fourier_price(cf, [100.0, -1.0], 1.0, 0.05)
    with pytest.raises(ParamError, match="maturity=0.0"):
        fourier_price(cf, 100.0, 0.0, 0.05)
    with pytest.raises(ParamError, match=r"phi\(0\)"):
        fourier_price(lambda u, t: 2.0 * cf(u, t), 100.0, 1.0, 0.05)
    with pytest.raises(ParamError, match="shape"):
        fourier_price(lambda u, t: cf(u, t)[:1], 100.0, 1.0, 0.05)
    with pytest.raises(ParamError, match="raised ZeroDivisionError"):
        fourier_price(lambda u, t: 1 / 0, 100.0, 1.0, 0.05)
    with pytest.raises(ParamError, match="not callable"):
        fourier_price(3.0, 100.0, 1.0, 0.05)


def test_law_with_atoms_has_no_fourier_reference():
    """Merton without diffusion and with fixed jump sizes: S_T sits on a lattice, the
    characteristic function does not decay; no price rather than a wrong one."""
    cf = merton_cf(100.0, 0.05, 0.0, vol=0.0, intensity=1.0, jump_mean=-0.1, jump_vol=0.0)
    for kind in ("call", "cash_call"):
        with pytest.raises(NoReference, match="decays too slowly"):
            fourier_price(cf, 100.0, 1.0, 0.05, kind)
