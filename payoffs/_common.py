"""Helpers shared by the catalogue: the Black-Scholes inputs of a model, today's market
of any one-asset model, evenly spaced dates, and a product's own closed form as a check."""

from __future__ import annotations

from typing import Any, Mapping

import numpy as np

from limitcase import Reduction
from limitcase.errors import NoReference
from limitcase.models import BlackScholes, Model


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
