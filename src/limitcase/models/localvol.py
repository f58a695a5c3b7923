"""Local volatility (Dupire 1994) on an arbitrage-free SVI surface, simulated by log-Euler.

dS/S = (r - q) dt + sigma_loc(t, S) dW, with sigma_loc from
:meth:`limitcase.volsurface.VarianceSurface.local_variance`.

Each interval of the engine's date grid is cut into ``substeps`` equal steps; on a step of
length ``h`` from time ``t`` the scheme is

    log S' = log S + (r - q - sigma^2/2) h + sigma sqrt(h) Z,   sigma = sigma_loc(t + h/2, S),

the local volatility frozen at the step's start price and mid time (mid time: at ``t = 0``
Dupire's formula is singular away from the money). Given the step's start, ``S'`` is
log-normal with mean ``S exp((r - q) h)``, so the discounted price is a martingale for any
step (the martingale audit must see no drift). The scheme's error is in the law of the
path, of weak order 1 in ``h`` (Kloeden and Platen 1992, Theorem 14.5.2, for the Euler
scheme of smooth coefficients): ``exact = False`` and ``weak_order = 1`` tell the time-step
audit to step through ``substeps``. On a flat surface the local volatility is constant and
the log-Euler step is the exact Black-Scholes transition: that is the model's degeneration.

``substeps`` normals per grid interval; ``z[:, j, k]`` drives substep ``k`` of interval ``j``.
"""

from __future__ import annotations

import math
from typing import Any, ClassVar

import numpy as np

from ..errors import ParamError
from ..params import Param
from ..volsurface import VarianceSurface
from .base import Degeneration, Model, Simulated
from .gbm import BlackScholes

__all__ = ["LocalVol"]


def _flat_black_scholes(m: "LocalVol") -> BlackScholes:
    return BlackScholes(spot=m.spot, rate=m.rate, dividend=m.dividend, vol=m.surface.atm_vol())


class LocalVol(Model):
    """One asset under Dupire local volatility built from a :class:`VarianceSurface`.

    Parameters
    ----------
    surface
        The implied total-variance surface (keyword; default: a flat 20% surface at the
        model's spot, rate and dividend). Its market (spot, rate, dividend) is replaced
        by the model's, so the log-moneyness always refers to the simulated forward.
    spot, rate, dividend
        Price today, short rate, continuous dividend yield (flat).
    substeps
        Log-Euler steps per interval of the date grid.
    """

    spot = Param(100.0, low=0.0, low_open=True, doc="price today")
    rate = Param(0.05, low=-1.0, high=1.0, doc="continuously compounded short rate")
    dividend = Param(0.02, low=-1.0, high=1.0, doc="continuous dividend yield")
    substeps = Param(8, low=1, high=4096, integer=True, doc="log-Euler steps per interval of the date grid")

    exact: ClassVar[bool] = False
    weak_order: ClassVar[float] = 1.0
    degenerations = (
        Degeneration(
            "flat_surface",
            {"surface": lambda m: m.surface.flattened()},
            becomes=_flat_black_scholes,
            note="a flat implied-volatility surface has a constant local volatility: Black-Scholes at that "
                 "volatility, whose transition the log-Euler step reproduces exactly",
        ),
    )

    def __init__(self, surface: VarianceSurface | None = None, **values: Any) -> None:
        super().__init__(**values)
        if surface is None:
            surface = VarianceSurface.flat(0.2, self.spot, self.rate, self.dividend)
        if not isinstance(surface, VarianceSurface):
            raise ParamError(f"LocalVol: surface={surface!r} is not a VarianceSurface "
                             "(build one with limitcase.volsurface.surface_from_quotes)")
        if (surface.spot, surface.rate, surface.dividend) != (self.spot, self.rate, self.dividend):
            surface = surface.with_market(self.spot, self.rate, self.dividend)
        object.__setattr__(self, "surface", surface)

    # a surface is not a bounded number: carried beside the Params, like MultiBlackScholes' arrays
    def params(self) -> dict[str, Any]:
        out = super().params()
        out["surface"] = self.surface
        return out

    def replace(self, **changes: Any) -> "LocalVol":
        values = super().params()
        surface = changes.pop("surface", self.surface)
        values.update(changes)
        return type(self)(surface=surface, **values)

    def __eq__(self, other: object) -> bool:
        return type(self) is type(other) and self.params() == other.params()  # type: ignore[union-attr]

    def __hash__(self) -> int:
        return hash((type(self).__name__, tuple(sorted((k, v) for k, v in super().params().items())), self.surface))

    def __repr__(self) -> str:
        p = super().params()
        inner = ", ".join(f"{k}={v!r}" for k, v in p.items())
        return f"LocalVol({inner}, surface={self.surface!r})"

    def normals_per_step(self) -> int:
        return int(self.substeps)

    def initial(self) -> np.ndarray:
        return np.array([self.spot])

    def dividend_yields(self) -> np.ndarray:
        return np.array([self.dividend])

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        m = int(self.substeps)
        n_paths = z.shape[0]
        dt = np.diff(times, prepend=0.0)
        mu = self.rate - self.dividend
        x = np.full(n_paths, math.log(self.spot))
        log_fwd0 = math.log(self.spot)
        out = np.empty((n_paths, times.size, 1))
        var = np.empty((n_paths, times.size, 1))
        t = 0.0
        for j in range(times.size):
            h = dt[j] / m
            acc = np.zeros(n_paths)
            for k in range(m):
                tm = t + 0.5 * h
                lv = self.surface.local_variance(x - (log_fwd0 + mu * t), tm)
                x += (mu - 0.5 * lv) * h + np.sqrt(lv * h) * z[:, j, k]
                acc += lv * h
                t += h
            t = float(times[j])  # no drift of the clock from summing substeps
            out[:, j, 0] = np.exp(x)
            var[:, j, 0] = acc
        return Simulated(s=out, step_var=var)
