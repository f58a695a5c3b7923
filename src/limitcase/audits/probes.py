"""The audits' own small products: a delivery of the asset at a date and the reference
option (a European call, or an exchange option on two assets)."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ..errors import ModelError
from ..models.base import Model
from ..product import Observed, Product
from .constants import OPTION_DATES, OPTION_MATURITY
from .common import _name

__all__ = [
    "_Probe",
    "_Delivery",
    "AuditOption",
    "reference_option",
]


# ----------------------------------------------------------------------------------------
# the audits' own small products


class _Probe(Product):
    """A product of the audits: reads some asset columns of the simulated paths.

    ``multi_asset`` is set so that the probe sees every asset a model simulates (one or
    many); ``columns`` picks the ones its payoff reads.
    """

    multi_asset = True
    abstract = True

    def __init__(self, name: str, dates: Sequence[float], n_assets: int, columns: Sequence[int]) -> None:
        super().__init__()
        object.__setattr__(self, "_name", name)
        object.__setattr__(self, "_dates", np.asarray(dates, dtype=float))
        object.__setattr__(self, "n_assets", int(n_assets))
        object.__setattr__(self, "columns", tuple(int(c) for c in columns))

    def dates(self) -> np.ndarray:
        return self._dates

    def label(self) -> str:
        return self._name

    def _read(self, obs: Observed) -> np.ndarray:
        s = obs.s[:, :, list(self.columns)]
        if not np.all(np.isfinite(s)):
            bad = np.flatnonzero(~np.isfinite(s).all(axis=(1, 2)))
            raise ModelError(
                f"the model simulated NaN or inf prices on {bad.size} of {s.shape[0]} paths "
                f"(first at path {bad[0]}); a variance or volatility went outside its domain"
            )
        return s

    def __eq__(self, other: object) -> bool:
        return self is other

    def __hash__(self) -> int:
        return id(self)


class _Delivery(_Probe):
    """Pays asset ``column`` at its one date: a prepaid forward, worth S0 exp(-q t)."""

    def payoff(self, obs: Observed) -> np.ndarray:
        return self._read(obs)[:, -1, 0]


@dataclass(frozen=True)
class AuditOption:
    """The option an audit prices: a European call on one asset, or an exchange option
    (receive asset ``columns[0]``, give asset ``columns[1]``), at ``maturity``, observed
    on ``dates_count`` equally spaced dates (the payoff reads the last)."""

    kind: str  # "call" or "exchange"
    maturity: float
    strike: float = 0.0
    columns: tuple[int, ...] = (0,)
    dates_count: int = OPTION_DATES

    def dates(self, refine: int = 1) -> np.ndarray:
        n = self.dates_count * refine
        return self.maturity * np.arange(1, n + 1) / n

    def describe(self) -> str:
        if self.kind == "call":
            return f"call K={self.strike:g} T={self.maturity:g} on asset {self.columns[0] + 1}"
        return f"exchange asset {self.columns[0] + 1} for asset {self.columns[1] + 1}, T={self.maturity:g}"

    def probe(self, n_assets: int, offset: int = 0, squared: bool = False, name: str = "") -> "_OptionProbe":
        cols = tuple(c + offset for c in self.columns)
        label = name or self.describe()
        return _OptionProbe(label + (" squared" if squared else ""), self.dates(), n_assets, cols, self, squared)


class _OptionProbe(_Probe):
    def __init__(self, name: str, dates: Sequence[float], n_assets: int, columns: Sequence[int],
                 option: AuditOption, squared: bool) -> None:
        super().__init__(name, dates, n_assets, columns)
        object.__setattr__(self, "option", option)
        object.__setattr__(self, "squared", squared)

    def payoff(self, obs: Observed) -> np.ndarray:
        s = self._read(obs)[:, -1, :]
        if self.option.kind == "call":
            x = np.maximum(s[:, 0] - self.option.strike, 0.0)
        else:
            x = np.maximum(s[:, 0] - s[:, 1], 0.0)
        return x * x if self.squared else x


def reference_option(model: Model) -> AuditOption:
    """The option the paths, seeds, steps and degenerations audits price on ``model``:
    an at-the-money call expiring in a year for one asset, an exchange of the first two
    assets for several (it depends on their correlation)."""
    if model.n_assets >= 2:
        return AuditOption("exchange", OPTION_MATURITY, columns=(0, 1))
    return AuditOption("call", OPTION_MATURITY, strike=float(model.initial()[0]))
