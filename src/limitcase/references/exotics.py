"""Other exotic options under Black-Scholes-Merton: exchange, forward start, simple chooser,
power options, and (an approximation) Kirk's spread option.

All functions broadcast their numeric arguments and return a float for scalar input.
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

__all__ = [
    "margrabe_exchange",
    "forward_start",
    "simple_chooser",
    "power_option",
    "kirk_spread_approx",
]


def _two_assets(
    func: str,
    spot1: ArrayLike,
    spot2: ArrayLike,
    maturity: ArrayLike,
    dividend1: ArrayLike,
    dividend2: ArrayLike,
    vol1: ArrayLike,
    vol2: ArrayLike,
    rho: ArrayLike,
) -> tuple[np.ndarray, ...]:
    s1 = _as_float("spot1", spot1, func)
    s2 = _as_float("spot2", spot2, func)
    t = _as_float("maturity", maturity, func)
    q1 = _as_float("dividend1", dividend1, func)
    q2 = _as_float("dividend2", dividend2, func)
    v1 = _as_float("vol1", vol1, func)
    v2 = _as_float("vol2", vol2, func)
    c = _as_float("rho", rho, func)
    for name, a in (("spot1", s1), ("spot2", s2)):
        _check(name, a, func, low=0.0, fix="a spot price is a non-negative price level")
    _check("maturity", t, func, low=0.0, fix="maturity is a time to expiry in years, >= 0")
    for name, a in (("dividend1", q1), ("dividend2", q2)):
        _check(name, a, func, fix="pass a finite continuous dividend yield")
    for name, a in (("vol1", v1), ("vol2", v2)):
        _check(name, a, func, low=0.0, fix="a volatility is a non-negative annualised standard deviation")
    _check("rho", c, func, low=-1.0, high=1.0, fix="a correlation lies in [-1, 1]")
    return tuple(np.broadcast_arrays(s1, s2, t, q1, q2, v1, v2, c))


def margrabe_exchange(
    spot1: ArrayLike,
    spot2: ArrayLike,
    maturity: ArrayLike,
    dividend1: ArrayLike,
    dividend2: ArrayLike,
    vol1: ArrayLike,
    vol2: ArrayLike,
    rho: ArrayLike,
) -> float | np.ndarray:
    r"""Option to exchange asset 2 for asset 1 at T: payoff :math:`\max(S_{1,T} - S_{2,T}, 0)`.

    Parameters
    ----------
    spot1, spot2 : array_like
        Spot prices of the asset received and the asset given, >= 0.
    maturity : array_like
        Expiry T >= 0 in years.
    dividend1, dividend2 : array_like
        Continuous dividend yields :math:`q_1, q_2`.
    vol1, vol2 : array_like
        Volatilities >= 0.
    rho : array_like
        Correlation of the two Brownian motions, in [-1, 1].

    Returns
    -------
    float or ndarray

    Notes
    -----
    .. math::

        V = S_1 e^{-q_1 T} N(d_1) - S_2 e^{-q_2 T} N(d_2), \quad
        d_1 = \frac{\ln(S_1 e^{-q_1T}/(S_2 e^{-q_2T})) + \hat\sigma^2 T/2}{\hat\sigma\sqrt T},
        \quad \hat\sigma^2 = \sigma_1^2 + \sigma_2^2 - 2\rho\sigma_1\sigma_2.

    The risk-free rate cancels (asset 2 is the numeraire), so there is no ``rate``
    argument. In Haug's cost-of-carry notation :math:`S e^{(b_i - r)T} = S e^{-q_i T}`,
    i.e. pass :math:`q_i = r - b_i`. :math:`\hat\sigma\sqrt T = 0` gives
    :math:`\max(S_1 e^{-q_1T} - S_2 e^{-q_2T}, 0)`.

    References
    ----------
    .. [1] W. Margrabe, "The Value of an Option to Exchange One Asset for Another",
       Journal of Finance 33(1), 1978.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 5 (exchange-one-asset-for-another options).
    """
    func = "margrabe_exchange"
    s1, s2, t, q1, q2, v1, v2, c = _two_assets(func, spot1, spot2, maturity, dividend1, dividend2, vol1, vol2, rho)
    var = np.maximum(v1 * v1 + v2 * v2 - 2.0 * c * v1 * v2, 0.0)
    # asset 2's prepaid forward plays the discounted strike: rate 0 after the numeraire change
    pf2 = s2 * np.exp(-q2 * t)
    zero = np.zeros_like(t)
    return _out(_bs_core(s1, pf2, t, zero, q1, np.sqrt(var), True))


def forward_start(
    spot: ArrayLike,
    alpha: ArrayLike,
    start: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    kind: str = "call",
) -> float | np.ndarray:
    r"""Forward-start option: at ``start`` t an option struck at :math:`\alpha S_t`, expiring
    at ``maturity`` T, is handed over. Payoff at T: :math:`\max(S_T - \alpha S_t, 0)` (call).

    Parameters
    ----------
    spot : array_like
        Spot price S >= 0.
    alpha : array_like
        Strike as a fraction of the spot at the start date, >= 0.
    start : array_like
        Start (strike-setting) time t, with 0 <= t <= T.
    maturity, rate, dividend, vol : array_like
        As in :func:`limitcase.references.black_scholes`.
    kind : {"call", "put"}

    Returns
    -------
    float or ndarray

    Notes
    -----
    By scale invariance of the Black-Scholes price,

    .. math::

        V = S e^{(b-r)t}\, \mathrm{BS}(1, \alpha, T - t, r, b, \sigma)
          = S e^{-qt}\, \mathrm{BS}(1, \alpha, T - t, r, q, \sigma).

    ``start == 0`` is the Black-Scholes option with strike :math:`\alpha S`.

    References
    ----------
    .. [1] M. Rubinstein, "Pay Now, Choose Later", Risk 4(2), 1991, and "Exotic
       Options", working paper, 1990.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (forward start options; example S = 60, alpha = 1.1, t = 0.25, T = 1,
       r = 0.08, b = 0.04, sigma = 0.3 -> call 4.4064).
    """
    func = "forward_start"
    call = _check_kind(kind, func) == "call"
    a = _as_float("alpha", alpha, func)
    _check("alpha", a, func, low=0.0, fix="alpha is the strike as a non-negative fraction of the spot at start")
    s, a, t_end, r, q, v = _market(func, spot, a, maturity, rate, dividend, vol)
    t0 = _as_float("start", start, func)
    _check("start", t0, func, low=0.0, fix="start is a time in years, >= 0")
    s, a, t_end, r, q, v, t0 = np.broadcast_arrays(s, a, t_end, r, q, v, t0)
    if np.any(t0 > t_end):
        i = tuple(np.argwhere(t0 > t_end)[0])
        raise ParamError(
            f"start={float(t0[i])!r} is after maturity={float(t_end[i])!r} in {func}; the strike "
            f"must be set no later than expiry (0 <= start <= maturity)"
        )
    unit = _bs_core(np.ones_like(s), a, t_end - t0, r, q, v, call)
    return _out(s * np.exp(-q * t0) * unit)


def simple_chooser(
    spot: ArrayLike,
    strike: ArrayLike,
    choose_time: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
) -> float | np.ndarray:
    r"""Simple chooser: at ``choose_time`` t the holder picks the more valuable of a call and
    a put with the same strike K and expiry T.

    Parameters
    ----------
    spot, strike, maturity, rate, dividend, vol : array_like
        As in :func:`limitcase.references.black_scholes`.
    choose_time : array_like
        Choice time t, with 0 <= t <= T.

    Returns
    -------
    float or ndarray

    Notes
    -----
    By put-call parity at t, :math:`\max(c_t, p_t) = c_t + e^{-q(T-t)}\max(K e^{-b(T-t)} - S_t, 0)`,
    so the chooser is a call (K, T) plus :math:`e^{-q(T-t)}` puts with strike
    :math:`K e^{-b(T-t)}` expiring at t, Rubinstein's formula

    .. math::

        w = S e^{(b-r)T} N(d) - K e^{-rT} N(d - \sigma\sqrt T)
            - S e^{(b-r)T} N(-y) + K e^{-rT} N(-y + \sigma\sqrt t),

    :math:`d = [\ln(S/K) + (b + \sigma^2/2)T]/(\sigma\sqrt T)`,
    :math:`y = [\ln(S/K) + bT + \sigma^2 t/2]/(\sigma\sqrt t)`. ``choose_time == 0`` gives
    :math:`\max(c, p)`, ``choose_time == maturity`` the straddle :math:`c + p`.

    References
    ----------
    .. [1] M. Rubinstein, "Options for the Undecided", Risk 4(4), 1991.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (simple chooser options; example S = K = 50, t = 0.25, T = 0.5,
       r = b = 0.08, sigma = 0.25 -> 6.1071).
    """
    func = "simple_chooser"
    s, k, t_end, r, q, v = _market(func, spot, strike, maturity, rate, dividend, vol)
    tc = _as_float("choose_time", choose_time, func)
    _check("choose_time", tc, func, low=0.0, fix="choose_time is a time in years, >= 0")
    s, k, t_end, r, q, v, tc = np.broadcast_arrays(s, k, t_end, r, q, v, tc)
    if np.any(tc > t_end):
        i = tuple(np.argwhere(tc > t_end)[0])
        raise ParamError(
            f"choose_time={float(tc[i])!r} is after maturity={float(t_end[i])!r} in {func}; "
            f"the choice must be made no later than expiry (0 <= choose_time <= maturity)"
        )
    tau = t_end - tc
    call = _bs_core(s, k, t_end, r, q, v, True)
    put_leg = np.exp(-q * tau) * _bs_core(s, k * np.exp(-(r - q) * tau), tc, r, q, v, False)
    return _out(call + put_leg)


def power_option(
    spot: ArrayLike,
    strike: ArrayLike,
    power: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    kind: str = "call",
) -> float | np.ndarray:
    r"""Power option (asymmetric): call payoff :math:`\max(S_T^{\,p} - K, 0)`, put payoff
    :math:`\max(K - S_T^{\,p}, 0)`, p = ``power``.

    Parameters
    ----------
    spot, strike, maturity, rate, dividend, vol : array_like
        As in :func:`limitcase.references.black_scholes` (K is in units of :math:`S^p`).
    power : array_like
        Exponent p, any finite real (p = 1 is the vanilla option; p = 0 pays
        :math:`\max(\pm(1 - K), 0)`).
    kind : {"call", "put"}

    Returns
    -------
    float or ndarray

    Notes
    -----
    :math:`S_T^p` is log-normal with :math:`E[S_T^p] = S^p e^{[p(b - \sigma^2/2) + p^2\sigma^2/2]T}`
    and log-volatility :math:`|p|\sigma`, so

    .. math::

        c = e^{-rT}[F_p N(d_1) - K N(d_2)], \quad
        F_p = S^p e^{[p(b - \sigma^2/2) + p^2\sigma^2/2]T}, \quad
        d_1 = \frac{\ln(F_p/K) + p^2\sigma^2T/2}{|p|\sigma\sqrt T},\ d_2 = d_1 - |p|\sigma\sqrt T.

    References
    ----------
    .. [1] R. C. Heynen and H. M. Kat, "Pricing and Hedging Power Options", Financial
       Engineering and the Japanese Markets 3, 1996.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (power options).
    """
    func = "power_option"
    call = _check_kind(kind, func) == "call"
    s, k, t, r, q, v = _market(func, spot, strike, maturity, rate, dividend, vol)
    p = _as_float("power", power, func)
    _check("power", p, func, fix="pass a finite exponent")
    s, k, t, r, q, v, p = np.broadcast_arrays(s, k, t, r, q, v, p)
    if np.any((s == 0) & (p < 0)):
        i = tuple(np.argwhere((s == 0) & (p < 0))[0])
        raise ParamError(
            f"spot=0.0 with power={float(p[i])!r} in {func}: 0 to a negative power is infinite; "
            f"pass a positive spot or a power >= 0"
        )
    with np.errstate(divide="ignore", over="ignore"):
        fp = np.exp(p * np.log(s) + (p * (r - q - 0.5 * v * v) + 0.5 * p * p * v * v) * t)
    fp = np.where((s == 0) & (p == 0), 1.0, np.where(s == 0, 0.0, fp))
    # Black-76 on the forward F_p: "spot" F_p with yield r so that the prepaid value is F_p e^{-rT}
    return _out(_bs_core(fp, k, t, r, r, np.abs(p) * v, call))


def kirk_spread_approx(
    spot1: ArrayLike,
    spot2: ArrayLike,
    strike: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend1: ArrayLike,
    dividend2: ArrayLike,
    vol1: ArrayLike,
    vol2: ArrayLike,
    rho: ArrayLike,
    kind: str = "call",
) -> float | np.ndarray:
    r"""APPROXIMATION (Kirk 1995) of a spread option: call payoff
    :math:`\max(S_{1,T} - S_{2,T} - K, 0)`, put :math:`\max(K - S_{1,T} + S_{2,T}, 0)`.

    **Never use this as a pass/fail reference**: it treats :math:`S_2 + K` as log-normal,
    which is exact only at K = 0 (Margrabe); the error grows with K and with the vol of
    asset 2.

    Parameters
    ----------
    spot1, spot2 : array_like
        Spot prices, >= 0.
    strike : array_like
        Spread strike K >= 0.
    maturity, rate : array_like
        Expiry T >= 0 and risk-free rate r.
    dividend1, dividend2, vol1, vol2, rho : array_like
        Dividend yields, volatilities (>= 0), correlation in [-1, 1].
    kind : {"call", "put"}

    Returns
    -------
    float or ndarray

    Notes
    -----
    With forwards :math:`F_i = S_i e^{(r - q_i)T}` and :math:`w = F_2/(F_2 + K)`,

    .. math::

        \hat\sigma^2 = \sigma_1^2 + (\sigma_2 w)^2 - 2\rho\sigma_1\sigma_2 w, \quad
        c \approx e^{-rT}[F_1 N(d_1) - (F_2 + K) N(d_2)],\quad
        d_1 = \frac{\ln(F_1/(F_2+K)) + \hat\sigma^2T/2}{\hat\sigma\sqrt T}.

    References
    ----------
    .. [1] E. Kirk, "Correlation in the Energy Markets", in *Managing Energy Price Risk*,
       Risk Publications, 1995.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 5 (spread option approximation).
    """
    func = "kirk_spread_approx"
    call = _check_kind(kind, func) == "call"
    s1, s2, t, q1, q2, v1, v2, c = _two_assets(func, spot1, spot2, maturity, dividend1, dividend2, vol1, vol2, rho)
    k = _as_float("strike", strike, func)
    _check("strike", k, func, low=0.0, fix="a spread strike here is a non-negative amount")
    r = _as_float("rate", rate, func)
    _check("rate", r, func, fix="pass a finite continuously compounded rate")
    s1, s2, t, q1, q2, v1, v2, c, k, r = np.broadcast_arrays(s1, s2, t, q1, q2, v1, v2, c, k, r)
    f1 = s1 * np.exp((r - q1) * t)
    f2k = s2 * np.exp((r - q2) * t) + k
    with np.errstate(divide="ignore", invalid="ignore"):
        w = np.where(f2k > 0, (f2k - k) / np.where(f2k > 0, f2k, 1.0), 0.0)
    var = np.maximum(v1 * v1 + (v2 * w) ** 2 - 2.0 * c * v1 * v2 * w, 0.0)
    return _out(_bs_core(f1, f2k, t, r, r, np.sqrt(var), call))
