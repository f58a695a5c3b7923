"""Black-Scholes-Merton family: generalised Black-Scholes, Black-76, forwards, implied volatility.

Every function broadcasts all of its numeric arguments with numpy and returns a Python
``float`` when every argument is a scalar, an ``ndarray`` otherwise.

Conventions used throughout :mod:`limitcase.references`: ``rate`` is the continuously
compounded risk-free rate r, ``dividend`` the continuous dividend yield q, so the cost of
carry is b = r - q; ``maturity`` is T in years, ``vol`` the Black-Scholes volatility
sigma; ``kind`` is the string ``"call"`` or ``"put"``.

This module imports only numpy, scipy, math and :mod:`limitcase.errors`: the reference side
of every check shares no code with the Monte Carlo side.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy.special import ndtr

from limitcase.errors import ParamError

__all__ = [
    "black_scholes",
    "black76",
    "prepaid_forward",
    "put_call_parity_gap",
    "implied_vol",
]

ArrayLike = Any
"""Anything :func:`numpy.asarray` turns into a float array (scalar, list, ndarray)."""

_KINDS = ("call", "put")


# ---------------------------------------------------------------------------------------
# validation helpers shared by the closed-form modules of this package (private)
# ---------------------------------------------------------------------------------------
def _as_float(name: str, value: ArrayLike, func: str) -> np.ndarray:
    """Return ``value`` as a float ndarray or raise a ParamError that names it."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ParamError(
            f"{name}={value!r} is not a number or array of numbers in {func}; "
            f"pass a float or a numpy array of floats"
        ) from exc
    return arr


def _first_bad(arr: np.ndarray, bad: np.ndarray) -> str:
    """Describe the first offending element of ``arr`` (its value and, for arrays, index)."""
    idx = np.argwhere(bad)[0]
    val = float(arr[tuple(idx)]) if arr.ndim else float(arr)
    if arr.ndim == 0:
        return f"{val!r}"
    return f"{val!r} (at index {tuple(int(i) for i in idx)})"


def _check(
    name: str,
    arr: np.ndarray,
    func: str,
    *,
    low: float = -math.inf,
    low_open: bool = False,
    high: float = math.inf,
    high_open: bool = False,
    allow_inf: bool = False,
    fix: str = "",
) -> None:
    """Raise ParamError unless every element of ``arr`` lies in the stated interval.

    NaN is always rejected; +/-inf is rejected unless ``allow_inf``.
    """
    with np.errstate(invalid="ignore"):
        ok = ~np.isnan(arr)
        if not allow_inf:
            ok &= np.isfinite(arr)
        ok &= (arr > low) if low_open else (arr >= low)
        ok &= (arr < high) if high_open else (arr <= high)
    if not np.all(ok):
        lo = "(" if low_open else "["
        hi = ")" if high_open else "]"
        hi = ")" if math.isinf(high) else hi
        lo = "(" if math.isinf(low) else lo
        finite = "" if allow_inf else " and must be finite"
        msg = (
            f"{name}={_first_bad(arr, ~ok)} is outside {lo}{low}, {high}{hi} in {func}"
            f"{finite}"
        )
        if fix:
            msg += f"; {fix}"
        raise ParamError(msg)


def _check_kind(kind: Any, func: str, allowed: tuple[str, ...] = _KINDS) -> str:
    if not isinstance(kind, str) or kind not in allowed:
        raise ParamError(
            f"kind={kind!r} is not one of {', '.join(map(repr, allowed))} in {func}; "
            f"pass one of these strings"
        )
    return kind


def _out(x: np.ndarray) -> float | np.ndarray:
    """Return a Python float for a 0-d result, the array otherwise."""
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def _market(
    func: str,
    spot: ArrayLike,
    strike: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
) -> tuple[np.ndarray, ...]:
    """Validate and broadcast the six Black-Scholes market arguments."""
    s = _as_float("spot", spot, func)
    k = _as_float("strike", strike, func)
    t = _as_float("maturity", maturity, func)
    r = _as_float("rate", rate, func)
    q = _as_float("dividend", dividend, func)
    v = _as_float("vol", vol, func)
    _check("spot", s, func, low=0.0, fix="a spot price is a non-negative price level")
    _check("strike", k, func, low=0.0, fix="a strike is a non-negative price level")
    _check("maturity", t, func, low=0.0, fix="maturity is a time to expiry in years, >= 0")
    _check("rate", r, func, fix="pass a finite continuously compounded rate")
    _check("dividend", q, func, fix="pass a finite continuous dividend yield")
    _check("vol", v, func, low=0.0, fix="a volatility is a non-negative annualised standard deviation")
    return tuple(np.broadcast_arrays(s, k, t, r, q, v))


def _bs_core(
    s: np.ndarray,
    k: np.ndarray,
    t: np.ndarray,
    r: np.ndarray,
    q: np.ndarray,
    v: np.ndarray,
    call: bool,
) -> np.ndarray:
    """Generalised Black-Scholes on validated, broadcast arrays (no checks)."""
    df = np.exp(-r * t)
    pf = s * np.exp(-q * t)  # prepaid forward S e^{-qT}
    sd = v * np.sqrt(t)
    regular = (sd > 0) & (k > 0) & (s > 0)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        sd_safe = np.where(regular, sd, 1.0)
        d1 = (np.log(np.where(regular, pf, 1.0) / np.where(regular, k * df, 1.0))) / sd_safe + 0.5 * sd_safe
        d2 = d1 - sd_safe
        if call:
            price = pf * ndtr(d1) - k * df * ndtr(d2)
            intrinsic = np.maximum(pf - k * df, 0.0)
        else:
            price = k * df * ndtr(-d2) - pf * ndtr(-d1)
            intrinsic = np.maximum(k * df - pf, 0.0)
    return np.where(regular, price, intrinsic)


# ---------------------------------------------------------------------------------------
# public functions
# ---------------------------------------------------------------------------------------
def black_scholes(
    spot: ArrayLike,
    strike: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    kind: str = "call",
) -> float | np.ndarray:
    r"""Generalised Black-Scholes-Merton price of a European call or put.

    Parameters
    ----------
    spot, strike : array_like
        Spot price S >= 0 and strike K >= 0.
    maturity : array_like
        Time to expiry T >= 0 in years.
    rate : array_like
        Continuously compounded risk-free rate r.
    dividend : array_like
        Continuous dividend yield q (cost of carry b = r - q).
    vol : array_like
        Volatility sigma >= 0.
    kind : {"call", "put"}
        Option type.

    Returns
    -------
    float or ndarray
        The price; a float when every argument is a scalar.

    Raises
    ------
    ParamError
        Negative spot, strike, maturity or vol; non-finite input; unknown ``kind``.

    Notes
    -----
    With :math:`d_1 = [\ln(S/K) + (b + \sigma^2/2)T] / (\sigma\sqrt T)` and
    :math:`d_2 = d_1 - \sigma\sqrt T`,

    .. math::

        c = S e^{(b-r)T} N(d_1) - K e^{-rT} N(d_2), \qquad
        p = K e^{-rT} N(-d_2) - S e^{(b-r)T} N(-d_1).

    Degenerate inputs are evaluated by their limits, never as 0/0: when
    :math:`\sigma\sqrt T = 0` (zero vol or zero maturity) the price is the discounted
    intrinsic value of the forward, :math:`e^{-rT}\max(\pm(F-K), 0)` with
    :math:`F = S e^{bT}`; ``strike == 0`` gives the prepaid forward :math:`S e^{-qT}` for
    the call and 0 for the put; ``spot == 0`` gives 0 for the call and
    :math:`K e^{-rT}` for the put.

    References
    ----------
    .. [1] F. Black and M. Scholes, "The Pricing of Options and Corporate Liabilities",
       Journal of Political Economy 81(3), 1973.
    .. [2] R. C. Merton, "Theory of Rational Option Pricing", Bell Journal of Economics
       and Management Science 4(1), 1973.
    .. [3] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 1 (the generalised Black-Scholes-Merton formula, cost of carry b).
    """
    func = "black_scholes"
    call = _check_kind(kind, func) == "call"
    s, k, t, r, q, v = _market(func, spot, strike, maturity, rate, dividend, vol)
    return _out(_bs_core(s, k, t, r, q, v, call))


def prepaid_forward(spot: ArrayLike, maturity: ArrayLike, dividend: ArrayLike) -> float | np.ndarray:
    r"""Prepaid forward price :math:`S e^{-qT}`: today's value of receiving S_T at T.

    Parameters
    ----------
    spot : array_like
        Spot price S >= 0.
    maturity : array_like
        Delivery time T >= 0 in years.
    dividend : array_like
        Continuous dividend yield q.

    Returns
    -------
    float or ndarray

    Notes
    -----
    Under a continuous dividend yield q, holding :math:`e^{-qT}` shares today and
    reinvesting the dividends gives one share at T, so the prepaid forward is
    :math:`F^P_{0,T} = S_0 e^{-qT}` (a no-arbitrage identity; it is the strike-0 call).

    References
    ----------
    .. [1] J. C. Hull, *Options, Futures, and Other Derivatives*, chapter on forward and
       futures prices (assets providing a known yield).
    """
    func = "prepaid_forward"
    s = _as_float("spot", spot, func)
    t = _as_float("maturity", maturity, func)
    q = _as_float("dividend", dividend, func)
    _check("spot", s, func, low=0.0, fix="a spot price is a non-negative price level")
    _check("maturity", t, func, low=0.0, fix="maturity is a time to delivery in years, >= 0")
    _check("dividend", q, func, fix="pass a finite continuous dividend yield")
    return _out(s * np.exp(-q * t))


def black76(
    forward: ArrayLike,
    strike: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    vol: ArrayLike,
    kind: str = "call",
) -> float | np.ndarray:
    r"""Black (1976) price of a European option on a forward or futures price.

    Parameters
    ----------
    forward : array_like
        Forward (futures) price F >= 0 for delivery at the option expiry.
    strike : array_like
        Strike K >= 0.
    maturity : array_like
        Expiry T >= 0 in years.
    rate : array_like
        Continuously compounded discount rate r.
    vol : array_like
        Volatility of the forward sigma >= 0.
    kind : {"call", "put"}

    Returns
    -------
    float or ndarray

    Notes
    -----
    .. math::

        c = e^{-rT}[F N(d_1) - K N(d_2)], \quad p = e^{-rT}[K N(-d_2) - F N(-d_1)],
        \quad d_{1,2} = \frac{\ln(F/K) \pm \sigma^2 T/2}{\sigma\sqrt T}.

    This is the generalised Black-Scholes formula with cost of carry b = 0 and spot F;
    the same limits apply at :math:`\sigma\sqrt T = 0` and ``strike == 0``.

    References
    ----------
    .. [1] F. Black, "The Pricing of Commodity Contracts", Journal of Financial Economics
       3, 1976.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 1 (options on futures).
    """
    func = "black76"
    call = _check_kind(kind, func) == "call"
    f = _as_float("forward", forward, func)
    _check("forward", f, func, low=0.0, fix="a forward price is a non-negative price level")
    fa, k, t, r, q, v = _market(func, f, strike, maturity, rate, rate, vol)
    return _out(_bs_core(fa, k, t, r, q, v, call))


def put_call_parity_gap(
    call: ArrayLike,
    put: ArrayLike,
    spot: ArrayLike,
    strike: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
) -> float | np.ndarray:
    r"""Violation of European put-call parity: :math:`C - P - (S e^{-qT} - K e^{-rT})`.

    Parameters
    ----------
    call, put : array_like
        Prices of a European call and put with the same strike and expiry.
    spot, strike, maturity, rate, dividend : array_like
        As in :func:`black_scholes`.

    Returns
    -------
    float or ndarray
        Zero (to rounding) for any arbitrage-free pair of prices.

    Notes
    -----
    Put-call parity, :math:`C - P = S e^{-qT} - K e^{-rT}`, holds model-free for European
    options on an asset paying a continuous yield q.

    References
    ----------
    .. [1] H. R. Stoll, "The Relationship Between Put and Call Option Prices", Journal of
       Finance 24(5), 1969.
    .. [2] R. C. Merton, "Theory of Rational Option Pricing", Bell Journal of Economics
       and Management Science 4(1), 1973.
    """
    func = "put_call_parity_gap"
    c = _as_float("call", call, func)
    p = _as_float("put", put, func)
    _check("call", c, func, fix="pass a finite call price")
    _check("put", p, func, fix="pass a finite put price")
    s, k, t, r, q, _ = _market(func, spot, strike, maturity, rate, dividend, 0.0)
    return _out(c - p - (s * np.exp(-q * t) - k * np.exp(-r * t)))


def implied_vol(
    price: ArrayLike,
    spot: ArrayLike,
    strike: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    kind: str = "call",
    *,
    xtol: float = 1e-13,
    max_iter: int = 200,
) -> float | np.ndarray:
    r"""Black-Scholes implied volatility by a vectorised, bracketed Newton-bisection hybrid.

    Parameters
    ----------
    price : array_like
        Observed option prices.
    spot, strike, maturity, rate, dividend : array_like
        As in :func:`black_scholes`; here spot, strike and maturity must be > 0 (otherwise
        the price does not depend on the volatility).
    kind : {"call", "put"}
    xtol : float, optional
        Stop when the bracket on the total standard deviation :math:`w = \sigma\sqrt T`
        is narrower than ``xtol * max(1, w)``, or the price error is below
        ``xtol * upper bound``.
    max_iter : int, optional
        Iteration cap; convergence is guaranteed well before it because every step either
        is a Newton step inside the bracket or halves the bracket.

    Returns
    -------
    float or ndarray
        sigma >= 0 with ``black_scholes(spot, strike, maturity, rate, dividend, sigma,
        kind) == price``; 0 exactly when the price equals the lower bound.

    Raises
    ------
    ParamError
        When no volatility reproduces a price: the message names the price, the bound
        it violates and its value.

    Notes
    -----
    The Black-Scholes price is continuous and strictly increasing in
    :math:`w = \sigma\sqrt T` (vega :math:`S e^{-qT} n(d_1) > 0`), from the lower
    no-arbitrage bound at w = 0 to the upper bound as :math:`w \to \infty`:

    .. math::

        \max(S e^{-qT} - K e^{-rT}, 0) \le c < S e^{-qT}, \qquad
        \max(K e^{-rT} - S e^{-qT}, 0) \le p < K e^{-rT}.

    A price in this range therefore has exactly one implied volatility. The solver keeps a
    bracket :math:`[w_{lo}, w_{hi}]` with :math:`c(w_{lo}) \le c^* \le c(w_{hi})`
    (found by doubling :math:`w_{hi}`), takes the Newton step
    :math:`w - (c(w) - c^*)/(S e^{-qT} n(d_1))` when it lands strictly inside the
    bracket and bisects otherwise, so it converges for every admissible price.

    References
    ----------
    .. [1] R. C. Merton, "Theory of Rational Option Pricing", Bell Journal of Economics
       and Management Science 4(1), 1973 (the no-arbitrage bounds).
    .. [2] S. Manaster and G. Koehler, "The Calculation of Implied Variances from the
       Black-Scholes Model: A Note", Journal of Finance 37(1), 1982 (Newton iteration
       for the implied variance).
    """
    func = "implied_vol"
    call = _check_kind(kind, func) == "call"
    c = _as_float("price", price, func)
    _check("price", c, func, fix="pass a finite option price")
    s, k, t, r, q, _ = _market(func, spot, strike, maturity, rate, dividend, 0.0)
    for name, arr in (("spot", s), ("strike", k), ("maturity", t)):
        _check(
            name, arr, func, low=0.0, low_open=True,
            fix="the price does not depend on the volatility when it is 0; "
                "implied volatility needs spot, strike and maturity > 0",
        )
    c, s, k, t, r, q = np.broadcast_arrays(c, s, k, t, r, q)
    pf = s * np.exp(-q * t)
    kd = k * np.exp(-r * t)
    if call:
        lower, upper = np.maximum(pf - kd, 0.0), pf
    else:
        lower, upper = np.maximum(kd - pf, 0.0), kd
    # a price a hair below the lower bound (rounding) is taken as the bound itself
    slack = 8.0 * np.finfo(float).eps * np.maximum(upper, 1.0)
    below = c < lower - slack
    above = c >= upper
    if np.any(below):
        i = tuple(np.argwhere(below)[0])
        raise ParamError(
            f"price={float(c[i])!r}{'' if c.ndim == 0 else f' (at index {i})'} is below the "
            f"no-arbitrage lower bound {float(lower[i])!r} = max({'S e^-qT - K e^-rT' if call else 'K e^-rT - S e^-qT'}, 0) "
            f"for a {kind} in {func}; no volatility reproduces it: check the price, rate and dividend"
        )
    if np.any(above):
        i = tuple(np.argwhere(above)[0])
        raise ParamError(
            f"price={float(c[i])!r}{'' if c.ndim == 0 else f' (at index {i})'} is at or above the "
            f"no-arbitrage upper bound {float(upper[i])!r} = {'S e^-qT' if call else 'K e^-rT'} "
            f"for a {kind} in {func}; no finite volatility reproduces it: check the price"
        )
    target = np.maximum(c, lower)
    sqrt_t = np.sqrt(t)

    logm = np.log(pf / kd)

    def _price_w(w: np.ndarray) -> np.ndarray:
        with np.errstate(divide="ignore", invalid="ignore"):
            ws = np.where(w > 0, w, 1.0)
            d1 = logm / ws + 0.5 * ws
            d2 = d1 - ws
            if call:
                p = pf * ndtr(d1) - kd * ndtr(d2)
            else:
                p = kd * ndtr(-d2) - pf * ndtr(-d1)
        return np.where(w > 0, p, lower)

    lo = np.zeros_like(target)
    hi = np.ones_like(target)
    # grow the upper end of the bracket until it is above the target
    for _ in range(60):
        short = _price_w(hi) < target
        if not np.any(short):
            break
        hi = np.where(short, 2.0 * hi, hi)
    else:
        i = tuple(np.argwhere(_price_w(hi) < target)[0])
        raise ParamError(
            f"price={float(c[i])!r} is so close to the upper bound {float(upper[i])!r} in {func} that "
            f"its implied total volatility exceeds {float(hi[i])!r}; it cannot be resolved in double precision"
        )
    w = np.where(target > lower, 0.5 * (lo + hi), 0.0)
    done = target <= lower
    ptol = 4.0 * np.finfo(float).eps * np.maximum(upper, 1e-300)
    for _ in range(max_iter):
        p = _price_w(w)
        err = p - target
        lo = np.where(err <= 0, w, lo)
        hi = np.where(err >= 0, w, hi)
        done |= (np.abs(err) <= ptol) | (hi - lo <= xtol * np.maximum(1.0, hi))
        if np.all(done):
            break
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            ws = np.where(w > 0, w, 1.0)
            d1 = logm / ws + 0.5 * ws
            vega = pf * np.exp(-0.5 * d1 * d1) / math.sqrt(2.0 * math.pi)
            newton = w - err / vega
        inside = np.isfinite(newton) & (newton > lo) & (newton < hi)
        step = np.where(inside, newton, 0.5 * (lo + hi))
        w = np.where(done, w, step)
    return _out(np.where(target <= lower, 0.0, w) / sqrt_t)
