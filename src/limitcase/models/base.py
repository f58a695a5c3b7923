"""The model base class: bounded parameters, a date grid in, simulated prices out.

How to subclass: declare ``Param`` attributes (at least ``rate``), give ``n_assets`` and
``normals_per_step``, fill ``initial()``, ``dividend_yields()`` and ``_simulate(times, z, rng)``.
The engine hands ``_simulate`` a block of standard normals ``z`` of shape
``(paths, steps, normals_per_step)`` (plain pseudo-random, antithetic or quasi-random: the
model does not know) and a ``Generator`` for any other randomness it needs (jump counts).
Keeping the source of randomness apart from the model is what lets the engine swap samplers
and keep common random numbers across the products of one case.

The engine's ``z`` is laid out dates first (Fortran order, the transpose of a C-contiguous
``(normals_per_step, steps, paths)`` array: :func:`limitcase.sampling.normals_buffer`), so
``z[:, j, i]`` (one date of one normal, every path) is contiguous: operate date by date on
whole columns, or on the whole array. Index ``z`` rather than reshaping it (a reshape of a
Fortran-ordered array may be a copy). Other callers (audits, tests) may pass any layout.
"""

from __future__ import annotations

import inspect
import sys
from dataclasses import dataclass
from typing import Any, ClassVar

import numpy as np

from ..errors import DeclarationError, ModelError, NoReference
from ..params import Parametrised

__all__ = ["Model", "Simulated", "Degeneration", "declared_at", "checked_normals_per_step"]


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
        if not cls.abstract:
            _check_declaration(cls)

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
        if times.ndim != 1 or not _increasing(times):
            raise ModelError(
                f"{type(self).__name__}.simulate needs increasing times > 0; got {times[:6]!r}"
            )
        k = checked_normals_per_step(self)
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

    def european_price(self, kind: str, strike: float, maturity: float) -> float:
        """A trusted price today of a European payoff of the (first) asset's ``S(T)``,
        computed from the model's parameters alone (a closed form, with its published
        source, or the model's own surface), never from its simulation. ``kind`` is
        ``"call"``, ``"put"``, ``"cash_call"``/``"cash_put"`` (pay 1 if ``S(T)`` is above /
        below the strike) or ``"asset_call"``/``"asset_put"`` (pay ``S(T)``); raise
        :class:`~limitcase.errors.NoReference` for a kind the model has no price for.

        Optional. The audits' steps and degenerations checks use the call; the catalogue's
        European products use every kind (before the Fourier price of a stated
        :meth:`characteristic_function`). Default: none."""
        raise NoReference(f"{type(self).__name__} states no european_price(kind, strike, maturity)")


_GRIDS: set[bytes] = set()


def _increasing(times: np.ndarray) -> bool:
    """Whether the 1-d ``times`` are increasing and > 0; grids seen before are remembered
    (an engine simulates the same grid block after block)."""
    key = times.tobytes()
    if key in _GRIDS:
        return True
    if times.size == 0 or times[0] <= 0 or np.any(np.diff(times) <= 0):
        return False
    if len(_GRIDS) > 1024:
        _GRIDS.clear()
    _GRIDS.add(key)
    return True


def declared_at(cls: type) -> str:
    """``file:line`` where ``cls`` is defined (``file`` alone if the line is unknown), for
    messages about a declaration."""
    module = sys.modules.get(cls.__module__)
    path = getattr(module, "__file__", None) or cls.__module__
    try:
        line = inspect.getsourcelines(cls)[1]
    except (OSError, TypeError):
        return str(path)
    return f"{path}:{line}"


def _declaration_error(cls: type, what: str, fix: str) -> DeclarationError:
    return DeclarationError(f"{declared_at(cls)}: model class {cls.__qualname__}: {what}; {fix}")


def _overrides(cls: type, name: str) -> bool:
    return any(name in vars(k) for k in cls.__mro__ if k is not Model and issubclass(k, Model))


def _check_declaration(cls: type) -> None:
    """Refuse, at class definition, a model declaration the engine cannot use, naming the file,
    the class, the parameter and the fix (rather than failing deep inside a run)."""
    specs = cls._param_specs  # type: ignore[attr-defined]
    # a default outside its range is refused by Parametrised (DeclarationError)
    if "rate" not in specs and not _overrides(cls, "short_rate"):
        raise _declaration_error(
            cls, "no 'rate' parameter",
            "declare rate = Param(0.05, low=-1.0, high=1.0, doc=\"continuously compounded short rate\"): "
            "the engine discounts with it and the martingale audit tests against it")
    for hook in ("initial", "dividend_yields", "_simulate"):
        if not _overrides(cls, hook):
            raise _declaration_error(
                cls, f"{hook}() is not defined",
                f"define {hook}(self{', times, z, rng' if hook == '_simulate' else ''}) "
                "(see DEVELOPERS.md, 'Adding a model'), or set abstract = True on a shared base")
        if not callable(getattr(cls, hook)):
            raise _declaration_error(cls, f"{hook} is not a method", f"define it as def {hook}(self, ...)")
    nps = getattr(cls, "normals_per_step")
    if not callable(nps):
        raise _declaration_error(
            cls, f"normals_per_step = {nps!r} is not a method",
            f"write def normals_per_step(self) -> int: return {nps!r}")
    n = vars(cls).get("n_assets", None)
    if n is not None and not isinstance(n, property):
        if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1:
            raise _declaration_error(cls, f"n_assets = {n!r}", "n_assets must be a whole number >= 1")
    degs = vars(cls).get("degenerations", ())
    if not isinstance(degs, (tuple, list)):
        raise _declaration_error(cls, "degenerations is not a tuple", "write degenerations = (Degeneration(...), ...)")
    accepted = set(specs)  # the Params, and the named arguments of an own constructor
    try:
        accepted |= {p.name for p in inspect.signature(cls.__init__).parameters.values()
                     if p.name != "self" and p.kind not in (p.VAR_KEYWORD, p.VAR_POSITIONAL)}
    except (TypeError, ValueError):
        pass
    for d in degs:
        if not isinstance(d, Degeneration):
            raise _declaration_error(cls, f"degenerations holds {d!r}",
                                     "each entry must be Degeneration(name, changes, becomes, note)")
        unknown = sorted(set(d.changes) - accepted)
        if unknown:
            raise _declaration_error(
                cls, f"degeneration {d.name!r} changes {unknown[0]!r}, which is not a parameter",
                f"use one of its parameters: {', '.join(sorted(specs)) or 'none'}")
        if not callable(d.becomes):
            raise _declaration_error(cls, f"degeneration {d.name!r}: becomes={d.becomes!r} is not callable",
                                     "give a function of the model at its limit returning the model it becomes")


def checked_normals_per_step(model: Model) -> int:
    """``model.normals_per_step()`` checked to be a whole number >= 1 (naming the class and
    where it is declared when it is not)."""
    k = model.normals_per_step()
    if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1:
        raise _declaration_error(type(model), f"normals_per_step() returned {k!r}",
                                 "return a whole number >= 1 (the normals one step of one path consumes)")
    return int(k)
