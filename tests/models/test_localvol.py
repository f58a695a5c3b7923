"""Local volatility on an SVI surface: the surface's arbitrage tests, Dupire's formula
against an independent computation, and the simulation's limits."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import norm

from limitcase.errors import InputError, ParamError
from limitcase.models import BlackScholes, LocalVol
from limitcase.references import black_scholes
from limitcase.volsurface import SurfaceArbitrage, SviSlice, VarianceSurface, fit_svi

SPOT, RATE, DIV = 100.0, 0.03, 0.01

# A skewed equity-like surface (invented for these tests; no published value).
SKEW = (
    SviSlice(0.010, 0.06, -0.6, 0.02, 0.15),
    SviSlice(0.022, 0.09, -0.55, 0.03, 0.20),
    SviSlice(0.045, 0.12, -0.5, 0.04, 0.30),
)
SKEW_T = (0.25, 0.5, 1.0)


def skew_surface() -> VarianceSurface:
    return VarianceSurface(SKEW_T, SKEW, SPOT, RATE, DIV, (-0.6, 0.4))


# ---------------------------------------------------------------------------------------
# arbitrage tests of the surface


@pytest.mark.published
def test_vogt_slice_has_butterfly_arbitrage():
    """Gatheral and Jacquier (2014), "Arbitrage-free SVI volatility surfaces", Quantitative
    Finance 14(1), section 2, Example 3.1 (Axel Vogt's slice; parameters from memory):
    a = -0.0410, b = 0.1331, rho = 0.3060, m = 0.3586, s = 0.4153, T = 1. Its Durrleman
    function is negative around k between about 0.7 and 1.2 (their Figure 2)."""
    vogt = SviSlice(-0.0410, 0.1331, 0.3060, 0.3586, 0.4153)
    k = np.linspace(-1.5, 1.5, 3001)
    g = vogt.durrleman(k)
    assert g.min() < -0.02
    neg = k[g < 0]
    assert 0.6 < neg.min() < 0.8 and 1.0 < neg.max() < 1.4
    with pytest.raises(SurfaceArbitrage, match="expiry 1 has butterfly arbitrage"):
        VarianceSurface([1.0], [vogt], 100.0, 0.0, 0.0, (-1.5, 1.5))


def test_durrleman_matches_the_density_of_the_slice():
    """g(k) > 0 exactly where the call prices of the slice are convex in the strike: the
    density d2C/dK2 by finite differences of Black-Scholes prices (an independent route)."""
    sl = SKEW[2]
    t = 1.0
    f = SPOT * math.exp((RATE - DIV) * t)
    strikes = f * np.exp(np.linspace(-0.6, 0.4, 201))
    h = 1e-3 * f

    def call(kk):
        vol = np.sqrt(sl.w(np.log(kk / f)) / t)
        return black_scholes(SPOT, kk, t, RATE, DIV, vol, "call")

    dens = (call(strikes + h) - 2 * call(strikes) + call(strikes - h)) / h**2
    k = np.log(strikes / f)
    w = sl.w(k)
    d_minus = -k / np.sqrt(w) - np.sqrt(w) / 2
    # Gatheral and Jacquier (2014), Lemma 2.2: density = g(k) / sqrt(2 pi w) exp(-d_-^2/2), per unit K
    expected = sl.durrleman(k) * norm.pdf(d_minus) / np.sqrt(w) / strikes * math.exp(-RATE * t)
    np.testing.assert_allclose(dens, expected, rtol=2e-4, atol=1e-9)


def test_calendar_arbitrage_is_refused_naming_expiries_and_strikes():
    later = SviSlice(0.015, 0.06, -0.6, 0.02, 0.15)  # less variance at T = 0.5 than at 0.25 near the money
    first = SviSlice(0.020, 0.06, -0.6, 0.02, 0.15)
    with pytest.raises(SurfaceArbitrage, match=r"calendar arbitrage between expiries 0.25 and 0.5.*strikes"):
        VarianceSurface([0.25, 0.5], [first, later], SPOT, RATE, DIV, (-0.5, 0.5))


def test_slice_parameters_outside_svi_constraints_are_refused():
    with pytest.raises(InputError):
        SviSlice(0.01, -0.1, 0.0, 0.0, 0.1)
    with pytest.raises(InputError):
        SviSlice(-0.05, 0.01, 0.0, 0.0, 0.1)  # negative minimum variance


def test_svi_fit_recovers_a_slice_from_its_own_total_variances():
    true = SKEW[1]
    k = np.linspace(-0.5, 0.4, 15)
    got = fit_svi(k, true.w(k))
    np.testing.assert_allclose(got.w(np.linspace(-0.5, 0.4, 50)), true.w(np.linspace(-0.5, 0.4, 50)), atol=1e-7)


# ---------------------------------------------------------------------------------------
# Dupire's formula


def test_local_variance_matches_dupire_in_call_prices():
    """Gatheral's total-variance form against Dupire's (1994) original in prices,
    sigma^2 = 2 (dC/dT + (r - q) K dC/dK + q C) / (K^2 d2C/dK2), by central differences of
    Black-Scholes prices at the surface's implied volatilities."""
    s = skew_surface()

    def call(kk, t):
        return black_scholes(SPOT, kk, t, RATE, DIV, s.implied_vol(kk, t), "call")

    for t in (0.1, 0.4, 0.7, 1.3):
        strikes = SPOT * np.exp(np.linspace(-0.3, 0.25, 12)) * math.exp((RATE - DIV) * t)
        hk, ht = 1e-3 * SPOT, 1e-5
        c = call(strikes, t)
        c_t = (call(strikes, t + ht) - call(strikes, t - ht)) / (2 * ht)
        c_k = (call(strikes + hk, t) - call(strikes - hk, t)) / (2 * hk)
        c_kk = (call(strikes + hk, t) - 2 * c + call(strikes - hk, t)) / hk**2
        dupire = 2 * (c_t + (RATE - DIV) * strikes * c_k + DIV * c) / (strikes**2 * c_kk)
        k = np.log(strikes / (SPOT * math.exp((RATE - DIV) * t)))
        np.testing.assert_allclose(s.local_variance(k, t), dupire, rtol=2e-4)


def test_flat_surface_has_constant_local_volatility():
    s = VarianceSurface.flat(0.25, SPOT, RATE, DIV)
    k = np.linspace(-1, 1, 11)
    for t in (0.01, 0.5, 1.0, 3.0):
        np.testing.assert_allclose(s.local_variance(k, t), 0.0625, rtol=1e-14)
    assert s.is_flat and not skew_surface().is_flat


# ---------------------------------------------------------------------------------------
# the model


def test_flat_surface_with_one_substep_is_black_scholes_path_by_path():
    """On a flat surface the log-Euler step is the exact Black-Scholes transition: with one
    substep per date the two models map the same normals to the same prices."""
    times = np.array([0.1, 0.35, 0.6, 1.0])
    z = np.random.default_rng(7).standard_normal((5000, times.size, 1))
    lv = LocalVol(surface=VarianceSurface.flat(0.3, SPOT, RATE, DIV), spot=SPOT, rate=RATE, dividend=DIV, substeps=1)
    bs = BlackScholes(spot=SPOT, rate=RATE, dividend=DIV, vol=0.3)
    a = lv.simulate(times, z.copy(), np.random.default_rng(0)).s
    b = bs.simulate(times, z.copy(), np.random.default_rng(0)).s
    np.testing.assert_allclose(a, b, rtol=1e-12)


def test_discounted_price_is_a_martingale_on_a_skewed_surface():
    model = LocalVol(surface=skew_surface(), spot=SPOT, rate=RATE, dividend=DIV, substeps=4)
    times = np.array([0.25, 0.5, 1.0, 2.0])
    rng = np.random.default_rng(11)
    s = model.simulate(times, rng.standard_normal((200_000, times.size, 4)), rng).s[:, :, 0]
    disc = s * np.exp(-(RATE - DIV) * times)[None, :]
    z = (disc.mean(axis=0) - SPOT) / (disc.std(axis=0, ddof=1) / math.sqrt(s.shape[0]))
    assert np.all(np.abs(z) < 4.0), z  # 4 SE for 4 dates: a false alarm about 1 in 4,000


def test_calls_reprice_the_surface_within_their_standard_error_and_step_bias():
    """Monte Carlo calls under local volatility against Black-Scholes at the surface's
    implied volatility (what Dupire's construction guarantees in the continuous limit).
    The log-Euler bias at 32 steps a year is small next to the SE at 200k paths; the
    tolerance is 4 SE (a false alarm about 1 in 16,000 per strike) plus nothing else."""
    model = LocalVol(surface=skew_surface(), spot=SPOT, rate=RATE, dividend=DIV, substeps=32)
    t = 1.0
    rng = np.random.default_rng(5)
    s = model.simulate(np.array([t]), rng.standard_normal((200_000, 1, 32)), rng).s[:, 0, 0]
    for k in (80.0, 95.0, 100.0, 110.0, 125.0):
        pay = np.maximum(s - k, 0.0) * math.exp(-RATE * t)
        ref = black_scholes(SPOT, k, t, RATE, DIV, skew_surface().implied_vol(k, t), "call")
        se = pay.std(ddof=1) / math.sqrt(pay.size)
        assert abs(pay.mean() - ref) < 4 * se, (k, pay.mean(), ref, se)


def test_replace_keeps_the_surface_and_the_subclass():
    class MyLocalVol(LocalVol):
        pass

    m = MyLocalVol(surface=skew_surface(), spot=SPOT, rate=RATE, dividend=DIV)
    r = m.replace(substeps=2)
    assert type(r) is MyLocalVol and r.surface == m.surface and r.substeps == 2
    flat = m.replace(surface=m.surface.flattened())
    assert flat.surface.is_flat


def test_degeneration_gives_black_scholes_at_the_flattened_vol():
    m = LocalVol(surface=skew_surface(), spot=SPOT, rate=RATE, dividend=DIV)
    (deg,) = LocalVol.degenerations
    flat = m.replace(**{k: v(m) if callable(v) else v for k, v in deg.changes.items()})
    bs = deg.becomes(flat)
    assert isinstance(bs, BlackScholes)
    assert bs.vol == pytest.approx(math.sqrt(SKEW[0].w(np.array(0.0)) / SKEW_T[0]))


def test_a_surface_that_is_not_one_is_refused():
    with pytest.raises(ParamError, match="not a VarianceSurface"):
        LocalVol(surface=0.2)


# ---------------------------------------------------------------------------------------
# discrete dividends (Buehler's affine model)

from limitcase.models.localvol import DividendSchedule  # noqa: E402


def _sim(model, times, n=100_000, seed=3):
    rng = np.random.default_rng(seed)
    z = rng.standard_normal((n, len(times), model.normals_per_step()))
    return model.simulate(np.asarray(times), z, rng).s[:, :, 0]


def test_no_dividends_gives_back_the_model_without_them():
    plain = LocalVol(surface=skew_surface(), spot=SPOT, rate=RATE, dividend=DIV, substeps=2)
    empty = plain.replace(dividends=DividendSchedule())
    times = [0.3, 0.8, 1.2]
    np.testing.assert_array_equal(_sim(plain, times, 2000), _sim(empty, times, 2000))


def test_proportional_dividends_scale_every_path_after_the_ex_date():
    """A proportional dividend beta at t_i: the price after t_i is the no-dividend price times
    (1 - beta) on every path (D = 0, the forward carries the drop)."""
    plain = LocalVol(surface=skew_surface(), spot=SPOT, rate=RATE, dividend=DIV, substeps=2)
    divs = DividendSchedule(times=(0.4, 0.9), proportional=(0.02, 0.03))
    paid = plain.replace(dividends=divs)
    times = [0.3, 0.5, 1.0]
    a, b = _sim(plain, times, 3000), _sim(paid, times, 3000)
    np.testing.assert_allclose(b, a * np.array([1.0, 0.98, 0.98 * 0.97])[None, :], rtol=1e-12)


def test_cash_dividends_on_a_flat_surface_price_as_the_escrowed_dividend_model():
    """With X log-normal and every cash dividend paid before T, S(T) = F(T) X(T): the call
    is Black-Scholes on the spot less the present value of the dividends (the escrowed
    dividend model, e.g. Hull, "Options, Futures, and Other Derivatives", ch. on dividends),
    computed here by the independent closed form."""
    vol = 0.25
    divs = DividendSchedule(times=(0.25, 0.75), cash=(2.0, 3.0))
    model = LocalVol(surface=VarianceSurface.flat(vol, 1.0, RATE, DIV), dividends=divs, spot=SPOT, rate=RATE,
                     dividend=DIV, substeps=1)
    t = 1.0
    s = _sim(model, [t], 400_000, seed=9)[:, 0]
    pv = 2.0 * math.exp(-(RATE - DIV) * 0.25) + 3.0 * math.exp(-(RATE - DIV) * 0.75)
    assert float(divs.pending(np.array([0.0]), RATE - DIV)[0]) == pytest.approx(pv, rel=1e-14)
    for k in (85.0, 100.0, 115.0):
        pay = np.maximum(s - k, 0.0) * math.exp(-RATE * t)
        ref = black_scholes(SPOT - pv * math.exp(-DIV * 0.0), k, t, RATE, DIV, vol, "call")
        se = pay.std(ddof=1) / math.sqrt(pay.size)
        assert abs(pay.mean() - ref) < 4 * se, (k, pay.mean(), ref, se)


def test_cash_dividends_keep_the_forward_and_the_floor():
    divs = DividendSchedule(times=(0.2, 0.6, 1.1), cash=(1.5, 1.5, 1.5), proportional=(0.0, 0.01, 0.0))
    model = LocalVol(surface=skew_surface(), dividends=divs, spot=SPOT, rate=RATE, dividend=DIV, substeps=4)
    times = np.array([0.1, 0.2, 0.5, 0.6, 1.0, 1.5])
    s = _sim(model, times, 200_000, seed=21)
    fwd = model.forward(times)[:, 0]
    z = (s.mean(axis=0) - fwd) / (s.std(axis=0, ddof=1) / math.sqrt(s.shape[0]))
    assert np.all(np.abs(z) < 4.5), z  # 6 dates at 4.5 SE: a false alarm about 1 in 25,000
    pend = divs.pending(times, RATE - DIV)
    assert np.all(s > pend[None, :])  # never below the dividends still to come
    # the forward drops by the dividend at the ex-date (hand recursion)
    g = RATE - DIV
    f02 = SPOT * math.exp(g * 0.2) - 1.5
    f06 = (f02 * math.exp(g * 0.4)) * 0.99 - 1.5
    assert fwd[1] == pytest.approx(f02, rel=1e-14) and fwd[3] == pytest.approx(f06, rel=1e-14)


def test_bad_dividend_schedules_are_refused():
    with pytest.raises(ParamError, match="increasing"):
        DividendSchedule(times=(0.5, 0.3), cash=(1.0, 1.0))
    with pytest.raises(ParamError, match="one of each"):
        DividendSchedule(times=(0.5,), cash=(1.0, 2.0))
    with pytest.raises(ParamError, match=r"\[0, 1\)"):
        DividendSchedule(times=(0.5,), proportional=(1.0,))
    with pytest.raises(ParamError, match="worth at least the spot"):
        LocalVol(dividends=DividendSchedule(times=(0.5,), cash=(150.0,)))


# ---------------------------------------------------------------------------------------
# European prices read off the surface


@pytest.mark.parametrize("divs", [DividendSchedule(), DividendSchedule(times=(0.3, 0.7), cash=(2.0, 1.0),
                                                                      proportional=(0.0, 0.01))],
                         ids=["no_dividends", "dividends"])
def test_european_prices_from_the_surface_hold_their_identities(divs):
    """Put-call parity, digitals as strike derivatives of the calls (central differences),
    asset digital = call + K cash digital, and without dividends the call is Black-Scholes
    at the surface's implied volatility (scipy-free closed form from references)."""
    m = LocalVol(surface=skew_surface(), dividends=divs, spot=SPOT, rate=RATE, dividend=DIV)
    t = 0.8
    fwd = float(m.forward([t])[0, 0])
    disc = math.exp(-RATE * t)
    for k in (70.0, 90.0, 100.0, 112.0, 140.0):
        c, p = m.european_price("call", k, t), m.european_price("put", k, t)
        assert c - p == pytest.approx(disc * (fwd - k), abs=1e-10)
        h = 1e-4 * k
        dig = -(m.european_price("call", k + h, t) - m.european_price("call", k - h, t)) / (2 * h)
        assert m.european_price("cash_call", k, t) == pytest.approx(dig, rel=1e-6)
        assert m.european_price("cash_call", k, t) + m.european_price("cash_put", k, t) == pytest.approx(disc)
        assert m.european_price("asset_call", k, t) == pytest.approx(c + k * m.european_price("cash_call", k, t),
                                                                      rel=1e-12)
        assert m.european_price("asset_call", k, t) + m.european_price("asset_put", k, t) == pytest.approx(disc * fwd)
        if not divs:
            vol = float(skew_surface().implied_vol(k, t))
            assert c == pytest.approx(black_scholes(SPOT, k, t, RATE, DIV, vol, "call"), rel=1e-12)


def test_past_the_last_expiry_the_surface_keeps_a_local_volatility():
    """Past its last quote a surface grows by the at-the-money variance rate with the last
    slice's skew kept: no butterfly arbitrage appears however far out, and a long-dated
    simulation stays finite. (Scaling the last slice up instead, flat implied vol, gave a
    negative local variance between 8 and 12 years on this surface: Durrleman's condition
    fails once the squared skew term outgrows the rest.)"""
    from limitcase.models.localvol import example_surface

    surface = example_surface()
    k = np.linspace(*surface.k_range, 201)
    last = float(surface.expiries[-1])
    previous = surface.total_variance(k, last)
    for t in (1.5, 8.0, 12.0, 17.0, 50.0, 100.0):
        lv = surface.local_variance(k, t)
        assert np.all(np.isfinite(lv)) and np.all(lv > 0), t
        w = surface.total_variance(k, t)
        assert np.all(w >= previous)  # no calendar arbitrage
        previous = w
        # Dupire's numerator: dw/dt is the at-the-money rate of the last slice
        h = 1e-4
        assert (surface.total_variance(k, t + h) - w) / h == pytest.approx(
            float(surface.total_variance(np.zeros(1), last)[0]) / last, rel=1e-6)
    model = LocalVol(surface=surface, spot=100.0, rate=0.03, dividend=0.01, substeps=1)
    rng = np.random.default_rng(3)
    s = model.simulate(np.linspace(1.0, 17.0, 17), rng.standard_normal((20_000, 17, 1)), rng).s[:, :, 0]
    assert np.all(np.isfinite(s)) and np.all(s > 0)
    # the log-Euler step keeps the forward: within 7 standard errors (about 1.4% each here)
    assert float(np.mean(s[:, -1])) == pytest.approx(100.0 * math.exp(0.02 * 17), rel=0.1)
