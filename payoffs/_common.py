"""Helpers shared by the catalogue: the Black-Scholes inputs of a model, evenly spaced dates."""

from __future__ import annotations

import numpy as np

from limitcase.errors import NoReference
from limitcase.models import BlackScholes, Model


def bs_inputs(model: Model, product: object) -> tuple[float, float, float, float]:
    """``(spot, rate, dividend, vol)`` of a one-asset Black-Scholes model, or NoReference."""
    if not isinstance(model, BlackScholes):
        raise NoReference(
            f"{type(product).__name__} has a closed form under BlackScholes only, not {type(model).__name__}"
        )
    return model.spot, model.rate, model.dividend, model.vol


def even_dates(maturity: float, n: int) -> np.ndarray:
    """``n`` equally spaced dates ending at ``maturity``: maturity * (1..n) / n."""
    return maturity * np.arange(1, n + 1) / n
