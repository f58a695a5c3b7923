"""Products placed on a case's common grid, what their payoffs see, and their validated
present values.

A leg reads the shared simulated paths at its own dates through a read-only view (a payoff
must not write into paths other legs read); its cash flows are validated (shape, finite,
non-negative where the product says so, payment times) and discounted at the model's
short rate. A payoff that raises or returns something invalid is a
:class:`~limitcase.errors.PayoffError` for that check only.
"""

from __future__ import annotations

import math
from typing import Any, Callable, Sequence

import numpy as np

from .errors import NegativeAmount, ParamError, PayoffError
from .models.base import Model, Simulated
from .product import Cashflows, Observed, Product

__all__ = ["Leg", "present_values", "grid_of", "as_amounts"]


DATE_TOL = 1e-12
"""Dates of two products closer than this (in years, about 30 microseconds) are one date of
the common grid: the same date computed two ways (``start + k (T - start) / n`` against
``T``) differs in the last bits, and two grid points 2e-16 apart would put a step of that
length between them, on which the simulated asset moves by a few 1e-7 (an identity of the
two products then breaks on half the paths at a non-round maturity)."""


def grid_of(products: Sequence[Product]) -> np.ndarray:
    """The union of the products' observation dates, dates within :data:`DATE_TOL` merged
    (the first kept)."""
    dates = np.unique(np.concatenate([p.validated_dates() for p in products]))
    if dates.size < 2:
        return dates
    keep = [0]
    for i in range(1, dates.size):
        if dates[i] - dates[keep[-1]] > DATE_TOL:
            keep.append(i)
    return dates[keep] if len(keep) < dates.size else dates


def as_amounts(value: Any, what: str, n: int, *, integers: bool = False) -> np.ndarray:
    """``value`` (what a product's code returned) as an array of floats, or a
    :class:`PayoffError` naming ``what``, what it returned and what was expected.

    Numbers only: strings, ``None`` entries and other objects are refused (not cast); complex
    values are refused when any imaginary part is non-zero (a cast would drop it with only a
    warning); integer arrays are refused unless ``integers`` (payment times may be whole
    years), because money amounts come out of a payoff as floats and integer ones are almost
    always truncated (``astype(int)``, ``//``): compared with an untruncated reference they
    would read as a broken identity instead of the typing slip they are. Booleans (a digital
    paying 1) are exact and accepted.
    """
    expected = f"floats, shape ({n},) or ({n}, k)"
    if value is None:
        raise PayoffError(f"{what} returned None; expected {expected}")
    try:
        arr = np.asarray(value)
    except Exception as exc:  # ragged lists and the like
        raise PayoffError(f"{what} returned {type(value).__name__} that is not an array of numbers "
                          f"({type(exc).__name__}: {exc}); expected {expected}") from exc
    kind = arr.dtype.kind
    if kind == "f":
        return arr.astype(float, copy=False)
    if kind == "b":
        return arr.astype(float)
    if kind in "iu":
        if integers:
            return arr.astype(float)
        raise PayoffError(
            f"{what} returned integers (dtype {arr.dtype}, shape {arr.shape}); expected {expected}: "
            "amounts of money are floats, and whole numbers usually mean a truncation (astype(int), //); "
            "return floats (astype(float)) if the amounts are meant to be whole"
        )
    if kind == "c":
        imag = np.abs(arr.imag)
        if np.any(imag != 0):
            bad = int(np.count_nonzero(imag.reshape(arr.shape[0], -1).any(axis=1))) if arr.ndim else 1
            raise PayoffError(
                f"{what} returned complex numbers with a non-zero imaginary part (largest {float(imag.max()):.6g}, "
                f"on {bad} path{'s' if bad != 1 else ''}); expected {expected}"
            )
        return arr.real.astype(float)
    if kind == "O":
        flat = arr.reshape(-1)
        odd = [v for v in flat[:1000] if v is None or isinstance(v, (str, bytes))]
        if not odd:
            try:
                return arr.astype(float)
            except (TypeError, ValueError):
                odd = [v for v in flat if not isinstance(v, (int, float, np.number))][:1]
        sample = odd[0] if odd else None  # a cast would read None as NaN and "1.5" as a number
        raise PayoffError(
            f"{what} returned objects that are not numbers (e.g. {sample!r} of type {type(sample).__name__}, "
            f"shape {arr.shape}); expected {expected}"
        )
    sample = arr.reshape(-1)[0] if arr.size else ""
    raise PayoffError(
        f"{what} returned {('strings' if kind in 'US' else f'values of dtype {arr.dtype}')} "
        f"(e.g. {str(sample)!r}, shape {arr.shape}); expected {expected}"
    )


class Leg:
    """A product placed on the common grid."""

    def __init__(self, product: Product, grid: np.ndarray, model: Model) -> None:
        self.product = product
        self.name = type(product).__name__
        self.dates = product.validated_dates()
        self.idx = np.searchsorted(grid, self.dates - DATE_TOL)  # the grid date within DATE_TOL
        n = len(self.idx)
        full = n == len(grid)
        contiguous = n > 0 and np.all(np.diff(self.idx) == 1)
        self.sel: Any = slice(None) if full else (slice(self.idx[0], self.idx[-1] + 1) if contiguous else self.idx)
        if product.multi_asset:
            if product.n_assets != model.n_assets:
                raise ParamError(
                    f"{self.name} reads {product.n_assets} assets but the model "
                    f"{type(model).__name__} simulates {model.n_assets}"
                )
        elif model.n_assets != 1:
            raise ParamError(
                f"{self.name} is a single-asset product but the model simulates {model.n_assets} assets"
            )
        self.s0 = model.initial() if product.multi_asset else float(model.initial()[0])
        self.dividend = model.dividend_yields() if product.multi_asset else float(model.dividend_yields()[0])

    def observe(self, sim: Simulated, rate: float, uniforms: Callable[[], np.ndarray] | None = None) -> Observed:
        s = sim.s[:, self.sel, :]
        if not self.product.multi_asset:
            s = s[:, :, 0]
        s = s.view()
        s.flags.writeable = False  # a payoff must not write into shared paths
        idx = self.idx

        def step_var() -> np.ndarray:
            cum = np.cumsum(sim.step_var, axis=1)[:, idx, :]
            v = np.diff(cum, axis=1, prepend=0.0)
            return v if self.product.multi_asset else v[:, :, 0]

        def leg_uniforms() -> np.ndarray:
            u = uniforms()[:, idx, :]  # type: ignore[misc]
            u.flags.writeable = False
            return u if self.product.multi_asset else u[:, :, 0]

        return Observed(
            self.dates, s, self.s0, rate, step_var, self.dividend, leg_uniforms if uniforms is not None else None
        )


def present_values(leg: Leg, obs: Observed, rate: float, policy: Any) -> np.ndarray:
    """Per-path present value of one product's cash flows, validated."""
    name = leg.name
    n = obs.paths
    try:
        if policy is not None:
            out: Any = policy.cashflows(leg.product, obs)
        else:
            out = leg.product.payoff(obs)
    except PayoffError:
        raise
    except Exception as exc:  # the product's own code failed: report it, keep the run going
        raise PayoffError(f"{name}.payoff raised {type(exc).__name__}: {exc}") from exc
    if out is None:
        raise PayoffError(
            f"{name}.payoff returned None; expected an array of floats of shape ({n},) paid at the last date, "
            f"({n}, {len(obs.t)}) paid at each date, or Cashflows (a missing 'return'?)"
        )
    if isinstance(out, Cashflows):
        amount = as_amounts(out.amount, f"{name}.payoff (Cashflows.amount)", n)
        if amount.ndim not in (1, 2) or amount.shape[0] != n:
            raise PayoffError(
                f"{name}.payoff returned Cashflows.amount of shape {amount.shape}; expected ({n},) or ({n}, k)"
            )
        try:
            time = np.broadcast_to(as_amounts(out.time, f"{name}.payoff (Cashflows.time)", n, integers=True),
                                   amount.shape)
        except ValueError as exc:
            raise PayoffError(f"{name}.payoff: Cashflows.time does not broadcast to amount {amount.shape}") from exc
        if not np.all(np.isfinite(time)) or np.any(time < 0):
            raise PayoffError(f"{name}.payoff: payment times must be finite and >= 0")
        disc = np.exp(-rate * time)
    else:
        amount = as_amounts(out, f"{name}.payoff", n)
        if amount.shape == (n,):
            disc = math.exp(-rate * obs.t[-1])
        elif amount.shape == (n, len(obs.t)):
            disc = np.exp(-rate * obs.t)[None, :]
        else:
            raise PayoffError(
                f"{name}.payoff returned shape {amount.shape}; expected ({n},) paid at the last date, "
                f"({n}, {len(obs.t)}) paid at each date, or Cashflows"
            )
    # the smallest and largest amounts (NaN propagates): one pass each, and together they say
    # whether every amount is finite and whether any is negative
    lo = float(np.minimum.reduce(amount, axis=None)) if amount.size else 0.0
    hi = float(np.maximum.reduce(amount, axis=None)) if amount.size else 0.0
    if not (math.isfinite(lo) and math.isfinite(hi)):
        bad = ~np.isfinite(amount)
        rows = np.flatnonzero(bad.reshape(n, -1).any(axis=1))
        raise PayoffError(
            f"{name}.payoff returned NaN or inf on {rows.size} of {n} paths (first at path {rows[0]})"
        )
    if leg.product.nonnegative and lo < -1e-12:
        rows = np.flatnonzero((amount < -1e-12).reshape(n, -1).any(axis=1))
        raise NegativeAmount(
            f"{name} pays a negative amount ({amount.min():.6g}) on {rows.size} of {n} paths (first at path "
            f"{rows[0]} of its block) although it is declared non-negative; an option cannot "
            "(set nonnegative = False on products that can)"
        )
    pv = amount * disc
    return pv if pv.ndim == 1 else pv.sum(axis=1)
