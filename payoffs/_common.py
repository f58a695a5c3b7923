"""Helpers shared by the catalogue: the Black-Scholes inputs of a model, today's market
of any one-asset model, the reference of a payoff of S(T) under any model that has one,
evenly spaced dates, and a product's own closed form as a check."""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from limitcase import Reduction
from limitcase.errors import NoReference, ParamError
from limitcase.models import BlackScholes, Model
from limitcase.references import asset_or_nothing, black_scholes, cash_or_nothing
from limitcase.references.fourier import FOURIER_KINDS, FOURIER_METHOD, fourier_price


def bs_inputs(model: Model, product: object) -> tuple[float, float, float, float]:
    """``(spot, rate, dividend, vol)`` of a one-asset Black-Scholes model, or NoReference."""
    if not isinstance(model, BlackScholes):
        raise NoReference(
            f"{type(product).__name__} has a closed form under BlackScholes only, not {type(model).__name__}"
        )
    return model.spot, model.rate, model.dividend, model.vol


def market(model: Model) -> tuple[float, float, float]:
    """``(spot, rate, dividend)`` today of a one-asset model (any model, not only
    Black-Scholes): what model-free bounds such as ``S0 exp(-qT)`` need."""
    return float(model.initial()[0]), model.short_rate, float(model.dividend_yields()[0])


TERMINAL_KINDS = tuple(k for k in FOURIER_KINDS if k != "forward")
"""Payoffs of S(T) with a reference under any model that has one: ``call``, ``put``,
``cash_call`` (1 if S(T) > K), ``cash_put``, ``asset_call`` (S(T) if S(T) > K), ``asset_put``."""

BLACK_SCHOLES = "Black-Scholes"
SURFACE = "the model's own European prices (implied surface)"


def _states_charfn(model: Model) -> bool:
    return type(model).characteristic_function is not Model.characteristic_function


def _closed_form(model: Model) -> bool:
    """Black-Scholes, and not a subclass that states a characteristic function of its own."""
    return (isinstance(model, BlackScholes)
            and type(model).characteristic_function is BlackScholes.characteristic_function)


def terminal_method(model: Model, product: object) -> str:
    """How :func:`terminal_price` prices under ``model``: ``"Black-Scholes"`` (closed form)
    or ``"Fourier (Lewis 2001)"`` (the model's characteristic function); NoReference, with
    the reason, under a model that has neither."""
    if _closed_form(model):
        return BLACK_SCHOLES
    name = type(product).__name__
    if model.n_assets != 1:
        raise NoReference(
            f"{name} is priced on one asset; {type(model).__name__} has {model.n_assets}"
        )
    if type(model).european_price is not Model.european_price:
        return SURFACE
    if not _states_charfn(model):
        raise NoReference(
            f"{name} has a reference under BlackScholes (closed form) or under a model that states "
            f"the characteristic function of its log-price (Fourier); {type(model).__name__} has "
            f"neither: define characteristic_function(u, t) = E[exp(i u log S_t)] on the model "
            f"(or european_price(kind, strike, maturity), a trusted price from its parameters)"
        )
    return FOURIER_METHOD


def terminal_price(model: Model, kind: str, strike: float, maturity: float, product: object) -> float:
    """Today's price of a payoff of S(T) alone (``kind`` in :data:`TERMINAL_KINDS`; cash
    digitals pay 1) from the contract's terms and the model's parameters.

    Black-Scholes closed forms (Black and Scholes 1973; Rubinstein and Reiner 1991) under
    :class:`BlackScholes`; under a model that states ``european_price(kind, strike,
    maturity)`` (a local-volatility model reads its implied surface), that price; under any
    other one-asset model that states its characteristic function, :func:`limitcase.references.fourier.fourier_price` (Lewis 2001), with the
    model's forward ``S0 exp((r - q) T)`` checked against the characteristic function's;
    otherwise NoReference naming the product, the model and the fix.
    """
    if kind not in TERMINAL_KINDS:
        raise ParamError(f"kind={kind!r} is not one of {TERMINAL_KINDS!r} in terminal_price")
    method = terminal_method(model, product)
    if method == BLACK_SCHOLES:
        spot, rate, dividend, vol = bs_inputs(model, product)
        if kind in ("call", "put"):
            return float(black_scholes(spot, strike, maturity, rate, dividend, vol, kind))
        if kind.startswith("cash"):
            return float(cash_or_nothing(spot, strike, maturity, rate, dividend, vol, 1.0, kind[5:]))
        return float(asset_or_nothing(spot, strike, maturity, rate, dividend, vol, kind[6:]))
    if method == SURFACE:
        return float(model.european_price(kind, strike, maturity))  # type: ignore[attr-defined]
    forward = float(model.forward([maturity])[0, 0])
    return float(fourier_price(model.characteristic_function, strike, maturity, model.short_rate, kind,
                               forward=forward))


def terminal_source(model: Model | None, what: str, closed_form: str) -> str:
    """The report's name of a :func:`terminal_price` reference: ``closed_form`` under
    Black-Scholes, ``what`` by the Fourier method otherwise; without a model, both."""
    if model is not None:
        try:
            method = terminal_method(model, None)
            if method == FOURIER_METHOD:
                return f"{what} by {FOURIER_METHOD}"
            if method == SURFACE:
                return f"{what} from {SURFACE}"
        except NoReference:
            pass
        return closed_form
    return f"{closed_form}; {FOURIER_METHOD} under a model with a characteristic function"


def even_dates(maturity: float, n: int) -> np.ndarray:
    """``n`` equally spaced dates ending at ``maturity``: maturity * (1..n) / n."""
    return maturity * np.arange(1, n + 1) / n


def own_closed_form(
    name: str = "closed_form",
    changes: Mapping[str, Any] | None = None,
    *,
    model_changes: Mapping[str, Any] | None = None,
    allowance: Any = 0.0,
    reason: str = "",
    note: str = "",
) -> Reduction:
    """The check of a product against its own ``reference`` (a closed form) at its defaults
    moved by ``changes``: it ``becomes`` itself, not exactly (the Monte Carlo price meets
    the formula within its standard error, plus a declared ``allowance`` for a known bias)."""
    return Reduction(
        name,
        dict(changes or {}),
        becomes=lambda p: p,
        exact=False,
        model_changes=dict(model_changes or {}),
        allowance=allowance,
        reason=reason,
        note=note or "Monte Carlo price against the product's own closed form",
    )


def period_starts(obs: Any) -> np.ndarray:
    """The price at the start of each observation interval ``(t[j-1], t[j]]``: today's
    spot for the first, then ``S(t[0]), ..., S(t[n-2])``; shape ``(paths, dates)`` like
    ``obs.s`` (one asset). What period returns and Brownian bridges between dates need."""
    first = np.full((obs.paths, 1), obs.s0, dtype=float)
    return np.concatenate([first, obs.s[:, :-1]], axis=1)
