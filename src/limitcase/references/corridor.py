r"""Range accruals (corridors) under Black-Scholes-Merton: a sum of cash digitals.

A range accrual paying at time T the cash C times the fraction of fixing dates on which the
spot lies in [L, U] is, by linearity of expectation, C/n times the sum over the fixings of
the discounted probability that :math:`L \le S_{t_i} \le U` (common practice; each term is
a pair of cash-or-nothing digitals, Reiner and Rubinstein 1991). This module imports only
numpy, scipy, math and :mod:`limitcase.errors`.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy.special import ndtr

from limitcase.references._inputs import _num, _loop
from limitcase.errors import ParamError

__all__ = ["range_accrual"]


def range_accrual(
    spot: Any,
    lower: Any,
    upper: Any,
    fixing_times: Any,
    payment_time: Any,
    rate: Any,
    dividend: Any,
    vol: Any,
    cash: Any = 1.0,
) -> float | np.ndarray:
    r"""Range accrual paid at ``payment_time``: cash times the fraction of fixings in [L, U].

    Parameters
    ----------
    spot, rate, dividend, vol : array_like
        Black-Scholes-Merton inputs (dividend = continuous yield q).
    lower, upper : array_like
        Corridor :math:`0 \le L \le U \le \infty`.
    fixing_times : array_like
        1-D array of the n fixing dates in [0, payment_time] (any spacing, repeats count
        twice), built by the caller from the contract's terms. A fixing at 0 reads the spot.
    payment_time : array_like
        Payment date T > 0.
    cash : array_like, optional
        Cash C paid for a full accrual.

    Returns
    -------
    float or ndarray

    Notes
    -----
    With :math:`\nu = r - q - \sigma^2/2`,

    .. math::

        V = \frac{C e^{-rT}}{n}\sum_{i=1}^n
            \Big[N\Big(\frac{\ln(U/S) - \nu t_i}{\sigma\sqrt{t_i}}\Big)
               - N\Big(\frac{\ln(L/S) - \nu t_i}{\sigma\sqrt{t_i}}\Big)\Big],

    each bracket the probability :math:`P(L \le S_{t_i} \le U)` (the law of
    :math:`S_{t_i}` is log-normal [1]_; the bracket is the difference of two
    cash-or-nothing digitals [2]_ undiscounted). At :math:`\sigma\sqrt{t_i} = 0` the
    fixing is the forward :math:`S e^{(r-q)t_i}`, counted if it lies in [L, U]. Exact to
    rounding.

    References
    ----------
    .. [1] F. Black and M. Scholes, "The Pricing of Options and Corporate Liabilities",
       Journal of Political Economy 81(3), 1973.
    .. [2] E. Reiner and M. Rubinstein, "Unscrambling the Binary Code", Risk 4(9), 1991.
    """
    func = "range_accrual"
    try:
        f = np.asarray(fixing_times, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ParamError(f"fixing_times={fixing_times!r} is not an array of numbers in {func}") from exc
    if f.ndim != 1 or f.size == 0 or not np.all(np.isfinite(f)) or np.any(f < 0.0):
        raise ParamError(f"fixing_times={fixing_times!r} in {func}: pass a non-empty 1-D array of dates >= 0")

    def one(s: float, lo: float, hi: float, t: float, r: float, q: float, v: float, c: float) -> float:
        s = _num("spot", s, func, low=0.0, low_open=True, fix="a spot price is positive")
        lo = _num("lower", lo, func, low=0.0, fix="the lower level is >= 0")
        hi = _num("upper", hi, func, low=0.0, allow_inf=True, fix="the upper level is >= 0 (inf allowed)")
        if hi < lo:
            raise ParamError(f"upper={hi!r} is below lower={lo!r} in {func}; pass lower <= upper")
        t = _num("payment_time", t, func, low=0.0, low_open=True, fix="a payment date in years > 0")
        if f.max() > t * (1.0 + 1e-12):
            raise ParamError(f"fixing_times has a date {float(f.max())!r} after payment_time={t!r} in {func}")
        r = _num("rate", r, func, fix="pass a finite rate")
        q = _num("dividend", q, func, fix="pass a finite dividend yield")
        v = _num("vol", v, func, low=0.0, fix="a volatility is >= 0")
        c = _num("cash", c, func, low=0.0, fix="the cash amount is >= 0")
        nu = r - q - 0.5 * v * v
        sd = v * np.sqrt(f)
        mean = nu * f
        with np.errstate(divide="ignore", invalid="ignore"):
            u = (math.log(hi / s) if math.isfinite(hi) else math.inf)
            l_ = (math.log(lo / s) if lo > 0.0 else -math.inf)
            p = ndtr((u - mean) / sd) - ndtr((l_ - mean) / sd)
        # zero spread (vol 0 or a fixing today): the fixing is the forward itself
        fwd = s * np.exp((r - q) * f)
        p = np.where(sd > 0.0, p, ((fwd >= lo) & (fwd <= hi)).astype(float))
        return c * math.exp(-r * t) * float(np.mean(p))

    return _loop((spot, lower, upper, payment_time, rate, dividend, vol, cash), one)


