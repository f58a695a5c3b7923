"""Geometric Brownian motion, one asset or several correlated ones, simulated exactly.

log S(t_j) = log S(t_{j-1}) + (r - q - sigma^2/2) dt_j + sigma sqrt(dt_j) Z_j,
Z_j standard normal: the exact transition of the Black-Scholes (1973) model, so the
simulation has no time-step bias on any date grid.
"""

from __future__ import annotations

import math
from typing import Any, Sequence

import numpy as np

from ..errors import ModelError, ParamError
from ..params import Param
from .base import Model, Simulated

__all__ = ["BlackScholes", "MultiBlackScholes", "accumulate_dates", "UNIFORM_STEP_RTOL"]


UNIFORM_STEP_RTOL = 1e-12
"""Per-date scales (or drifts) equal within this relative difference are one number: the
equal steps of a fixing schedule (``k T / n``) differ only in the rounding of their dates,
and with one number scale and drift are scalars (a whole-array multiply and add, measured at
about 0.2 ns per path-date against 0.35 for a per-date factor broadcast over the paths).
The price paths differ from the per-step ones by about 1e-16 relative: far below rounding."""


def _date_rows(x: np.ndarray) -> list[np.ndarray]:
    """The dates of ``x`` ``(paths, dates, ...)`` as a list of views ``(paths, ...)``."""
    return list(x.swapaxes(0, 1))


def accumulate_dates(x: np.ndarray) -> None:
    """Running sums over axis 1 (the dates) of ``x``, ``(paths, dates, ...)``, in place.

    The same numbers as ``np.cumsum(x, axis=1, out=x)`` (each date adds the previous date's
    sum, in date order), laid out for speed: numpy's ``cumsum`` over a middle axis walks
    path by path, one short strided run each, while one whole-row add per date streams
    over every path at once (contiguously when ``x`` is laid out dates first, as the
    engine's blocks are: :func:`limitcase.sampling.normals_buffer`). Measured on a block of
    4096 paths x 52 dates (2 cores, ``benchmarks/throughput.py``): about 3.5 ns per
    path-date for ``cumsum``, 0.27 here dates first. With few paths the per-date call costs
    more than it saves, and ``cumsum`` is used.
    """
    if x.shape[0] < 64:
        np.cumsum(x, axis=1, out=x)
        return
    rows = _date_rows(x)
    add = np.add
    for prev, row in zip(rows[:-1], rows[1:]):
        add(prev, row, out=row)


def _constant(v: np.ndarray) -> bool:
    return bool(np.ptp(v) <= UNIFORM_STEP_RTOL * np.abs(v).max())


def _log_paths(x: np.ndarray, scale: Any, drift: Any, start: Any) -> None:
    """In place: ``x`` ``(paths, dates, assets)`` of normals becomes the log-prices
    ``start + sum_{i <= j} (scale_i x_i + drift_i)``: one pass each for the scale and the
    drift (scalars on equal steps, :data:`UNIFORM_STEP_RTOL`), the start on the first date
    only, then the date-by-date adds of :func:`accumulate_dates`."""
    np.multiply(x, scale, out=x)
    np.add(x, drift, out=x)
    first = x[:, 0]
    first += start
    accumulate_dates(x)


_PLAN_CACHE: dict[tuple, tuple] = {}


def _gbm_plan(key: tuple, times: np.ndarray, vols: np.ndarray, mus: np.ndarray, log_spots: np.ndarray) -> tuple:
    """Per-date scale and drift of the log-prices of geometric Brownian motions and
    their start, as :func:`_log_paths` takes them (scalars on equal steps with one asset);
    kept per model and grid (a block's arithmetic is then all on the paths)."""
    plan = _PLAN_CACHE.get(key)
    if plan is not None:
        return plan
    dt = np.diff(times, prepend=0.0)
    scale = np.sqrt(dt)[:, None] * vols[None, :]
    drift = (mus - 0.5 * vols**2)[None, :] * dt[:, None]
    start: Any = log_spots
    if vols.size == 1 and _constant(scale) and _constant(drift):
        plan = (float(scale.mean()), float(drift.mean()), float(start[0]), dt)
    else:
        plan = (scale[None], drift[None], start, dt)
    if len(_PLAN_CACHE) > 256:
        _PLAN_CACHE.clear()
    _PLAN_CACHE[key] = plan
    return plan


class BlackScholes(Model):
    """One asset under Black-Scholes: spot, short rate, dividend yield, volatility."""

    spot = Param(100.0, low=0.0, low_open=True, doc="price today")
    rate = Param(0.05, low=-1.0, high=1.0, doc="continuously compounded short rate")
    dividend = Param(0.02, low=-1.0, high=1.0, doc="continuous dividend yield")
    vol = Param(0.2, low=0.0, high=5.0, doc="volatility, annualised")

    def initial(self) -> np.ndarray:
        return np.array([self.spot])

    def dividend_yields(self) -> np.ndarray:
        return np.array([self.dividend])

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        vol, mu, spot = float(self.vol), float(self.rate - self.dividend), float(self.spot)
        key = (vol, mu, spot, times.tobytes())
        scale, drift, start, dt = _gbm_plan(key, times, np.array([vol]), np.array([mu]), np.array([math.log(spot)]))
        # in place, on the caller's block: scale, drift, start, accumulate, exponentiate (with
        # np.exp: np.log of its result gives back the log-price exactly, which a payoff taking
        # the log of one fixing, a geometric average of one date, relies on; np.exp2 does not)
        _log_paths(z, scale, drift, start)
        np.exp(z, out=z)
        return Simulated(s=z, step_var=(vol**2 * dt)[None, :, None])

    def characteristic_function(self, u: Any, t: float) -> np.ndarray:
        r""":math:`\mathbb E[e^{iu\ln S_t}] = \exp\big(iu(\ln S_0 + (r - q - \sigma^2/2)t)
        - \sigma^2u^2t/2\big)`: :math:`\ln S_t` is normal (Black and Scholes 1973)."""
        u = np.asarray(u, dtype=complex)
        mean = math.log(self.spot) + (self.rate - self.dividend - 0.5 * self.vol**2) * t
        return np.exp(1j * u * mean - 0.5 * self.vol**2 * t * u * u)


class MultiBlackScholes(Model):
    """Several assets, each geometric Brownian motion, with correlated Brownian motions.

    Parameters
    ----------
    spots, vols, dividends
        One value per asset (a scalar is repeated for every asset).
    correlation
        A symmetric matrix with unit diagonal, positive semi-definite; or one number for
        every pair.
    rate
        Short rate.
    """

    rate = Param(0.05, low=-1.0, high=1.0, doc="continuously compounded short rate")

    def __init__(
        self,
        spots: Sequence[float] | float = (100.0, 100.0),
        vols: Sequence[float] | float = 0.2,
        dividends: Sequence[float] | float = 0.0,
        correlation: Any = 0.5,
        rate: float = 0.05,
    ) -> None:
        super().__init__(rate=rate)
        s = np.atleast_1d(np.asarray(spots, dtype=float))
        d = s.size
        v = np.broadcast_to(np.asarray(vols, dtype=float), (d,)).copy()
        q = np.broadcast_to(np.asarray(dividends, dtype=float), (d,)).copy()
        if np.any(s <= 0) or not np.all(np.isfinite(s)):
            raise ParamError(f"spots={s.tolist()!r} must be finite and > 0 for MultiBlackScholes")
        if np.any(v < 0) or np.any(v > 5):
            raise ParamError(f"vols={v.tolist()!r} must lie in [0, 5] for MultiBlackScholes")
        if np.any(np.abs(q) > 1):
            raise ParamError(f"dividends={q.tolist()!r} must lie in [-1, 1] for MultiBlackScholes")
        c = np.asarray(correlation, dtype=float)
        if c.ndim == 0:
            if not -1.0 <= float(c) <= 1.0:
                raise ParamError(f"correlation={float(c)!r} is outside [-1, 1] for MultiBlackScholes")
            c = np.full((d, d), float(c))
            np.fill_diagonal(c, 1.0)
        self._chol = _correlation_factor(c, d)
        object.__setattr__(self, "spots", s)
        object.__setattr__(self, "vols", v)
        object.__setattr__(self, "dividends", q)
        object.__setattr__(self, "correlation", c)
        object.__setattr__(self, "n_assets", d)

    def params(self) -> dict[str, Any]:
        return {
            "spots": tuple(self.spots.tolist()),
            "vols": tuple(self.vols.tolist()),
            "dividends": tuple(self.dividends.tolist()),
            "correlation": tuple(map(tuple, self.correlation.tolist())),
            "rate": self.rate,
        }

    def replace(self, **changes: Any) -> "MultiBlackScholes":
        """A validated copy with some parameters changed, of the same class (a user's
        subclass stays itself)."""
        values = self.params()
        unknown = sorted(set(changes) - set(values))
        if unknown:
            raise ParamError(f"{type(self).__name__} has no parameter {unknown[0]!r}; "
                             f"its parameters are: {', '.join(values)}")
        values.update(changes)
        return type(self)(**values)

    def __eq__(self, other: object) -> bool:
        return type(other) is type(self) and self.params() == other.params()  # type: ignore[attr-defined]

    def __hash__(self) -> int:
        return hash((type(self).__qualname__, tuple(self.params().items())))

    def __repr__(self) -> str:
        p = self.params()
        rho = self.correlation[np.triu_indices(self.n_assets, 1)]
        rho_text = f"{rho[0]:g}" if rho.size and np.all(rho == rho[0]) else "matrix"
        return (
            f"{type(self).__name__}(spots={list(p['spots'])}, vols={list(p['vols'])}, "
            f"dividends={list(p['dividends'])}, correlation={rho_text}, rate={self.rate:g})"
        )

    def initial(self) -> np.ndarray:
        return self.spots.copy()

    def dividend_yields(self) -> np.ndarray:
        return self.dividends.copy()

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        dt = np.diff(times, prepend=0.0)
        # correlate the Brownian increments across assets, keeping the block's layout
        x = _correlate(z, self._chol)
        key = (self.vols.tobytes(), (self.rate - self.dividends).tobytes(), self.spots.tobytes(), times.tobytes())
        scale, drift, start, _ = _gbm_plan(key, times, self.vols, self.rate - self.dividends, np.log(self.spots))
        _log_paths(x, scale, drift, start)
        np.exp(x, out=x)
        return Simulated(s=x, step_var=(dt[:, None] * self.vols[None, :] ** 2)[None])


def _correlate(z: np.ndarray, chol: np.ndarray) -> np.ndarray:
    """``z @ chol.T``: the correlated increments. On a block laid out dates first with few
    assets, as whole-array multiplies and adds that keep the layout (and no threaded BLAS
    call, which on a busy machine waits on its threads); otherwise a matrix product."""
    k = chol.shape[0]
    if not (z.flags.f_contiguous and not z.flags.c_contiguous) or k > 4:
        return z @ chol.T
    zt = z.T  # (assets, dates, paths), C-contiguous
    xt = np.empty_like(zt)
    tmp = np.empty_like(zt[0])
    for a in range(k):
        np.multiply(zt[0], chol[a, 0], out=xt[a])
        for b in range(1, k):
            if chol[a, b] != 0.0:
                np.multiply(zt[b], chol[a, b], out=tmp)
                xt[a] += tmp
    return xt.T


def _correlation_factor(c: np.ndarray, d: int) -> np.ndarray:
    """A factor L with L L^T = c, after checking that c is a correlation matrix."""
    if c.shape != (d, d):
        raise ModelError(f"correlation has shape {c.shape}; expected ({d}, {d}) for {d} assets")
    if not np.all(np.isfinite(c)):
        raise ModelError("correlation has non-finite entries")
    asym = np.abs(c - c.T)
    if asym.max() > 1e-12:
        i, j = np.unravel_index(np.argmax(asym), c.shape)
        raise ModelError(
            f"correlation matrix is not symmetric: entry [{i}, {j}] = {c[i, j]!r} but [{j}, {i}] = {c[j, i]!r}; "
            "give each pair's correlation once, the same both ways"
        )
    if not np.allclose(np.diag(c), 1.0, atol=1e-12):
        raise ModelError(
            f"correlation matrix must have a unit diagonal; got {np.diag(c).tolist()!r} "
            "(an asset is perfectly correlated with itself; pass correlations, not covariances)"
        )
    if np.any(np.abs(c) > 1 + 1e-12):
        i, j = np.unravel_index(np.argmax(np.abs(c)), c.shape)
        raise ModelError(f"correlation entry [{i}, {j}] = {c[i, j]!r} is outside [-1, 1]")
    w, v = np.linalg.eigh(c)
    if w.min() < -1e-10:
        raise ModelError(
            f"correlation matrix is not positive semi-definite (smallest eigenvalue {w.min():.3g}); "
            "check the pairwise correlations for consistency"
        )
    # eigen-factor works for singular (perfectly correlated) matrices where Cholesky fails
    return v * np.sqrt(np.clip(w, 0.0, None))[None, :]
