"""Merton jump-diffusion model: prices against an independent quadrature of the Poisson
mixture, cumulants of the log-return, exactness on any grid, the two Black-Scholes limits
path by path, bad input.

The quadrature is written here on purpose (scipy only): conditional on n jumps in [0, T] the
log-price is normal (Merton 1976, J. Financial Economics 3), so the price is the Poisson
mixture of one-dimensional normal integrals, each done by scipy.integrate.quad. It shares no
code with the Monte Carlo side nor with limitcase.references.merton (which sums
Black-Scholes prices).
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import norm, poisson

from limitcase.engine import evaluate
from limitcase.errors import ParamError
from limitcase.models import BlackScholes, Merton
from limitcase.references.merton import merton_jump_price
from limitcase_payoffs.vanilla import EuropeanCall, EuropeanPut

LEVEL = 1e-3


def _zcrit(m: int = 1) -> float:
    return float(norm.isf(LEVEL / (2 * m)))


_NODES, _WEIGHTS = np.polynomial.legendre.leggauss(160)


def _gauss(f, a, b):
    """Gauss-Legendre with 160 nodes on [a, b] (f smooth there: exponentially convergent)."""
    x = 0.5 * (b - a) * _NODES + 0.5 * (a + b)
    return 0.5 * (b - a) * float(np.dot(_WEIGHTS, f(x)))


def mixture_price(kind, strike, spot, t, r, q, vol, lam, mu, delta):
    """e^{-rT} E[payoff(S_T)] by the Poisson mixture of normals: for each n jumps, the normal
    integral in z split at the strike's kink, on [-12, 12] (the tail beyond loses < 1e-30)."""
    kbar = math.exp(mu + 0.5 * delta * delta) - 1.0
    sign = 1.0 if kind == "call" else -1.0
    total = 0.0
    n_max = int(lam * t + 12.0 * math.sqrt(lam * t) + 20)  # Poisson tail beyond: < 1e-20 for lam t <= 10
    for n in range(n_max + 1):
        m = math.log(spot) + (r - q - lam * kbar - 0.5 * vol * vol) * t + n * mu
        sd = math.sqrt(vol * vol * t + n * delta * delta)
        kink = min(max((math.log(strike) - m) / sd, -12.0), 12.0)

        def f(z):
            return np.maximum(sign * (np.exp(m + sd * z) - strike), 0.0) * norm.pdf(z)

        total += poisson.pmf(n, lam * t) * (_gauss(f, -12.0, kink) + _gauss(f, kink, 12.0))
    return math.exp(-r * t) * total


def test_independent_quadrature_agrees_with_the_reference_series():
    """The quadrature above and limitcase.references.merton_jump_price agree to 1e-8
    (two independent evaluations of Merton's formula)."""
    for kind in ("call", "put"):
        for k in (80.0, 100.0, 125.0):
            quad = mixture_price(kind, k, 100.0, 1.0, 0.05, 0.02, 0.2, 1.0, -0.1, 0.15)
            assert abs(quad - merton_jump_price(100.0, k, 1.0, 0.05, 0.02, 0.2, 1.0, -0.1, 0.15, kind)) < 1e-8


def test_prices_on_a_monthly_grid_match_the_quadrature():
    """Calls and puts at three strikes, T = 1, simulated on a monthly grid (12 exact steps
    with jumps in every one), on common paths; each within z * SE, Bonferroni over 6 at 1e-3.
    A compensator error of lambda*kbar = 0.084 per year would move the K=100 call by about
    5 SE here."""
    model = Merton(intensity=1.0, jump_mean=-0.1, jump_vol=0.15)
    products, refs = [], []
    for k in (80.0, 100.0, 120.0):
        for cls, kind in ((EuropeanCall, "call"), (EuropeanPut, "put")):
            products.append(_on_grid(cls(strike=k, maturity=1.0), 12))
            refs.append(mixture_price(kind, k, 100.0, 1.0, 0.05, 0.02, 0.2, 1.0, -0.1, 0.15))
    joint = evaluate(products, model, paths=80_000, seed=1976)
    z = _zcrit(len(products))
    for i, ref in enumerate(refs):
        est = joint.estimate(np.eye(len(products))[i])
        assert abs(est.value - ref) <= z * est.stderr, (products[i], est, ref)


def _on_grid(product, n):
    """The product observed on n monthly dates (the payoff reads the last): forces the
    engine to simulate n steps."""
    base = type(product)

    class OnGrid(base):
        def dates(self):
            return self.maturity * np.arange(1, n + 1) / n

    OnGrid.__name__ = f"{base.__name__}OnGrid"
    return OnGrid(**product.params())


def test_log_return_cumulants():
    """The first three cumulants of ln(S_1/S_0): (r - q - lambda kbar - sigma^2/2) + lambda mu,
    sigma^2 + lambda (mu^2 + delta^2), lambda (mu^3 + 3 mu delta^2) (Merton 1976; the
    compound Poisson's cumulants are lambda E[J^k]), with one yearly step, 400k paths; z-tests
    with SEs from the sample's higher moments, Bonferroni over 3 at 1e-3."""
    lam, mu, d, vol = 2.0, -0.08, 0.2, 0.15
    model = Merton(rate=0.03, dividend=0.01, vol=vol, intensity=lam, jump_mean=mu, jump_vol=d)
    rng = np.random.default_rng(11)
    z = rng.standard_normal((400_000, 1, 1))
    x = np.log(model.simulate(np.array([1.0]), z, rng).s[:, 0, 0] / 100.0)
    kbar = math.exp(mu + 0.5 * d * d) - 1.0
    k1 = 0.03 - 0.01 - lam * kbar - 0.5 * vol * vol + lam * mu
    k2 = vol * vol + lam * (mu * mu + d * d)
    k3 = lam * (mu**3 + 3.0 * mu * d * d)
    n = x.size
    c = x - x.mean()
    m2, m3, m4, m6 = (np.mean(c**p) for p in (2, 3, 4, 6))
    z1 = (x.mean() - k1) / math.sqrt(m2 / n)
    z2 = (m2 - k2) / math.sqrt((m4 - m2 * m2) / n)
    z3 = (m3 - k3) / math.sqrt((m6 - m3 * m3 - 6.0 * m4 * m2 + 9.0 * m2**3) / n)
    zc = _zcrit(3)
    assert abs(z1) <= zc and abs(z2) <= zc and abs(z3) <= zc, (z1, z2, z3)


def test_martingale_on_one_long_step():
    """E[S(5)] = S0 e^{(r-q)5} from a single five-year step (the simulation is exact on any
    grid): 200k paths, z * SE at 1e-3."""
    model = Merton(intensity=3.0, jump_mean=-0.2, jump_vol=0.3)
    rng = np.random.default_rng(12)
    s = model.simulate(np.array([5.0]), rng.standard_normal((200_000, 1, 1)), rng).s[:, 0, 0]
    fwd = 100.0 * math.exp(0.03 * 5.0)
    assert abs(s.mean() - fwd) <= _zcrit() * s.std(ddof=1) / math.sqrt(s.size)


@pytest.mark.parametrize("changes", [{"intensity": 0.0}, {"jump_mean": 0.0, "jump_vol": 0.0}])
def test_degenerations_are_black_scholes_path_by_path(changes):
    """No jumps, or jumps of size one: the same normals give the Black-Scholes path."""
    model = Merton().replace(**changes)
    times = np.array([0.2, 0.7, 1.0, 3.0])
    z = np.random.default_rng(5).standard_normal((1000, 4, 1))
    a = model.simulate(times, z.copy(), np.random.default_rng(6)).s
    b = BlackScholes(spot=100.0, rate=0.05, dividend=0.02, vol=0.2).simulate(times, z.copy(), np.random.default_rng(6)).s
    np.testing.assert_allclose(a, b, rtol=1e-12)
    names = {d.name: d for d in Merton.degenerations}
    deg = names["intensity_to_zero" if "intensity" in changes else "jump_sizes_to_zero"]
    assert deg.changes == changes
    assert deg.becomes(model) == BlackScholes(spot=100.0, rate=0.05, dividend=0.02, vol=0.2)


def test_randomness_comes_from_z_and_rng_only():
    """Same normals and same generator state: same paths; another generator: other jumps."""
    model = Merton()
    times = np.array([0.5, 1.0])
    z = np.random.default_rng(1).standard_normal((500, 2, 1))
    a = model.simulate(times, z.copy(), np.random.default_rng(2)).s
    b = model.simulate(times, z.copy(), np.random.default_rng(2)).s
    c = model.simulate(times, z.copy(), np.random.default_rng(3)).s
    np.testing.assert_array_equal(a, b)
    assert not np.allclose(a, c)
    assert model.normals_per_step() == 1 and model.jump_compensator == pytest.approx(math.expm1(-0.1 + 0.5 * 0.15**2))


@pytest.mark.parametrize(
    "kwargs, match",
    [
        ({"intensity": -1.0}, r"intensity=-1.0 is outside \[0, 100\] for Merton"),
        ({"jump_vol": -0.1}, r"jump_vol=-0.1 is outside \[0, 2\] for Merton"),
        ({"vol": "0.2"}, r"vol='0.2' is not a number for Merton"),
        ({"spot": 0.0}, r"spot=0.0 is outside \(0, inf\] for Merton"),
    ],
)
def test_bad_parameters(kwargs, match):
    with pytest.raises(ParamError, match=match):
        Merton(**kwargs)
