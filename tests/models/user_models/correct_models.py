"""Models as a user would write them in a file of their own, correct: each passes
`limitcase audit` at default settings."""

import math

import numpy as np

from limitcase.models import Heston, Merton, Model, MultiBlackScholes
from limitcase.models.base import Simulated
from limitcase.params import Param
from limitcase.references import black_scholes


class MyGBM(Model):
    """Geometric Brownian motion written from scratch on the Model base (exact transition,
    Black and Scholes 1973)."""

    spot = Param(100.0, low=0.0, low_open=True, doc="price today")
    rate = Param(0.03, low=-1.0, high=1.0, doc="short rate")
    dividend = Param(0.01, low=-1.0, high=1.0, doc="dividend yield")
    vol = Param(0.25, low=0.0, high=5.0, doc="volatility")

    def initial(self):
        return np.array([self.spot])

    def dividend_yields(self):
        return np.array([self.dividend])

    def _simulate(self, times, z, rng):
        dt = np.diff(times, prepend=0.0)
        x = z[:, :, :1] * (self.vol * np.sqrt(dt))[None, :, None]
        x += ((self.rate - self.dividend - 0.5 * self.vol**2) * dt)[None, :, None]
        s = self.spot * np.exp(np.cumsum(x, axis=1))
        return Simulated(s=s, step_var=(self.vol**2 * dt)[None, :, None])

    def european_price(self, kind, strike, maturity):
        return float(black_scholes(self.spot, strike, maturity, self.rate, self.dividend, self.vol, kind))


class MyJumps(Merton):
    """A user's Merton (1976) variant with its own defaults."""

    intensity = Param(0.5, low=0.0, high=100.0, doc="expected jumps per year")


class MyPair(MultiBlackScholes):
    """Two correlated assets, correlation applied with the factor as the library does."""

    def __init__(self, spots=(100.0, 90.0), vols=(0.2, 0.3), dividends=(0.01, 0.02), correlation=0.6, rate=0.04):
        super().__init__(spots=spots, vols=vols, dividends=dividends, correlation=correlation, rate=rate)

    def _simulate(self, times, z, rng):
        dt = np.diff(times, prepend=0.0)
        x = z @ self._chol.T
        x *= np.sqrt(dt)[None, :, None] * self.vols[None, None, :]
        x += ((self.rate - self.dividends - 0.5 * self.vols**2)[None, :] * dt[:, None])[None]
        s = np.exp(np.cumsum(x, axis=1) + np.log(self.spots)[None, None, :])
        return Simulated(s=s, step_var=(dt[:, None] * self.vols[None, :] ** 2)[None])


class MyEulerHeston(Heston):
    """Heston (1993) by full-truncation Euler (Lord, Koekkoek and van Dijk 2010): v+ in the
    drift and in the diffusion of both the price and the variance. Its own vol-of-vol is high
    (the Feller condition 2 kappa theta >= vol_of_vol^2 fails widely), so the variance often
    steps below zero and how it is floored matters."""

    vol_of_vol = Param(0.7, low=0.0, high=5.0, doc="volatility of the variance")

    def __init__(self, scheme="euler", **overrides):
        super().__init__(scheme=scheme, **overrides)

    def _euler_step(self, x, v, h, zv, zs):
        vp = np.maximum(v, 0.0)
        root = np.sqrt(vp * h)
        x_new = x + (self.rate - self.dividend - 0.5 * vp) * h + root * (
            self.rho * zv + math.sqrt(1.0 - self.rho**2) * zs)
        v_new = v + self.kappa * (self.theta - vp) * h + self.vol_of_vol * root * zv
        return x_new, v_new
