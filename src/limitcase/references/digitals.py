"""Binary (digital) options and the gap option under Black-Scholes-Merton.

All functions broadcast their numeric arguments and return a float for scalar input.
Conventions as in :mod:`limitcase.references.blackscholes` (b = rate - dividend).
"""

from __future__ import annotations

import numpy as np
from scipy.special import ndtr

from limitcase.references.blackscholes import (
    ArrayLike,
    _as_float,
    _check,
    _check_kind,
    _market,
    _out,
)

__all__ = ["cash_or_nothing", "asset_or_nothing", "gap_option"]


def _tail_probs(
    s: np.ndarray, x: np.ndarray, t: np.ndarray, r: np.ndarray, q: np.ndarray, v: np.ndarray
) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    r"""Return :math:`(N(d_1), N(d_2), N(-d_1), N(-d_2))` for the level x: the probabilities
    of :math:`S_T > x` and of :math:`S_T < x`, under the share measure and under the
    risk-neutral measure.

    Degenerate cases by their limits: when :math:`\sigma\sqrt T = 0` and S > 0 the terminal
    price is the forward :math:`F = S e^{(r-q)T}`; S_T > x has probability 1 if F > x, 0 if
    F < x and 1/2 if F == x (the limit of N(d) as :math:`\sigma\sqrt T \to 0` at the
    money), and S_T < x the complement. x == 0 with S > 0 gives S_T > x surely. S == 0
    gives S_T = 0 surely: S_T > x never, S_T < x iff x > 0.
    """
    sd = v * np.sqrt(t)
    regular = (sd > 0) & (x > 0) & (s > 0)
    fwd = s * np.exp((r - q) * t)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        sd_safe = np.where(regular, sd, 1.0)
        d1 = np.log(np.where(regular, fwd, 1.0) / np.where(regular, x, 1.0)) / sd_safe + 0.5 * sd_safe
        d2 = d1 - sd_safe
    up = np.where(fwd > x, 1.0, np.where(fwd < x, 0.0, 0.5))
    up = np.where((x == 0) & (s > 0), 1.0, up)
    up = np.where(s == 0, 0.0, up)
    down = np.where(s == 0, np.where(x > 0, 1.0, 0.0), 1.0 - up)
    return (
        np.where(regular, ndtr(d1), up),
        np.where(regular, ndtr(d2), up),
        np.where(regular, ndtr(-d1), down),
        np.where(regular, ndtr(-d2), down),
    )


def cash_or_nothing(
    spot: ArrayLike,
    strike: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    cash: ArrayLike = 1.0,
    kind: str = "call",
) -> float | np.ndarray:
    r"""Cash-or-nothing option: pays ``cash`` at T if :math:`S_T > K` (call) or
    :math:`S_T < K` (put).

    Parameters
    ----------
    spot, strike, maturity, rate, dividend, vol : array_like
        As in :func:`limitcase.references.black_scholes`.
    cash : array_like, optional
        Amount paid (any finite real; default 1).
    kind : {"call", "put"}

    Returns
    -------
    float or ndarray

    Notes
    -----
    .. math::

        c = Q e^{-rT} N(d_2), \qquad p = Q e^{-rT} N(-d_2), \qquad
        d_2 = \frac{\ln(S/K) + (b - \sigma^2/2) T}{\sigma\sqrt T}.

    With :math:`\sigma\sqrt T = 0` the payment is certain (F > K for the call), absent, or
    worth half (F == K exactly, the vol -> 0 limit of the formula); see the private
    helper ``_tail_probs`` for the other degenerate cases. Call + put = :math:`Q e^{-rT}`.

    References
    ----------
    .. [1] M. Rubinstein and E. Reiner, "Unscrambling the Binary Code", Risk 4(9), 1991.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (binary options: cash-or-nothing).
    """
    func = "cash_or_nothing"
    call = _check_kind(kind, func) == "call"
    s, k, t, r, q, v = _market(func, spot, strike, maturity, rate, dividend, vol)
    cq = _as_float("cash", cash, func)
    _check("cash", cq, func, fix="pass a finite cash amount")
    _, up2, _, down2 = _tail_probs(s, k, t, r, q, v)
    prob = up2 if call else down2
    return _out(cq * np.exp(-r * t) * prob)


def asset_or_nothing(
    spot: ArrayLike,
    strike: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    kind: str = "call",
) -> float | np.ndarray:
    r"""Asset-or-nothing option: pays :math:`S_T` at T if :math:`S_T > K` (call) or
    :math:`S_T < K` (put).

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
    .. math::

        c = S e^{(b-r)T} N(d_1), \qquad p = S e^{(b-r)T} N(-d_1), \qquad
        d_1 = \frac{\ln(S/K) + (b + \sigma^2/2) T}{\sigma\sqrt T}.

    Call + put = the prepaid forward :math:`S e^{-qT}`; the asset-or-nothing call minus
    K times the unit cash-or-nothing call is the vanilla call.

    References
    ----------
    .. [1] M. Rubinstein and E. Reiner, "Unscrambling the Binary Code", Risk 4(9), 1991.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (binary options: asset-or-nothing).
    """
    func = "asset_or_nothing"
    call = _check_kind(kind, func) == "call"
    s, k, t, r, q, v = _market(func, spot, strike, maturity, rate, dividend, vol)
    up1, _, down1, _ = _tail_probs(s, k, t, r, q, v)
    prob = up1 if call else down1
    return _out(s * np.exp(-q * t) * prob)


def gap_option(
    spot: ArrayLike,
    strike: ArrayLike,
    trigger: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    kind: str = "call",
) -> float | np.ndarray:
    r"""Gap option: the call pays :math:`S_T - K_2` when :math:`S_T > K_1`, the put pays
    :math:`K_2 - S_T` when :math:`S_T < K_1`.

    Here ``trigger`` is :math:`K_1` (the level that decides whether anything is paid) and
    ``strike`` is :math:`K_2` (the amount subtracted in the payoff), as in Haug's notation:
    his example S = 50, K1 = 50, K2 = 57, T = 0.5, r = b = 0.09, sigma = 0.20 is
    ``gap_option(50, strike=57, trigger=50, ...)`` and gives a call worth -0.0053. The
    payoff can be negative, so can the price.

    Parameters
    ----------
    spot : array_like
        Spot price S >= 0.
    strike : array_like
        Payoff strike :math:`K_2 \ge 0`.
    trigger : array_like
        Trigger level :math:`K_1 \ge 0`.
    maturity, rate, dividend, vol : array_like
        As in :func:`limitcase.references.black_scholes`.
    kind : {"call", "put"}

    Returns
    -------
    float or ndarray

    Notes
    -----
    With :math:`d_1 = [\ln(S/K_1) + (b + \sigma^2/2)T]/(\sigma\sqrt T)`,
    :math:`d_2 = d_1 - \sigma\sqrt T`,

    .. math::

        c = S e^{(b-r)T} N(d_1) - K_2 e^{-rT} N(d_2), \qquad
        p = K_2 e^{-rT} N(-d_2) - S e^{(b-r)T} N(-d_1).

    ``trigger == strike`` is the vanilla option.

    References
    ----------
    .. [1] M. Rubinstein and E. Reiner, "Unscrambling the Binary Code", Risk 4(9), 1991.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (binary options: gap options).
    """
    func = "gap_option"
    call = _check_kind(kind, func) == "call"
    trig = _as_float("trigger", trigger, func)
    _check("trigger", trig, func, low=0.0, fix="a trigger is a non-negative price level")
    s, k2, t, r, q, v = _market(func, spot, strike, maturity, rate, dividend, vol)
    s, k2, t, r, q, v, k1 = np.broadcast_arrays(s, k2, t, r, q, v, trig)
    up1, up2, down1, down2 = _tail_probs(s, k1, t, r, q, v)
    pf = s * np.exp(-q * t)
    kd = k2 * np.exp(-r * t)
    if call:
        price = pf * up1 - kd * up2
    else:
        price = kd * down2 - pf * down1
    return _out(price)
