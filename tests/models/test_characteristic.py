"""The models' characteristic functions E[exp(iu log S_t)]: their defining properties,
agreement with the independently written ones in limitcase.references, agreement with the
models' own simulations, the vol-of-vol -> 0 limit, and the default for a model that
states none.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.stats import norm

from limitcase.errors import NoReference
from limitcase.models import BlackScholes, Heston, Merton, Model, MultiBlackScholes, Simulated
from limitcase.params import Param
from limitcase.references import heston_charfn, merton_charfn

MODELS = [
    BlackScholes(),
    BlackScholes(spot=37.0, rate=-0.01, dividend=0.04, vol=0.6),
    Heston(),
    Heston(v0=0.09, kappa=0.3, theta=0.02, vol_of_vol=2.0, rho=0.9),
    Heston(vol_of_vol=0.0),
    Merton(),
    Merton(vol=0.05, intensity=5.0, jump_mean=-0.3, jump_vol=0.0),
]
U_LINES = [0.0, -0.5, -1.0]  # imaginary parts used by the Fourier references
U_REAL = np.array([0.0, 1e-6, 0.3, 1.0, 2.5, 7.0, 30.0])


@pytest.mark.parametrize("model", MODELS, ids=repr)
@pytest.mark.parametrize("t", [0.02, 1.0, 7.0])
def test_defining_properties(model, t):
    """phi(0) = 1, phi(-i) = E[S_t] = S0 exp((r - q) t), |phi(u)| <= 1 and
    phi(-u) = conj(phi(u)) on the real line (any characteristic function of a real law)."""
    cf = model.characteristic_function
    assert abs(cf(np.array([0.0 + 0j]), t)[0] - 1.0) < 1e-15
    fwd = cf(np.array([-1j]), t)[0]
    assert fwd.real == pytest.approx(model.forward([t])[0, 0], rel=1e-13) and abs(fwd.imag) < 1e-12 * fwd.real
    u = U_REAL.astype(complex)
    assert np.all(np.abs(cf(u, t)) <= 1.0 + 1e-14)
    assert np.allclose(cf(-u, t), np.conj(cf(u, t)), rtol=1e-13, atol=1e-300)
    shaped = cf(np.zeros((2, 3), dtype=complex), t)
    assert shaped.shape == (2, 3)


HESTONS = [
    Heston(),
    Heston(v0=0.01, kappa=0.3, theta=0.02, vol_of_vol=0.05, rho=-0.9),
    Heston(v0=0.09, kappa=3.0, theta=0.2, vol_of_vol=1.0, rho=0.0),
    Heston(v0=0.01, kappa=3.0, theta=0.2, vol_of_vol=2.5, rho=0.9),
    Heston(v0=0.04, kappa=2.0, theta=0.04, vol_of_vol=1e-9, rho=-0.5),
]


@pytest.mark.parametrize("model", HESTONS, ids=repr)
@pytest.mark.parametrize("t", [0.05, 1.0, 5.0])
def test_heston_matches_reference_charfn(model, t):
    """Against heston_charfn of limitcase.references (other code: written from the same
    published little-trap form, Albrecher et al. 2007, with its own rewriting)."""
    u = (U_REAL[:, None] + 1j * np.array(U_LINES)[None, :]).ravel()
    got = model.characteristic_function(u, t)
    want = heston_charfn(u, t, model.rate, model.dividend, model.v0, model.kappa, model.theta,
                         model.vol_of_vol, model.rho) * np.exp(1j * u * math.log(model.spot))
    ok = np.isfinite(want)
    assert np.max(np.abs(got[ok] - want[ok]) / np.maximum(np.abs(want[ok]), 1.0)) < 1e-12


def test_heston_without_vol_of_vol_is_gaussian():
    """vol_of_vol = 0: the variance is deterministic, v(t) = theta + (v0 - theta) e^{-kappa t},
    and log S_t is normal with variance int_0^t v = theta t + (v0 - theta)(1 - e^{-kappa t})/kappa."""
    m = Heston(v0=0.09, kappa=2.0, theta=0.04, vol_of_vol=0.0, rho=-0.5)
    t = 1.5
    w = m.theta * t + (m.v0 - m.theta) * (-math.expm1(-m.kappa * t)) / m.kappa
    u = np.array([0.7, 3.0, 2.0 - 0.5j, -1j])
    mean = math.log(m.spot) + (m.rate - m.dividend) * t - 0.5 * w
    assert np.allclose(m.characteristic_function(u, t), np.exp(1j * u * mean - 0.5 * w * u * u), rtol=1e-14)


@pytest.mark.parametrize("model", [Merton(), Merton(vol=0.05, intensity=5.0, jump_mean=-0.3, jump_vol=0.0),
                                   Merton(intensity=0.0)], ids=repr)
def test_merton_matches_reference_charfn(model):
    u = (U_REAL[:, None] + 1j * np.array(U_LINES)[None, :]).ravel()
    for t in (0.1, 2.0):
        want = merton_charfn(u, t, model.rate, model.dividend, model.vol, model.intensity, model.jump_mean,
                             model.jump_vol) * np.exp(1j * u * math.log(model.spot))
        got = model.characteristic_function(u, t)
        assert np.max(np.abs(got - want) / np.maximum(np.abs(want), 1.0)) < 1e-13


@pytest.mark.parametrize("model", [Merton(), Heston(substeps=32), BlackScholes()], ids=lambda m: type(m).__name__)
def test_charfn_describes_the_simulated_model(model):
    """The sample mean of exp(iu log S_T) over the model's own simulated paths meets its
    characteristic function, real and imaginary parts, within 4.4 standard errors
    (z for a two-sided 1e-3 level with Bonferroni over the 6 comparisons; 200 000 paths)."""
    n, t = 200_000, 1.0
    rng = np.random.default_rng(20261204)
    z = rng.standard_normal((n, 1, model.normals_per_step()))
    s = model.simulate(np.array([t]), z, rng).s[:, 0, 0]
    crit = float(norm.isf(1e-3 / (2 * 6)))
    for u in (0.5, 2.0, 4.0):
        e = np.exp(1j * u * np.log(s))
        want = model.characteristic_function(np.array([u + 0j]), t)[0]
        for part in (np.real, np.imag):
            se = float(np.std(part(e))) / math.sqrt(n)
            assert abs(float(np.mean(part(e))) - float(part(want))) <= crit * se, (u, part.__name__)


class NoCharfn(Model):
    """A user's model that states no characteristic function."""

    spot = Param(100.0, low=0.0, low_open=True)
    rate = Param(0.03, low=-1.0, high=1.0)

    def initial(self):
        return np.array([self.spot])

    def dividend_yields(self):
        return np.array([0.0])

    def _simulate(self, times, z, rng):
        s = self.spot * np.exp(np.cumsum(0.2 * z * np.sqrt(np.diff(times, prepend=0.0))[None, :, None]
                                         + (self.rate - 0.02) * np.diff(times, prepend=0.0)[None, :, None], axis=1))
        return Simulated(s=s, step_var=np.full((1, times.size, 1), 0.04))


def test_default_states_none():
    with pytest.raises(NoReference, match="characteristic_function"):
        NoCharfn().characteristic_function(np.array([1.0 + 0j]), 1.0)
    with pytest.raises(NoReference):
        MultiBlackScholes().characteristic_function(np.array([1.0 + 0j]), 1.0)
