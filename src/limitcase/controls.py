"""Control variates: products whose exact price under the model is known, priced on the
same paths as a check's legs.

Each product may offer its own (:meth:`~limitcase.product.Product.control_variates`); the
discounted underlying at each leg's last date is always one, worth the model's discounted
forward ``S0 exp(-q T)``. How they are applied, and why the estimate stays unbiased, is in
:mod:`limitcase.engine` and :class:`limitcase.estimates.Joint`.

A control never assumes what its check tests. Its exact price is an assumption (the
discounted underlying's is the model's own forward), so a check whose statistic is an exact
linear function of some controls on the pilot paths (a prepaid forward, a forward contract,
a call struck at 0, a user's product with the same property) would only return those
assumptions. :class:`~limitcase.estimates.Joint` drops such controls for that check
(pilot R^2 above :data:`~limitcase.estimates.TAUTOLOGY_R2`) and the outcome says so. The
controls that stay still absorb a wrong forward in part; that is why every check run first
audits the martingale of each model it uses on plain paths (:mod:`limitcase.modelaudit`).
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

from .errors import LimitcaseError
from .models.base import Model
from .params import Param
from .product import Observed, Product

__all__ = ["gather_controls", "CONTROL_PILOT_BLOCKS", "SOBOL_CONTROL_R2"]

CONTROL_PILOT_BLOCKS = 2
"""Blocks of pilot paths (role 3) on which control-variate coefficients are estimated."""
SOBOL_CONTROL_R2 = 0.9
"""With Sobol points, controls are applied to a statistic only when they explain at least
this share of its variance on the pilot. Quasi-random points already integrate the smooth
part a weak control would remove, and the control's own quasi-random error can then
outweigh its gain (measured, benchmarks/efficiency.py --others: a cash-or-nothing call,
1.7 times the variance of Sobol points alone; the geometric control of an arithmetic Asian,
R^2 = 0.999, divides it by 30)."""


class _Underlying(Product):
    """The underlying delivered at ``maturity`` (a prepaid forward): a generic control
    variate, worth the model's discounted forward ``S0 exp(-q T)``."""

    maturity = Param(1.0, low=0.0, low_open=True, doc="delivery date in years")

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs: Observed) -> np.ndarray:
        return obs.s[:, -1]

    def label(self) -> str:
        return f"underlying at {self.maturity:g}"


class _UnderlyingOf(Product):
    """Asset ``asset`` of a several-asset model delivered at ``maturity``."""

    multi_asset = True
    maturity = Param(1.0, low=0.0, low_open=True, doc="delivery date in years")
    asset = Param(0, low=0, integer=True, doc="which asset")
    assets = Param(2, low=1, integer=True, doc="how many assets the model has")

    @property
    def n_assets(self) -> int:  # type: ignore[override]
        return int(self.assets)

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs: Observed) -> np.ndarray:
        return obs.s[:, -1, self.asset]

    def label(self) -> str:
        return f"asset {self.asset} at {self.maturity:g}"


def _underlying_controls(product: Product, model: Model) -> list[tuple[Product, float]]:
    t = float(product.validated_dates()[-1])
    fwd = np.asarray(model.forward([t]), dtype=float).reshape(-1) * math.exp(-model.short_rate * t)
    if product.multi_asset:
        d = model.n_assets
        return [(_UnderlyingOf(maturity=t, asset=a, assets=d), float(fwd[a])) for a in range(d)]
    return [(_Underlying(maturity=t), float(fwd[0]))]


def gather_controls(products: Sequence[Product], model: Model) -> tuple[list[tuple[Product, float]], list[str]]:
    """Control variates for ``products`` under ``model``: each product's own
    :meth:`~limitcase.product.Product.control_variates`, then the discounted underlying at
    its last date. Duplicates are dropped. Returns ``(controls, notes)``; a hook that raises
    or returns a non-finite price is noted and skipped (it is not what the check tests)."""
    out: list[tuple[Product, float]] = []
    seen: set = set()
    notes: list[str] = []

    def add(p: Product, exact: float) -> None:
        tag = (type(p), tuple(sorted((k, repr(v)) for k, v in p.params().items())))
        if tag not in seen:
            seen.add(tag)
            out.append((p, exact))

    for prod in products:
        try:
            own = list(prod.control_variates(model))
            for item in own:
                ctrl, exact = item
                if not isinstance(ctrl, Product):
                    raise TypeError(f"{ctrl!r} is not a Product")
                exact = float(exact)
                if not math.isfinite(exact):
                    raise ValueError(f"exact price {exact!r} is not finite")
                if ctrl.early_exercise:
                    raise ValueError(f"{ctrl.label()} has early exercise; a control needs an exact price")
                add(ctrl, exact)
        except Exception as exc:
            notes.append(f"{type(prod).__name__}.control_variates skipped: {type(exc).__name__}: {exc}")
        try:
            for ctrl, exact in _underlying_controls(prod, model):
                add(ctrl, exact)
        except LimitcaseError as exc:
            notes.append(f"no underlying control for {type(prod).__name__}: {exc}")
    return out, notes
