"""Calibrate a model to vanilla quotes, then reprice every quote by Monte Carlo.

A model calibrated to market quotes must price them back under the Monte Carlo engine that
prices the exotics; otherwise every exotic priced with it is suspect. This module does both
halves:

* :func:`calibrate` fits Black-Scholes (one volatility per expiry) or Heston (one parameter
  set for the whole surface, by its characteristic function) with
  :func:`scipy.optimize.least_squares`, and reports the parameters, their linearised
  standard errors, the fit errors and the Feller condition;
* :func:`reprice` prices every quote by the engine (:func:`limitcase.engine.evaluate`, the
  package's own :class:`EuropeanCall` and :class:`EuropeanPut` on common paths, one call
  per expiry)
  under the calibrated model and decides, quote by quote, with Holm's correction over all
  quotes (:func:`limitcase.verdict.finalise`).

The decision for one quote joins two tests of the Monte Carlo price ``M`` (standard error
``s``):

* **market**: ``M`` lies in the quote's band ``[lo, hi]`` (its bid-ask, or the market price
  moved by a declared tolerance in volatility points when there is no bid-ask), widened by
  ``z s``: ``p_band = 2 (1 - Phi(max(|M - c| - h, 0) / s))`` with ``c`` and ``h`` the
  band's centre and half-width (the verdict module's test with allowance ``h``);
* **formula**: ``M`` agrees with the model's own formula price ``F`` (Heston: Lewis'
  integral of the characteristic function; Black-Scholes: the closed form):
  ``p_formula = 2 (1 - Phi(|M - F| / s))`` (the formula's error, below 1e-10, is left out).

The quote's p-value is ``min(1, 2 min(p_band, p_formula))`` (Bonferroni over its two
hypotheses, valid whatever their dependence), and Holm over the quotes keeps the
family-wise false-alarm rate of the whole table at most ``alpha``. A failure of the first
test alone says the calibration does not fit that quote; of the second, that the
simulation does not reproduce the model it was given (scheme, time step or code).

Rates and dividends: the quote expiring at T is simulated and priced with the zero rate
R(T) and the yield Q(T) held flat to T (exact for Europeans under deterministic rates; see
:mod:`limitcase.quotes`), so each expiry has its own model and its own ``evaluate`` call.

Modules: :mod:`.pricing` (vega, the Heston surface on the reference library's grid),
:mod:`.fit` (:func:`calibrate`, :class:`Calibration`), :mod:`.repricing` (:func:`reprice`).
"""

from __future__ import annotations

from .fit import (
    BS_VOL_BOUNDS,
    DEFAULT_STARTS,
    DEFAULT_STEPS_PER_YEAR,
    DEFAULT_TOLERANCE_VOL,
    HESTON_BOUNDS,
    HESTON_PARAMS,
    MODELS,
    VEGA_FLOOR,
    WEIGHTINGS,
    Calibration,
    calibrate,
)
from .pricing import bs_vega, heston_lewis_prices, heston_log_cf
from .repricing import RepriceRow, Repricing, reprice

__all__ = [
    "MODELS",
    "WEIGHTINGS",
    "HESTON_BOUNDS",
    "HESTON_PARAMS",
    "BS_VOL_BOUNDS",
    "DEFAULT_STEPS_PER_YEAR",
    "DEFAULT_TOLERANCE_VOL",
    "DEFAULT_STARTS",
    "VEGA_FLOOR",
    "Calibration",
    "RepriceRow",
    "Repricing",
    "calibrate",
    "reprice",
    "bs_vega",
    "heston_lewis_prices",
    "heston_log_cf",
]
