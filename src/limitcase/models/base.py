"""The model base class: bounded parameters, a date grid in, simulated prices out.

How to subclass: declare ``Param`` attributes (at least ``rate``), give ``n_assets`` and
``normals_per_step``, fill ``initial()``, ``dividend_yields()`` and ``_simulate(times, z, rng)``.
The engine hands ``_simulate`` a block of standard normals ``z`` of shape
``(paths, steps, normals_per_step)`` (plain pseudo-random, antithetic or quasi-random: the
model does not know) and a ``Generator`` for any other randomness it needs (jump counts).
Keeping the source of randomness apart from the model is what lets the engine swap samplers
and keep common random numbers across the products of one case.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from ..errors import ModelError, NoReference
from ..params import Parametrised

__all__ = ["Model", "Simulated", "Degeneration"]


@dataclass(frozen=True, slots=True)
class Simulated:
    """Simulated prices on a grid.

    ``s`` has shape ``(paths, steps, assets)``; ``step_var`` is the integrated variance of
    log-price over each step, broadcastable to ``s`` (``(1, steps, assets)`` for a model with
    deterministic volatility).
    """

    s: np.ndarray
    step_var: np.ndarray


@dataclass(frozen=True, slots=True)
class Degeneration:
    """A model's own degenerate case: parameter changes under which it becomes another
    model with a trusted price (vol-of-vol -> 0 makes Heston Black-Scholes)."""

    name: str
    changes: dict[str, Any]
    becomes: Any  # Callable[[Model], Model]
    note: str = ""


class Model(Parametrised):
    """Base of every model of the underlying(s)."""

    abstract: ClassVar[bool] = True
    n_assets: int = 1
    exact: ClassVar[bool] = True
    """Whether the transition between any two dates is simulated without discretisation
    bias (the time-step audit then expects no step dependence)."""
    degenerations: ClassVar[tuple[Degeneration, ...]] = ()

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        if "abstract" not in vars(cls):
            cls.abstract = False

    # hooks
    def normals_per_step(self) -> int:
        """How many standard normals the model consumes per path and time step."""
        return self.n_assets

    def initial(self) -> np.ndarray:
        """Prices today, shape ``(assets,)``."""
        raise NotImplementedError

    def dividend_yields(self) -> np.ndarray:
        """Continuous dividend yields, shape ``(assets,)``."""
        raise NotImplementedError

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        raise NotImplementedError

    # public
    @property
    def short_rate(self) -> float:
        return float(self.rate)  # type: ignore[attr-defined]

    def forward(self, t: Any) -> np.ndarray:
        """Forward prices ``S0 exp((r - q) t)``, shape ``(len(t), assets)``: what the
        martingale audit compares discounted simulated prices against."""
        t = np.asarray(t, dtype=float).reshape(-1, 1)
        return self.initial()[None, :] * np.exp((self.short_rate - self.dividend_yields()[None, :]) * t)

    def simulate(self, times: Any, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        """Simulate prices at ``times`` from the normals ``z`` (shape
        ``(paths, len(times), normals_per_step())``); ``z`` may be overwritten."""
        times = np.asarray(times, dtype=float)
        if times.ndim != 1 or times.size == 0 or times[0] <= 0 or np.any(np.diff(times) <= 0):
            raise ModelError(
                f"{type(self).__name__}.simulate needs increasing times > 0; got {times[:6]!r}"
            )
        k = self.normals_per_step()
        if z.ndim != 3 or z.shape[1] != times.size or z.shape[2] != k:
            raise ModelError(
                f"{type(self).__name__}.simulate: normals of shape {z.shape} do not match "
                f"(paths, {times.size}, {k})"
            )
        return self._simulate(times, z, rng)

    def characteristic_function(self, u: Any, t: float) -> np.ndarray:
        r"""The characteristic function of the log-price, :math:`\mathbb E[e^{iu\ln S_t}]`,
        under the pricing measure, for a complex array ``u`` and a time ``t > 0``.

        Optional, for one-asset models. A model that states it gets trusted prices of every
        European payoff of :math:`S_T` (calls, puts, digitals, forwards) by the Fourier
        method of :func:`limitcase.references.fourier_price`, computed from its parameters
        alone, not from its simulation. It must hold for complex ``u`` with
        :math:`-1 \le \operatorname{Im} u \le 0` (moments of order 0 to 1 of
        :math:`S_t`) and return an array of the shape of ``u``; :math:`\varphi(-i)` must be
        the forward :math:`S_0e^{(r-q)t}`. The default raises NoReference: the model has none.
        """
        raise NoReference(
            f"{type(self).__name__} does not state the characteristic function of its log-price; "
            f"define characteristic_function(u, t) returning E[exp(i u log S_t)] to get Fourier references"
        )

    def label(self) -> str:
        return repr(self)
