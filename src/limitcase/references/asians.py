"""Geometric-average Asian options under Black-Scholes-Merton (exact closed forms).

Conventions as in :mod:`limitcase.references.blackscholes` (b = rate - dividend).
"""

from __future__ import annotations

import numpy as np

from limitcase.errors import ParamError
from limitcase.references.blackscholes import (
    ArrayLike,
    _as_float,
    _bs_core,
    _check,
    _check_kind,
    _market,
    _out,
)

__all__ = ["geometric_asian", "geometric_asian_continuous"]


def geometric_asian(
    spot: ArrayLike,
    strike: ArrayLike,
    fixing_times: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    kind: str = "call",
) -> float | np.ndarray:
    r"""Discretely fixed geometric-average Asian option (fixed strike), exact.

    Payoff at :math:`T = \max_i t_i`: :math:`\max(G - K, 0)` (call) or
    :math:`\max(K - G, 0)` (put), with :math:`G = (\prod_{i=1}^n S_{t_i})^{1/n}`.

    Parameters
    ----------
    spot, strike, rate, dividend, vol : array_like
        As in :func:`limitcase.references.black_scholes`; broadcast against the batch
        shape of ``fixing_times``.
    fixing_times : array_like
        Fixing dates :math:`t_i \ge 0` in years along the LAST axis (any order, repeats
        and a fixing at 0 allowed); leading axes are batch axes. Payment is at the last
        fixing.
    kind : {"call", "put"}

    Returns
    -------
    float or ndarray

    Notes
    -----
    :math:`\ln G` is normal under the risk-neutral measure with

    .. math::

        m = \ln S + (b - \sigma^2/2)\,\bar t, \qquad
        v^2 = \frac{\sigma^2}{n^2} \sum_{i,j} \min(t_i, t_j)
            = \frac{\sigma^2}{n^2} \sum_{k=1}^n (2(n-k)+1)\, t_{(k)},

    :math:`\bar t` the mean fixing time and :math:`t_{(k)}` the sorted times, so

    .. math::

        c = e^{-rT}\,[e^{m + v^2/2} N(d_1) - K N(d_2)], \quad
        d_1 = \frac{m - \ln K + v^2}{v}, \; d_2 = d_1 - v,

    and the put by parity. One fixing at T is the Black-Scholes option; v = 0 gives the
    discounted intrinsic value :math:`e^{-rT}\max(\pm(e^m - K), 0)`.

    References
    ----------
    .. [1] A. G. Z. Kemna and A. C. F. Vorst, "A Pricing Method for Options Based on
       Average Asset Values", Journal of Banking and Finance 14, 1990.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (Asian options, geometric average rate options).
    """
    func = "geometric_asian"
    call = _check_kind(kind, func) == "call"
    ft = _as_float("fixing_times", fixing_times, func)
    if ft.ndim == 0:
        ft = ft[None]
    if ft.shape[-1] == 0:
        raise ParamError(
            f"fixing_times={fixing_times!r} is empty in {func}; pass at least one fixing time"
        )
    _check("fixing_times", ft, func, low=0.0, fix="fixing times are years from today, >= 0")
    n = ft.shape[-1]
    ts = np.sort(ft, axis=-1)
    t_pay = ts[..., -1]
    t_mean = ts.mean(axis=-1)
    weights = 2.0 * (n - np.arange(1, n + 1)) + 1.0
    t_var = (ts * weights).sum(axis=-1) / (n * n)
    s, k, t, r, q, v = _market(func, spot, strike, t_pay, rate, dividend, vol)
    s, k, t, r, q, v, tm, tv = np.broadcast_arrays(s, k, t, r, q, v, t_mean, t_var)
    # write G's law as a Black-Scholes forward: prepaid value e^{-rT} E[G], total var v^2
    var = v * v * tv
    with np.errstate(divide="ignore"):
        log_eg = np.log(s) + (r - q - 0.5 * v * v) * tm + 0.5 * var
    eg = np.exp(log_eg)
    one = np.ones_like(s)
    # Black-Scholes on "spot" E[G] with unit time, rate rT and yield rT: prepaid E[G] e^{-rT},
    # discount e^{-rT}, total standard deviation sqrt(var)
    price = _bs_core(eg, k, one, r * t, r * t, np.sqrt(var), call)
    return _out(price)


def geometric_asian_continuous(
    spot: ArrayLike,
    strike: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    kind: str = "call",
) -> float | np.ndarray:
    r"""Continuously averaged geometric Asian option (Kemna and Vorst 1990), exact.

    Payoff at T: :math:`\max(G - K, 0)` (call) or :math:`\max(K - G, 0)` (put), with
    :math:`G = \exp(\frac1T\int_0^T \ln S_t\,dt)`.

    Parameters
    ----------
    spot, strike, maturity, rate, dividend, vol : array_like
        As in :func:`limitcase.references.black_scholes`.
    kind : {"call", "put"}

    Returns
    -------
    float or ndarray

    Notes
    -----
    The generalised Black-Scholes formula with adjusted volatility and cost of carry

    .. math::

        \sigma_A = \sigma/\sqrt3, \qquad b_A = \tfrac12\,(b - \sigma^2/6),

    .. math::

        c = S e^{(b_A - r)T} N(d_1) - K e^{-rT} N(d_2), \quad
        d_1 = \frac{\ln(S/K) + (b_A + \sigma_A^2/2)T}{\sigma_A\sqrt T}.

    It is the limit of :func:`geometric_asian` with fixings :math:`t_i = iT/n`,
    :math:`n \to \infty`.

    References
    ----------
    .. [1] A. G. Z. Kemna and A. C. F. Vorst, "A Pricing Method for Options Based on
       Average Asset Values", Journal of Banking and Finance 14, 1990.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (geometric average rate options; example put S = 80, K = 85, T = 0.25,
       r = 0.05, b = 0.08, sigma = 0.2 -> 4.6922).
    """
    func = "geometric_asian_continuous"
    call = _check_kind(kind, func) == "call"
    s, k, t, r, q, v = _market(func, spot, strike, maturity, rate, dividend, vol)
    b_a = 0.5 * (r - q - v * v / 6.0)
    return _out(_bs_core(s, k, t, r, r - b_a, v / np.sqrt(3.0), call))
