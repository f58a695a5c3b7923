"""Lookback options under Black-Scholes-Merton, continuous monitoring (exact closed forms).

Conventions as in :mod:`limitcase.references.blackscholes` (b = rate - dividend).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import ndtr

from limitcase.errors import ParamError
from limitcase.references.blackscholes import (
    ArrayLike,
    _as_float,
    _check,
    _check_kind,
    _market,
    _out,
)

__all__ = ["lookback_floating", "lookback_fixed"]

_INV_SQRT_2PI = 1.0 / math.sqrt(2.0 * math.pi)


def _expm1_over(alpha: np.ndarray, u: np.ndarray) -> np.ndarray:
    """(exp(alpha*u) - 1)/u, equal to alpha at u = 0, without cancellation."""
    u_safe = np.where(u == 0, 1.0, u)
    return np.where(u == 0, alpha, np.expm1(alpha * u_safe) / u_safe)


def _ndtr_slope(x: np.ndarray, h: np.ndarray) -> np.ndarray:
    """(N(x+h) - N(x))/h, equal to the density n(x) at h = 0, without cancellation."""
    small = np.abs(h) < 1e-3
    h_safe = np.where(small, 1.0, h)
    direct = (ndtr(x + h_safe) - ndtr(x)) / h_safe
    n = np.exp(-0.5 * x * x) * _INV_SQRT_2PI
    series = n * (1.0 - x * h / 2.0 + (x * x - 1.0) * h * h / 6.0 - (x**3 - 3.0 * x) * h**3 / 24.0)
    return np.where(small, series, direct)


def _carry_term(lnratio: np.ndarray, x: np.ndarray, sign: float, u: np.ndarray, c: np.ndarray) -> np.ndarray:
    r"""Stable :math:`[e^{-uL} N(x + s\,u c) - e^{u c^2/2} N(x)]/u` (its limit at u = 0).

    With :math:`u = 2b/\sigma^2`, :math:`c = \sigma\sqrt T` this is
    :math:`(\sigma^2/2b)[(S/X)^{-2b/\sigma^2} N(x \pm 2b\sqrt T/\sigma) - e^{bT} N(x)]`,
    the term of the lookback formulas that is 0/0 at b = 0.
    """
    h = sign * u * c
    return (
        _expm1_over(-lnratio, u) * ndtr(x + h)
        + sign * c * _ndtr_slope(x, h)
        - _expm1_over(0.5 * c * c, u) * ndtr(x)
    )


def _expected_extreme(
    s: np.ndarray, level: np.ndarray, t: np.ndarray, r: np.ndarray, q: np.ndarray, v: np.ndarray, maximum: bool
) -> np.ndarray:
    r"""Discounted :math:`e^{-rT} E[\max(M, \max_{t\le T} S_t)]` (maximum, M = level >= S) or
    :math:`e^{-rT} E[\min(m, \min_{t \le T} S_t)]` (minimum, m = level <= S)."""
    b = r - q
    sd = v * np.sqrt(t)
    regular = sd > 0
    df = np.exp(-r * t)
    pf = s * np.exp(-q * t)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        v_safe = np.where(regular, v, 1.0)
        c = np.where(regular, sd, 1.0)
        u = 2.0 * b / (v_safe * v_safe)
        lnr = np.log(s / level)
        d1 = (lnr + (b + 0.5 * v_safe * v_safe) * t) / c
        d2 = d1 - c
        if maximum:
            val = level * df * ndtr(-d2) + pf * ndtr(d1) - s * df * _carry_term(lnr, d1, -1.0, u, c)
        else:
            val = pf * ndtr(-d1) + level * df * ndtr(d2) - s * df * _carry_term(lnr, -d1, 1.0, u, c)
    end = s * np.exp(b * t)  # deterministic path S e^{bt} is monotone: its extremes are at 0 or T
    if maximum:
        det = df * np.maximum(level, np.maximum(s, end))
    else:
        det = df * np.minimum(level, np.minimum(s, end))
    return np.where(regular, val, det)


def _extreme(
    func: str, name: str, running_extreme: ArrayLike | None, s: np.ndarray, maximum: bool
) -> np.ndarray:
    if running_extreme is None:
        return s
    m = _as_float(name, running_extreme, func)
    if maximum:
        _check(name, m, func, low=0.0, fix="the running maximum is a price level")
        bad = ~(m >= s)
        rule = "at least the spot (it includes today's price)"
    else:
        _check(name, m, func, low=0.0, low_open=True, fix="the running minimum is a positive price level")
        bad = ~(m <= s)
        rule = "at most the spot (it includes today's price)"
    if np.any(bad):
        mb, sb = np.broadcast_arrays(m, s)
        badb = np.broadcast_to(bad, mb.shape)
        i = tuple(np.argwhere(badb)[0])
        raise ParamError(
            f"{name}={float(mb[i])!r} with spot={float(sb[i])!r} in {func}: the running "
            f"{'maximum' if maximum else 'minimum'} must be {rule}; pass None for a new option"
        )
    return m


def lookback_floating(
    spot: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    kind: str = "call",
    running_extreme: ArrayLike | None = None,
) -> float | np.ndarray:
    r"""Floating-strike lookback option, continuous monitoring (Goldman, Sosin and Gatto).

    Payoff at T: call :math:`S_T - \min(m_0, \min_{t\le T} S_t)`, put
    :math:`\max(M_0, \max_{t \le T} S_t) - S_T`.

    Parameters
    ----------
    spot : array_like
        Spot price S > 0.
    maturity, rate, dividend, vol : array_like
        As in :func:`limitcase.references.black_scholes`.
    kind : {"call", "put"}
    running_extreme : array_like, optional
        Minimum so far :math:`m_0 \le S` (call) or maximum so far :math:`M_0 \ge S` (put);
        None (default) for an option struck today (:math:`m_0 = M_0 = S`).

    Returns
    -------
    float or ndarray

    Notes
    -----
    With :math:`a_1 = [\ln(S/m_0) + (b + \sigma^2/2)T]/(\sigma\sqrt T)`, :math:`a_2 = a_1 - \sigma\sqrt T`,
    and :math:`b_1, b_2` the same with :math:`M_0`,

    .. math::

        c &= S e^{(b-r)T} N(a_1) - m_0 e^{-rT} N(a_2)
            + S e^{-rT} \frac{\sigma^2}{2b}\Big[(S/m_0)^{-2b/\sigma^2} N(-a_1 + \tfrac{2b}{\sigma}\sqrt T)
            - e^{bT} N(-a_1)\Big], \\
        p &= M_0 e^{-rT} N(-b_2) - S e^{(b-r)T} N(-b_1)
            + S e^{-rT} \frac{\sigma^2}{2b}\Big[-(S/M_0)^{-2b/\sigma^2} N(b_1 - \tfrac{2b}{\sigma}\sqrt T)
            + e^{bT} N(b_1)\Big].

    At b = 0 (rate == dividend) the bracketed terms are 0/0; they are evaluated through
    their exact expansion in :math:`u = 2b/\sigma^2` (``expm1`` and a series for the
    difference of normal CDFs), which is continuous through b = 0 with limit
    :math:`S e^{-rT}[-(\ln(S/m_0) + \sigma^2 T/2) N(-a_1) + \sigma\sqrt T\, n(a_1)]` for the call.
    Zero :math:`\sigma\sqrt T` gives the deterministic path :math:`S e^{bt}`.

    References
    ----------
    .. [1] M. B. Goldman, H. B. Sosin and M. A. Gatto, "Path Dependent Options: Buy at the
       Low, Sell at the High", Journal of Finance 34(5), 1979.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (floating-strike lookback options).
    """
    func = "lookback_floating"
    call = _check_kind(kind, func) == "call"
    s, _, t, r, q, v = _market(func, spot, 0.0, maturity, rate, dividend, vol)
    _check("spot", s, func, low=0.0, low_open=True, fix="a lookback needs a positive spot")
    m = _extreme(func, "running_extreme", running_extreme, s, maximum=not call)
    s, m, t, r, q, v = np.broadcast_arrays(s, m, t, r, q, v)
    pf = s * np.exp(-q * t)
    if call:
        price = pf - _expected_extreme(s, m, t, r, q, v, maximum=False)
    else:
        price = _expected_extreme(s, m, t, r, q, v, maximum=True) - pf
    return _out(price)


def lookback_fixed(
    spot: ArrayLike,
    strike: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    kind: str = "call",
    running_extreme: ArrayLike | None = None,
) -> float | np.ndarray:
    r"""Fixed-strike lookback option, continuous monitoring (Conze and Viswanathan).

    Payoff at T: call :math:`\max(\max(M_0, \max_{t\le T} S_t) - K, 0)`, put
    :math:`\max(K - \min(m_0, \min_{t\le T} S_t), 0)`.

    Parameters
    ----------
    spot : array_like
        Spot price S > 0.
    strike, maturity, rate, dividend, vol : array_like
        As in :func:`limitcase.references.black_scholes`.
    kind : {"call", "put"}
    running_extreme : array_like, optional
        Maximum so far :math:`M_0 \ge S` (call) or minimum so far :math:`m_0 \le S` (put);
        None (default) for an option struck today.

    Returns
    -------
    float or ndarray

    Notes
    -----
    For the call with :math:`K > M_0`, :math:`d_1 = [\ln(S/K) + (b+\sigma^2/2)T]/(\sigma\sqrt T)`:

    .. math::

        c = S e^{(b-r)T} N(d_1) - K e^{-rT} N(d_2)
            + S e^{-rT}\frac{\sigma^2}{2b}\Big[-(S/K)^{-2b/\sigma^2} N(d_1 - \tfrac{2b}{\sigma}\sqrt T)
            + e^{bT} N(d_1)\Big],

    and for :math:`K \le M_0`, :math:`c = e^{-rT}(M_0 - K) + ` the same expression with K
    replaced by :math:`M_0` (Haug's :math:`e_1, e_2`); the put is symmetric with the running
    minimum. Both cases are one identity: :math:`\max(\max(M_0, M_T) - K, 0) =
    \max(M_0, K, M_T) - K`, so the code evaluates
    :math:`e^{-rT}E[\max(L, M_T)] - K e^{-rT}` with :math:`L = \max(M_0, K)` (and
    :math:`K e^{-rT} - e^{-rT}E[\min(\min(m_0, K), m_T)]` for the put). b = 0 is handled by
    the same exact expansion as :func:`lookback_floating`.

    References
    ----------
    .. [1] A. Conze and R. Viswanathan, "Path Dependent Options: The Case of Lookback
       Options", Journal of Finance 46(5), 1991.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (fixed-strike lookback options).
    """
    func = "lookback_fixed"
    call = _check_kind(kind, func) == "call"
    s, k, t, r, q, v = _market(func, spot, strike, maturity, rate, dividend, vol)
    _check("spot", s, func, low=0.0, low_open=True, fix="a lookback needs a positive spot")
    m = _extreme(func, "running_extreme", running_extreme, s, maximum=call)
    s, k, m, t, r, q, v = np.broadcast_arrays(s, k, m, t, r, q, v)
    kd = k * np.exp(-r * t)
    if call:
        price = _expected_extreme(s, np.maximum(m, k), t, r, q, v, maximum=True) - kd
    else:
        level = np.minimum(m, k)
        # level 0 (strike 0): the minimum is floored at 0, E[min(0, .)] = 0, the put is worth 0
        safe = np.where(level > 0, level, 1.0)
        ext = np.where(level > 0, _expected_extreme(s, np.minimum(safe, s), t, r, q, v, maximum=False), 0.0)
        price = kd - ext
    return _out(price)
