"""Reference prices of the audits: a registry from model class to a trusted pricer of the
reference option (the reference library's closed forms and numerical prices)."""

from __future__ import annotations

from typing import Any, Callable

from ..errors import NoReference
from ..references import black_scholes, heston_price, margrabe_exchange, merton_jump_price
from ..references.fourier import FOURIER_METHOD, fourier_price
from ..models.base import Model
from ..models.gbm import BlackScholes, MultiBlackScholes
from ..models.heston import Heston
from ..models.dividends import DividendBlackScholes
from ..models.localvol import LocalVol
from ..models.merton import Merton
from .probes import AuditOption

__all__ = [
    "register_reference",
    "reference_price",
    "_marginal",
]


# ----------------------------------------------------------------------------------------
# reference prices: a registry from model class to a trusted pricer


_REFERENCES: dict[type, Callable[[Model, AuditOption], tuple[float, str]]] = {}


def register_reference(model_type: type, pricer: Callable[[Model, AuditOption], tuple[float, str]]) -> None:
    """Register ``pricer(model, option) -> (price, source)`` for ``model_type`` and its
    subclasses; raise :class:`~limitcase.errors.NoReference` inside for options it cannot
    price."""
    _REFERENCES[model_type] = pricer


def reference_price(model: Model, option: AuditOption) -> tuple[float, str]:
    """The trusted price of ``option`` under ``model`` and where it comes from.

    The pricer is found along the model's class hierarchy (a subclass of
    :class:`~limitcase.models.Heston` is priced as Heston: it claims to be one). A model
    with no registered pricer is priced from what it states about itself: its
    ``european_price`` (a local-volatility model reads its surface), else its
    ``characteristic_function`` by the Fourier method (Lewis 2001); one-asset calls only.
    """
    for klass in type(model).__mro__:
        if klass in _REFERENCES:
            return _REFERENCES[klass](model, option)
    if option.kind == "call" and model.n_assets == 1:
        if type(model).european_price is not Model.european_price:
            return float(model.european_price("call", option.strike, option.maturity)), \
                "call from the model's own european_price"  # type: ignore[attr-defined]
        if type(model).characteristic_function is not Model.characteristic_function:
            fwd = float(model.forward([option.maturity])[0, 0])
            value = fourier_price(model.characteristic_function, option.strike, option.maturity,
                                  model.short_rate, "call", forward=fwd)
            return float(value), f"call by {FOURIER_METHOD} on the model's characteristic function"
    raise NoReference(
        f"no reference price registered for {type(model).__name__}; register one with "
        "limitcase.audits.register_reference, or state characteristic_function(u, t) or "
        "european_price(kind, strike, maturity) on the model"
    )


def _call_only(model: Model, option: AuditOption) -> None:
    if option.kind != "call":
        raise NoReference(f"{type(model).__name__} has a reference for calls only, not {option.kind!r}")


def _bs_reference(model: Model, option: AuditOption) -> tuple[float, str]:
    _call_only(model, option)
    m: Any = model
    return float(black_scholes(m.spot, option.strike, option.maturity, m.rate, m.dividend, m.vol, "call")), \
        "Black-Scholes call"


def _multi_reference(model: Model, option: AuditOption) -> tuple[float, str]:
    m: Any = model
    if option.kind == "call":
        i = option.columns[0]
        return float(black_scholes(m.spots[i], option.strike, option.maturity, m.rate, m.dividends[i],
                                   m.vols[i], "call")), "Black-Scholes call on the asset's marginal"
    i, j = option.columns
    return float(margrabe_exchange(m.spots[i], m.spots[j], option.maturity, m.dividends[i], m.dividends[j],
                                   m.vols[i], m.vols[j], m.correlation[i, j])), "Margrabe (1978) exchange option"


def _heston_reference(model: Model, option: AuditOption) -> tuple[float, str]:
    _call_only(model, option)
    m: Any = model
    value = heston_price(m.spot, option.strike, option.maturity, m.rate, m.dividend, m.v0, m.kappa, m.theta,
                         m.vol_of_vol, m.rho, "call")
    return float(value), "Heston (1993) call by Lewis' integral"


def _merton_reference(model: Model, option: AuditOption) -> tuple[float, str]:
    _call_only(model, option)
    m: Any = model
    value = merton_jump_price(m.spot, option.strike, option.maturity, m.rate, m.dividend, m.vol, m.intensity,
                              m.jump_mean, m.jump_vol, "call")
    return float(value), "Merton (1976) call by the Poisson series"


register_reference(BlackScholes, _bs_reference)
register_reference(MultiBlackScholes, _multi_reference)
register_reference(Heston, _heston_reference)
register_reference(Merton, _merton_reference)


def _localvol_reference(model: Model, option: AuditOption) -> tuple[float, str]:
    _call_only(model, option)
    m: Any = model
    return float(m.european_price("call", option.strike, option.maturity)), \
        "call at the implied surface's volatility (Dupire: local volatility reprices its surface)"


register_reference(LocalVol, _localvol_reference)


def _dividend_bs_reference(model: Model, option: AuditOption) -> tuple[float, str]:
    from ..references import lattice_price_dividends

    _call_only(model, option)
    m: Any = model
    value = lattice_price_dividends(m.spot, option.strike, option.maturity, m.rate, m.vol, "call", "european",
                                    cash=tuple(m.cash), proportional=tuple(m.proportional), dividend=m.dividend)
    return float(value), "European call by the discrete-dividend lattice (Vellekoop and Nieuwenhuis 2006)"


register_reference(DividendBlackScholes, _dividend_bs_reference)


def _marginal(model: Model, i: int) -> Model | None:
    """Asset ``i`` of a multi-asset model alone, as a one-asset model (None if unknown)."""
    if isinstance(model, MultiBlackScholes):
        return BlackScholes(spot=float(model.spots[i]), rate=model.rate, dividend=float(model.dividends[i]),
                            vol=float(model.vols[i]))
    return None
