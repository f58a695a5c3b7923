"""The product base class and what a payoff sees and returns.

How to subclass (the recipe ``tests/test_product_recipe.py`` runs):

1. Declare parameters as class attributes, ``strike = Param(100.0, low=0.0, doc="...")``.
2. Fill ``dates(self)``: the observation times in years, increasing, all > 0.
3. Fill ``payoff(self, obs)`` for a product settled by a formula of the observed values, or
   ``exercise_dates(self)`` and ``exercise_value(self, obs)`` for early exercise (the engine
   then finds the exercise policy by Longstaff-Schwartz regression).
4. Optionally ``reference(self, model)``: a trusted price for when this product is the base
   case of somebody else's reduction (a closed form from ``limitcase.references``).
5. Declare ``reductions`` and ``relations`` (see :mod:`limitcase.reduce`).

Shapes. A single-asset product sees ``obs.s`` of shape ``(paths, dates)``; a product with
``multi_asset = True`` sees ``(paths, dates, assets)`` (even when it has one asset). ``payoff`` returns
either an array ``(paths,)`` paid at the last date, an array ``(paths, dates)`` of amounts
paid at each observation date, or a :class:`Cashflows` with explicit payment times. The
engine discounts; a payoff never does.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import TYPE_CHECKING, Any, ClassVar

import numpy as np

from .errors import DeclarationError, LimitcaseError, NoReference, ParamError, PayoffError
from .params import Parametrised

if TYPE_CHECKING:  # pragma: no cover
    from .models.base import Model
    from .reduce import Reduction, Relation

__all__ = ["Product", "Observed", "Cashflows", "validate_declarations", "running"]


@dataclass(frozen=True, slots=True)
class Cashflows:
    """Amounts and their payment times, for payoffs not settled at the last date.

    ``amount`` has shape ``(paths,)`` or ``(paths, k)``; ``time`` broadcasts against it
    (a scalar, ``(k,)``, ``(paths,)`` or ``(paths, k)``), in years from today.
    """

    amount: np.ndarray
    time: Any


def running(ufunc: np.ufunc, x: Any) -> np.ndarray:
    """``ufunc.accumulate(x, axis=1)``: the running product, sum, maximum, ... over the dates
    of a ``(paths, dates, ...)`` array, the same numbers computed fast whatever its layout.

    The engine's paths are laid out dates first (:func:`limitcase.sampling.normals_buffer`),
    and so are arrays a payoff derives from ``obs.s`` elementwise; numpy accumulates over a
    middle axis path by path, which on that layout is three times slower than on a
    paths-first one (measured: ``np.cumprod`` over 52 dates of 4096 paths, 10.8 against
    3.5 ns per path-date). Here, on a dates-first array, each date is one whole-column
    operation with the previous date's result (about 0.3 ns per path-date); other arrays go
    to ``ufunc.accumulate``. Use it in payoffs for running products of survival indicators
    (``running(np.multiply, stay)``) or running extremes (``running(np.maximum, s)``).
    """
    a = np.asarray(x)
    if a.ndim < 2 or a.shape[0] < 64 or abs(a.strides[1]) <= abs(a.strides[0]):
        return ufunc.accumulate(a, axis=1)
    out = np.empty_like(a, dtype=np.result_type(ufunc.accumulate(a[:1, :1], axis=1)))
    cols, src = list(out.swapaxes(0, 1)), list(a.swapaxes(0, 1))
    np.copyto(cols[0], src[0])
    for prev, col, new in zip(cols[:-1], cols[1:], src[1:]):
        ufunc(prev, new, out=col)
    return out


class Observed:
    """The simulated values a product's payoff reads, at the product's own dates.

    Attributes
    ----------
    t : ndarray, shape (dates,)
        The product's observation times.
    s : ndarray, shape (paths, dates) or (paths, dates, assets)
        Simulated prices at those times, read-only. Laid out dates first (``s[:, j]`` is
        contiguous): reductions over the dates (``s.mean(axis=1)``, ``s.max(axis=1)``) are
        fast; for running products or extremes over the dates use :func:`running` rather
        than ``np.cumprod(..., axis=1)`` (three times faster on this layout).
    s0 : float or ndarray (assets,)
        Prices today.
    rate : float
        The model's continuously compounded short rate (for products whose terms use it).
    dividend : float or ndarray (assets,)
        The model's continuous dividend yield(s).
    step_var : ndarray, broadcastable to ``s``
        Integrated variance of log-price over each interval ``(t[j-1], t[j]]`` (with
        ``t[-1] = 0``): what a Brownian-bridge correction needs between dates.
    uniforms : ndarray, shape like ``s``
        Independent U(0, 1) draws, one per path, date (and asset), drawn on first use from
        the path block's own stream and shared by every product of the case (so sampling
        the extreme of a Brownian bridge between dates keeps common random numbers).
    """

    __slots__ = ("t", "s", "s0", "rate", "dividend", "_step_var_fn", "_uniforms_fn", "__dict__")

    def __init__(
        self,
        t: np.ndarray,
        s: np.ndarray,
        s0: Any,
        rate: float,
        step_var_fn: Any,
        dividend: Any = 0.0,
        uniforms_fn: Any = None,
    ) -> None:
        self.t = t
        self.s = s
        self.s0 = s0
        self.rate = rate
        self.dividend = dividend
        self._step_var_fn = step_var_fn
        self._uniforms_fn = uniforms_fn

    @cached_property
    def step_var(self) -> np.ndarray:
        return self._step_var_fn()

    @cached_property
    def uniforms(self) -> np.ndarray:
        if self._uniforms_fn is None:
            raise AttributeError("uniforms are not available outside the engine")
        return self._uniforms_fn()

    @property
    def paths(self) -> int:
        return self.s.shape[0]


class Product(Parametrised):
    """Base of every product: declared parameters, dates and a vectorised payoff.

    Class attributes a subclass may set:

    ``multi_asset``
        True when the payoff reads several underlyings; then ``n_assets`` (an attribute or a
        property) says how many, and ``obs.s`` has an asset axis.
    ``nonnegative``
        Whether every cash flow must be >= 0 (an option). A product declared so that pays a
        negative amount fails the check that priced it (:class:`~limitcase.errors.NegativeAmount`).
    ``abstract``
        True on a shared base that ``check`` must not collect.
    ``reductions`` / ``relations``
        Declared limits and must-hold relations (:mod:`limitcase.reduce`).
    ``end_jumps``
        Parameter ends where the price jumps (:class:`limitcase.ends.EndJump`): continuity
        into them is not checked by ``check --ends``.
    """

    multi_asset: ClassVar[bool] = False
    n_assets: int = 1
    nonnegative: ClassVar[bool] = True
    abstract: ClassVar[bool] = True
    reductions: ClassVar[tuple["Reduction", ...]] = ()
    relations: ClassVar[tuple["Relation", ...]] = ()
    end_jumps: ClassVar[tuple[Any, ...]] = ()

    def __init_subclass__(cls, **kwargs: Any) -> None:
        super().__init_subclass__(**kwargs)
        if "abstract" not in vars(cls):
            cls.abstract = False
        if not cls.abstract:  # a shared base may declare for parameters its subclasses add
            validate_declarations(cls)

    # --- hooks -----------------------------------------------------------------------
    def dates(self) -> np.ndarray:
        """Observation times in years (increasing, > 0). Every product must fill this."""
        raise NotImplementedError(f"{type(self).__name__} does not define dates()")

    def payoff(self, obs: Observed) -> np.ndarray | Cashflows:
        """Cash flows from the observed values (see the module docstring for shapes)."""
        raise NotImplementedError(
            f"{type(self).__name__} defines neither payoff() nor exercise_value()"
        )

    def exercise_dates(self) -> np.ndarray:
        """Times at which the holder may exercise; empty for a product without that right."""
        return np.empty(0)

    def exercise_value(self, obs: Observed) -> np.ndarray:
        """Amount received on exercise at each exercise date, shape ``(paths, n_exercise)``."""
        raise NotImplementedError(f"{type(self).__name__} has exercise dates but no exercise_value()")

    def regression_state(self, obs: Observed, j: int) -> np.ndarray:
        """State variables, shape ``(paths, k)``, on which the continuation value at
        exercise date ``j`` is regressed. Default: the price at that date over today's."""
        k = int(np.searchsorted(obs.t, self.exercise_dates()[j]))
        s = obs.s[:, k] if obs.s.ndim == 2 else obs.s[:, k, :]
        s0 = np.asarray(obs.s0, dtype=float)
        x = s / s0
        return x.reshape(x.shape[0], -1)

    def hold_value(self, obs: Observed, j: int) -> np.ndarray | None:
        """Value at exercise date ``j`` of holding the right to the last exercise date, per
        path, shape ``(paths,)``, from what is known at that date only (the European
        option on the remaining life); ``None`` (the default) when the product cannot say.

        The Longstaff-Schwartz policy (:mod:`limitcase.exercise`) puts it in its regression
        basis and, where the pilot paths do not contradict it, never exercises below it."""
        return None

    def reference(self, model: "Model") -> float:
        """A trusted price of this product under ``model`` (closed form or numerical)."""
        raise NoReference(f"{type(self).__name__} has no reference price")

    def reference_source(self, model: "Model | None" = None) -> str:
        """Where :meth:`reference` comes from, for the report (override with the formula's
        name); given the ``model``, the method used under it (a closed form or the Fourier
        price from the model's characteristic function)."""
        return f"{type(self).__name__}.reference"

    def control_variates(self, model: "Model") -> tuple[tuple["Product", float], ...]:
        """Products whose exact price under ``model`` is known, highly correlated with this
        one: ``((product, exact_price), ...)``. Used by variance reduction; default none."""
        return ()

    def formula(self) -> Any:
        """The payoff as a sympy expression of the observed values, where the product can
        state one (for the dossier and the symbolic cross-check); default ``None``."""
        return None

    def scenario(self) -> "Model":
        """The model the shipped checks use for this product (override per family)."""
        from .models.gbm import BlackScholes

        return BlackScholes()

    # --- derived ---------------------------------------------------------------------
    @property
    def early_exercise(self) -> bool:
        return len(self.exercise_dates()) > 0

    def validated_dates(self) -> np.ndarray:
        """``dates()`` as a float array, checked increasing and positive."""
        name = type(self).__name__
        try:
            raw = self.dates()
        except LimitcaseError:
            raise
        except Exception as exc:  # the product's own code failed: an error for its checks only
            raise PayoffError(f"{name}.dates() raised {type(exc).__name__}: {exc}{_where(exc)}") from exc
        if raw is None:
            raise ParamError(f"{name}.dates() returned None; expected increasing times in years, > 0 (a missing 'return'?)")
        try:
            d = np.asarray(raw, dtype=float).reshape(-1)
        except (TypeError, ValueError) as exc:
            raise ParamError(f"{name}.dates() did not return numbers: {exc}") from exc
        if d.size == 0:
            raise ParamError(f"{name}.dates() is empty; a product needs at least one date")
        if not np.all(np.isfinite(d)) or d[0] <= 0.0 or np.any(np.diff(d) <= 0.0):
            raise ParamError(
                f"{name}.dates() must be finite, > 0 and strictly increasing; got {d[:6]!r}"
            )
        try:
            ex = np.asarray(self.exercise_dates(), dtype=float).reshape(-1)
        except LimitcaseError:
            raise
        except Exception as exc:
            raise PayoffError(f"{name}.exercise_dates() raised {type(exc).__name__}: {exc}{_where(exc)}") from exc
        if ex.size and not np.all(np.isin(ex, d)):
            raise ParamError(f"{name}.exercise_dates() must be a subset of dates()")
        return d

    def label(self) -> str:
        """A short label: class name and the parameters that differ from the defaults."""
        specs = type(self).param_specs()
        changed = {k: v for k, v in self.params().items() if v != specs[k].validate(specs[k].default)}
        if not changed:
            return type(self).__name__
        inner = ", ".join(f"{k}={_fmt(v)}" for k, v in changed.items())
        return f"{type(self).__name__}({inner})"


def validate_declarations(cls: type) -> None:
    """Validate a product class's ``reductions`` and ``relations`` when it is defined.

    Each declaration checks itself (``validate_on`` of :class:`limitcase.reduce.Reduction` and
    :class:`limitcase.reduce.Relation`: parameters that exist, a direction of +1 or -1, a side
    of ``>=`` or ``<=``, ...); then no two checks may share a name. Raises :class:`DeclarationError` naming the class and the
    declaration, with a close-match suggestion for a misspelt parameter.
    """
    seen: dict[str, str] = {}
    for attr in ("reductions", "relations", "end_jumps"):
        declared = getattr(cls, attr)
        if isinstance(declared, (str, bytes)) or not isinstance(declared, (tuple, list)):
            raise DeclarationError(f"{cls.__name__}.{attr} = {declared!r}; give a tuple of declarations")
        for i, decl in enumerate(declared):
            kind = getattr(decl, "declaration_kind", None)
            if kind is None and attr == "relations" and callable(getattr(decl, "checks", None)):
                continue  # a relation of the user's own, not derived from Relation: nothing to check
            if kind is None or not callable(getattr(decl, "validate_on", None)):
                raise DeclarationError(
                    f"{cls.__name__}.{attr}[{i}] is {decl!r}, not a declaration; use Reduction(...) in "
                    "reductions, Identity, Monotone, Convex, Bound or a Relation subclass in relations and "
                    "EndJump(...) in end_jumps"
                )
            if kind != attr:
                raise DeclarationError(
                    f"{cls.__name__}.{attr}[{i}] is a {type(decl).__name__}, which belongs in {kind}"
                )
            decl.validate_on(cls)
            name = decl.case_name
            if not name:
                continue
            if name in seen:
                raise DeclarationError(
                    f"{cls.__name__}: two checks are named {name!r} ({seen[name]} and {decl.describe()}); "
                    "give each its own name"
                )
            seen[name] = decl.describe()


def _where(exc: BaseException) -> str:
    """`` (file:line)`` of the innermost frame of the exception's traceback, or ``""``."""
    import traceback

    frames = traceback.extract_tb(exc.__traceback__)
    return f" ({frames[-1].filename}:{frames[-1].lineno})" if frames else ""


def _fmt(v: Any) -> str:
    if isinstance(v, float):
        return "inf" if v == np.inf else f"{v:g}"
    return repr(v)
