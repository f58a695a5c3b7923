"""Black-Scholes with discrete dividends: its limits (no dividends, proportional dividends),
European prices against the lattice with discrete dividends and against an independent
quadrature, the forward, the floor at 0, bad input.

The quadrature for one cash dividend is written here (scipy only): the price just before
the ex-date is lognormal, after it a Black-Scholes price of the remaining life is known in
closed form, so the European price is one normal integral.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import integrate
from scipy.stats import norm

from limitcase.audits import audit_degenerations, audit_martingale
from limitcase.audits.constants import OPTION_MATURITY
from limitcase.engine import price
from limitcase.errors import ParamError
from limitcase.models import BlackScholes, DividendBlackScholes
from limitcase.models.dividends import AUDIT_HORIZON
from limitcase.references import lattice_price_dividends
from limitcase_payoffs.vanilla import EuropeanCall, EuropeanPut

Z = float(norm.isf(1e-3 / 2))  # two-sided 0.1% per comparison


def _bs(s, k, t, r, v, call):
    sd = v * math.sqrt(t)
    d1 = (math.log(s / k) + r * t) / sd + 0.5 * sd
    d2 = d1 - sd
    if call:
        return s * norm.cdf(d1) - k * math.exp(-r * t) * norm.cdf(d2)
    return k * math.exp(-r * t) * norm.cdf(-d2) - s * norm.cdf(-d1)


def _one_dividend_quadrature(s, k, t, r, v, tau, d, call):
    sd = v * math.sqrt(tau)
    fwd = s * math.exp(r * tau)

    def f(z):
        after = max(fwd * math.exp(sd * z - 0.5 * sd * sd) - d, 0.0)
        inner = _bs(after, k, t - tau, r, v, call) if after > 0 else (0.0 if call else k * math.exp(-r * (t - tau)))
        return inner * math.exp(-0.5 * z * z) / math.sqrt(2 * math.pi)

    val, _ = integrate.quad(f, -12, 12, epsabs=1e-12, epsrel=1e-12, limit=400)
    return math.exp(-r * tau) * val


def _simulate(model, times, z):
    return model.simulate(np.asarray(times, dtype=float), z, np.random.default_rng(0)).s[:, :, 0]


def test_no_dividends_gives_back_black_scholes_path_by_path():
    m = DividendBlackScholes(spot=100.0, rate=0.04, dividend=0.01, vol=0.3, cash=(), proportional=())
    bs = BlackScholes(spot=100.0, rate=0.04, dividend=0.01, vol=0.3)
    times = np.array([0.1, 0.4, 0.75, 1.0])
    z = np.random.default_rng(3).standard_normal((2000, 4, 1))
    assert m.normals_per_step() == 1
    np.testing.assert_allclose(_simulate(m, times, z.copy()), _simulate(bs, times, z.copy()), rtol=1e-12)


def test_proportional_dividends_on_dates_scale_the_black_scholes_path():
    # With the ex-dates on the product's dates, each path is the Black-Scholes path times
    # prod(1 - delta) over the ex-dates passed: exact, path by path.
    m = DividendBlackScholes(spot=100.0, rate=0.05, vol=0.25, cash=(), proportional=((0.4, 0.03), (0.75, 0.02)))
    bs = BlackScholes(spot=100.0, rate=0.05, dividend=0.0, vol=0.25)
    times = np.array([0.1, 0.4, 0.75, 1.0])
    z = np.random.default_rng(4).standard_normal((1000, 4, 3))
    got = _simulate(m, times, z.copy())
    want = _simulate(bs, times, z[:, :, :1].copy()) * np.array([1.0, 0.97, 0.97 * 0.98, 0.97 * 0.98])
    np.testing.assert_allclose(got, want, rtol=1e-12)


def test_proportional_dividends_inside_a_step_give_the_closed_form():
    # Ex-dates between the product's dates: the step is split (two normals), the European
    # call is Black-Scholes from S0 (1 - 0.03)(1 - 0.02), statistically.
    m = DividendBlackScholes(spot=100.0, rate=0.05, vol=0.25, cash=(), proportional=((0.33, 0.03), (0.81, 0.02)))
    est = price(EuropeanCall(strike=100.0, maturity=1.0), m, paths=200_000, seed=11)
    want = _bs(100.0 * 0.97 * 0.98, 100.0, 1.0, 0.05, 0.25, True)
    assert abs(est.value - want) <= Z * est.stderr


@pytest.mark.parametrize("product", [EuropeanCall(strike=100.0, maturity=1.0), EuropeanPut(strike=95.0, maturity=1.0)],
                         ids=["call", "put"])
def test_cash_dividends_european_matches_the_lattice_within_its_se(product):
    cash = ((0.3, 3.0), (0.8, 2.0))
    m = DividendBlackScholes(spot=100.0, rate=0.05, vol=0.25, cash=cash, proportional=((0.55, 0.01),))
    est = price(product, m, paths=200_000, seed=12)
    kind = "call" if isinstance(product, EuropeanCall) else "put"
    ref = lattice_price_dividends(100.0, product.strike, 1.0, 0.05, 0.25, kind, "european",
                                  cash=cash, proportional=((0.55, 0.01),))
    assert abs(est.value - ref) <= Z * est.stderr


def test_one_cash_dividend_european_matches_quadrature():
    m = DividendBlackScholes(spot=100.0, rate=0.06, vol=0.25, cash=((0.5, 4.0),))
    est = price(EuropeanCall(strike=100.0, maturity=1.0), m, paths=200_000, seed=13)
    want = _one_dividend_quadrature(100.0, 100.0, 1.0, 0.06, 0.25, 0.5, 4.0, True)
    assert abs(est.value - want) <= Z * est.stderr


def test_forward_subtracts_the_compounded_dividends():
    m = DividendBlackScholes(spot=100.0, rate=0.05, dividend=0.01, vol=0.2, cash=((0.5, 2.0),),
                             proportional=((0.25, 0.1),))
    g = 0.04
    want = ((100.0 * math.exp(g * 0.25) * 0.9) * math.exp(g * 0.25) - 2.0) * math.exp(g * 0.5)
    assert m.forward([1.0])[0, 0] == pytest.approx(want, rel=1e-13)
    assert m.forward([0.1])[0, 0] == pytest.approx(100.0 * math.exp(g * 0.1), rel=1e-13)


def test_the_floor_at_zero():
    # A dividend larger than the price takes it to 0, where it stays.
    m = DividendBlackScholes(spot=100.0, rate=0.05, vol=0.2, cash=((0.5, 1000.0),))
    s = _simulate(m, [0.25, 0.5, 1.0], np.random.default_rng(5).standard_normal((500, 3, 2)))
    assert np.all(s[:, 0] > 0.0) and np.all(s[:, 1:] == 0.0)


def test_audits_pass_martingale_and_degenerations():
    assert AUDIT_HORIZON == OPTION_MATURITY  # the proportional degeneration's horizon
    m = DividendBlackScholes(cash=((0.3, 3.0), (0.7, 2.0)), proportional=((0.5, 0.02),))
    outcomes = audit_martingale(m, paths=100_000) + audit_degenerations(m, paths=100_000)
    assert {o.case for o in outcomes} >= {"degenerations:no_dividends", "degenerations:proportional_only"}
    # each outcome's own p-value at the 0.1% level (four cases or so: no Holm needed here)
    assert all(o.p_value > 1e-3 for o in outcomes), [(o.case, o.value, o.reference) for o in outcomes]


def test_replace_and_equality():
    m = DividendBlackScholes(cash=((0.5, 2.0),))
    assert m.replace(cash=()) == DividendBlackScholes(cash=())
    assert m != m.replace(cash=((0.5, 2.5),))
    assert hash(m) == hash(DividendBlackScholes(cash=((0.5, 2.0),)))


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"cash": ((0.0, 2.0),)}, r"cash\[0\] time=0.0 is outside \(0, inf\) for DividendBlackScholes"),
        ({"cash": ((0.5, -1.0),)}, r"cash\[0\] amount=-1.0 is outside \[0, inf\]"),
        ({"proportional": ((0.5, 1.0),)}, r"proportional\[0\] fraction=1.0 is outside \[0, 1\]"),
        ({"cash": ((0.5, 1.0), (0.5, 2.0))}, r"cash has two dividends on one date"),
        ({"cash": ((0.5, 1.0),), "proportional": ((0.5, 0.1),)}, r"share an ex-date"),
        ({"cash": 3}, r"cash=3 is not a sequence of \(time, amount\) pairs"),
        ({"vol": -1.0}, r"vol=-1.0 is outside"),
    ],
)
def test_bad_input_names_what_and_where(kwargs, match):
    with pytest.raises(ParamError, match=match):
        DividendBlackScholes(**kwargs)
