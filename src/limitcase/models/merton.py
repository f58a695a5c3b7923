"""Merton (1976) jump-diffusion, simulated exactly on any date grid.

ln S(t_j) = ln S(t_{j-1}) + (r - q - lambda kbar - sigma^2/2) dt_j + sigma sqrt(dt_j) Z_j
            + sum_{i <= N_j} J_i,
N_j ~ Poisson(lambda dt_j), J_i ~ Normal(mu_J, delta^2) independent, kbar = E[e^J - 1]
= exp(mu_J + delta^2/2) - 1. Given N_j = n the jump sum is Normal(n mu_J, n delta^2), so one
count and one normal per step give the exact transition, whatever the step.

Randomness: the diffusion normals ``Z`` are the engine's ``z`` (one per step); the Poisson
counts and the normals of the jump sums come from ``rng``, the block's own generator (the
engine hands every product of a case the same generator, so they see the same jumps).
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np

from ..params import Param
from .base import Degeneration, Model, Simulated
from .gbm import BlackScholes

__all__ = ["Merton"]


def _to_black_scholes(m: "Merton") -> BlackScholes:
    return BlackScholes(spot=m.spot, rate=m.rate, dividend=m.dividend, vol=m.vol)


class Merton(Model):
    r"""One asset under Merton's (1976) jump-diffusion with log-normal jump sizes.

    Parameters
    ----------
    spot, rate, dividend, vol
        Price today, short rate, continuous dividend yield, diffusion volatility.
    intensity
        Expected number of jumps per year :math:`\lambda`.
    jump_mean, jump_vol
        Mean :math:`\mu_J` and standard deviation :math:`\delta` of the log of a jump's
        size (a jump multiplies the price by :math:`e^J`).

    Notes
    -----
    The drift carries the compensator :math:`-\lambda\bar k`, so
    :math:`E[e^{-(r-q)t}S(t)] = S_0`: over a step,
    :math:`E[e^{\sigma\sqrt{\Delta}Z - \sigma^2\Delta/2}] = 1` and
    :math:`E[e^{\sum_{i\le N}J_i}] = e^{\lambda\Delta\bar k}`.

    ``step_var`` is the diffusion's variance :math:`\sigma^2\Delta` over each step: the
    jumps are not included, so a Brownian-bridge correction between dates that reads it
    accounts for the continuous part only (between dates the path is a bridge plus jumps
    at uniform times, not a bridge).

    References
    ----------
    .. [1] R. C. Merton, "Option pricing when underlying stock returns are discontinuous",
       Journal of Financial Economics 3(1-2), 1976.
    .. [2] P. Glasserman, *Monte Carlo Methods in Financial Engineering*, Springer 2003,
       section 3.5.1 (simulating jump-diffusions on a fixed grid).
    """

    spot = Param(100.0, low=0.0, low_open=True, doc="price today")
    rate = Param(0.05, low=-1.0, high=1.0, doc="continuously compounded short rate")
    dividend = Param(0.02, low=-1.0, high=1.0, doc="continuous dividend yield")
    vol = Param(0.2, low=0.0, high=5.0, doc="diffusion volatility, annualised")
    intensity = Param(1.0, low=0.0, high=100.0, doc="expected jumps per year")
    jump_mean = Param(-0.1, low=-2.0, high=2.0, doc="mean of the log jump size")
    jump_vol = Param(0.15, low=0.0, high=2.0, doc="standard deviation of the log jump size")

    exact: ClassVar[bool] = True
    degenerations = (
        Degeneration(
            "intensity_to_zero",
            {"intensity": 0.0},
            becomes=_to_black_scholes,
            note="no jumps: Black-Scholes with the diffusion volatility",
        ),
        Degeneration(
            "jump_sizes_to_zero",
            {"jump_mean": 0.0, "jump_vol": 0.0},
            becomes=_to_black_scholes,
            note="every jump multiplies the price by 1: Black-Scholes with the diffusion volatility",
        ),
    )

    def initial(self) -> np.ndarray:
        return np.array([self.spot])

    def dividend_yields(self) -> np.ndarray:
        return np.array([self.dividend])

    @property
    def jump_compensator(self) -> float:
        r""":math:`\bar k = E[e^J] - 1 = e^{\mu_J + \delta^2/2} - 1`."""
        return math.expm1(self.jump_mean + 0.5 * self.jump_vol**2)

    def characteristic_function(self, u: Any, t: float) -> np.ndarray:
        r""":math:`\mathbb E[e^{iu\ln S_t}]` (Merton 1976): the Gaussian part times the
        compound Poisson part,

        .. math::

            \exp\Big(iu\big(\ln S_0 + (r - q - \lambda\bar k - \tfrac12\sigma^2)t\big)
            - \tfrac12\sigma^2u^2t + \lambda t\big(e^{iu\mu_J - \delta^2u^2/2} - 1\big)\Big).
        """
        u = np.asarray(u, dtype=complex)
        drift = math.log(self.spot) + (self.rate - self.dividend - self.intensity * self.jump_compensator
                                       - 0.5 * self.vol**2) * t
        jumps = self.intensity * t * np.expm1(1j * u * self.jump_mean - 0.5 * self.jump_vol**2 * u * u)
        return np.exp(1j * u * drift - 0.5 * self.vol**2 * t * u * u + jumps)

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        dt = np.diff(times, prepend=0.0)
        n = z.shape[0]
        drift = (self.rate - self.dividend - self.intensity * self.jump_compensator - 0.5 * self.vol**2) * dt
        z *= (self.vol * np.sqrt(dt))[None, :, None]
        z += drift[None, :, None]
        if self.intensity > 0.0:
            counts = rng.poisson(self.intensity * dt, size=(n, dt.size))
            jumps = counts * self.jump_mean
            if self.jump_vol > 0.0:
                jumps = jumps + self.jump_vol * np.sqrt(counts) * rng.standard_normal((n, dt.size))
            z[:, :, 0] += jumps
        np.cumsum(z, axis=1, out=z)
        z += math.log(self.spot)
        np.exp(z, out=z)
        return Simulated(s=z, step_var=(self.vol**2 * dt)[None, :, None])
