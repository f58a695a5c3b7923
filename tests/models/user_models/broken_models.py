"""The models of correct_models.py, each with one realistic bug: every one must be caught by
`limitcase audit` on this file at default settings."""

import math

import numpy as np

from limitcase.models.base import Simulated

from correct_models import MyEulerHeston, MyGBM, MyJumps, MyPair  # noqa: E402  (beside this file)


class DriftWithoutDividend(MyGBM):
    """Bug: the drift is r - sigma^2/2, the dividend yield left out."""

    def _simulate(self, times, z, rng):
        dt = np.diff(times, prepend=0.0)
        x = z[:, :, :1] * (self.vol * np.sqrt(dt))[None, :, None]
        x += ((self.rate - 0.5 * self.vol**2) * dt)[None, :, None]
        return Simulated(s=self.spot * np.exp(np.cumsum(x, axis=1)), step_var=(self.vol**2 * dt)[None, :, None])


class VarianceByStep(MyGBM):
    """Bug: the Brownian increment is scaled by dt instead of sqrt(dt)."""

    def _simulate(self, times, z, rng):
        dt = np.diff(times, prepend=0.0)
        x = z[:, :, :1] * (self.vol * dt)[None, :, None]
        x += ((self.rate - self.dividend - 0.5 * self.vol**2) * dt)[None, :, None]
        return Simulated(s=self.spot * np.exp(np.cumsum(x, axis=1)), step_var=(self.vol**2 * dt)[None, :, None])


class NoCompensator(MyJumps):
    """Bug: the jump compensator -lambda * kbar is left out of the drift."""

    @property
    def jump_compensator(self):
        return 0.0


class TransposedFactor(MyPair):
    """Bug: the normals are multiplied by the correlation factor L instead of its transpose
    (z @ L rather than z @ L.T), so the covariance is L^T L, not L L^T."""

    def _simulate(self, times, z, rng):
        dt = np.diff(times, prepend=0.0)
        x = z @ self._chol
        x *= np.sqrt(dt)[None, :, None] * self.vols[None, None, :]
        x += ((self.rate - self.dividends - 0.5 * self.vols**2)[None, :] * dt[:, None])[None]
        s = np.exp(np.cumsum(x, axis=1) + np.log(self.spots)[None, None, :])
        return Simulated(s=s, step_var=(dt[:, None] * self.vols[None, :] ** 2)[None])


class FlooredOnce(MyEulerHeston):
    """Bug: the variance is floored at zero in the diffusion but not in the price's drift
    (a negative variance stays in -v/2)."""

    def _euler_step(self, x, v, h, zv, zs):
        vp = np.maximum(v, 0.0)
        root = np.sqrt(vp * h)
        x_new = x + (self.rate - self.dividend - 0.5 * v) * h + root * (
            self.rho * zv + math.sqrt(1.0 - self.rho**2) * zs)
        v_new = v + self.kappa * (self.theta - vp) * h + self.vol_of_vol * root * zv
        return x_new, v_new
