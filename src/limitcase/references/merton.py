"""Merton (1976) jump-diffusion: European prices by the Poisson series, characteristic function.

This module imports only numpy, scipy, math, :mod:`limitcase.errors` and the package's
Black-Scholes closed form; it shares no code with the Monte Carlo side.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy import special

from limitcase.errors import ParamError
from limitcase.references.blackscholes import black_scholes
from limitcase.references.quadrature import _check_kind, _check_range, _out

__all__ = ["merton_charfn", "merton_jump_price"]

_MAX_TERMS = 100_000


def _check_jump_params(func: str, vol: Any, intensity: Any, jump_mean: Any, jump_vol: Any) -> tuple[np.ndarray, ...]:
    v = _check_range("vol", vol, func, low=0.0,
                     fix="vol is the diffusion volatility, a non-negative annualised deviation")
    lam = _check_range("intensity", intensity, func, low=0.0,
                       fix="intensity is the expected number of jumps per year, >= 0")
    mu = _check_range("jump_mean", jump_mean, func,
                      fix="jump_mean is the mean of the log jump size, a finite number")
    delta = _check_range("jump_vol", jump_vol, func, low=0.0,
                         fix="jump_vol is the standard deviation of the log jump size, >= 0")
    return v, lam, mu, delta


def merton_charfn(
    u: Any,
    maturity: float,
    rate: float,
    dividend: float,
    vol: float,
    intensity: float,
    jump_mean: float,
    jump_vol: float,
) -> complex | np.ndarray:
    r"""Characteristic function of :math:`\ln(S_T/S_0)` in Merton's jump-diffusion.

    Parameters
    ----------
    u : array_like of complex
        Argument(s) (any complex value: the law has moments of every order).
    maturity : float
        T >= 0 in years.
    rate, dividend : float
        Risk-free rate r and continuous dividend yield q.
    vol : float
        Diffusion volatility :math:`\sigma \ge 0`.
    intensity : float
        Jump intensity :math:`\lambda \ge 0` (jumps per year).
    jump_mean, jump_vol : float
        Mean :math:`\mu_J` and standard deviation :math:`\delta \ge 0` of the log jump size.

    Returns
    -------
    complex or ndarray of complex

    Raises
    ------
    ParamError
        Any parameter out of range or non-finite.

    Notes
    -----
    Under the risk-neutral measure
    :math:`\ln(S_T/S_0) = (r - q - \lambda\bar k - \tfrac12\sigma^2)T + \sigma W_T
    + \sum_{i=1}^{N_T} Y_i`, :math:`N_T \sim \text{Poisson}(\lambda T)`,
    :math:`Y_i \sim N(\mu_J, \delta^2)`, :math:`\bar k = e^{\mu_J + \delta^2/2} - 1`, so

    .. math::

        \varphi(u) = \exp\Big(iu(r - q - \lambda\bar k - \tfrac12\sigma^2)T
            - \tfrac12\sigma^2u^2T + \lambda T\big(e^{iu\mu_J - \delta^2u^2/2} - 1\big)\Big).

    References
    ----------
    .. [1] R. C. Merton, "Option pricing when underlying stock returns are discontinuous",
       Journal of Financial Economics 3(1-2), 1976, 125-144.
    """
    func = "merton_charfn"
    t = float(_check_range("maturity", maturity, func, low=0.0,
                           fix="maturity is a time in years, >= 0"))
    r = float(_check_range("rate", rate, func, fix="pass a finite continuously compounded rate"))
    q = float(_check_range("dividend", dividend, func, fix="pass a finite continuous dividend yield"))
    v, lam, mu, delta = (float(x) for x in _check_jump_params(func, vol, intensity, jump_mean, jump_vol))
    try:
        uu = np.asarray(u, dtype=complex)
    except (TypeError, ValueError) as exc:
        raise ParamError(f"u={u!r} is not a number or array of numbers in {func}; pass complex values") from exc
    if not np.all(np.isfinite(uu)):
        raise ParamError(f"u={u!r} has non-finite entries in {func}; pass finite values")
    kbar = math.expm1(mu + 0.5 * delta * delta)
    expo = (1j * uu * (r - q - lam * kbar - 0.5 * v * v) * t - 0.5 * v * v * uu * uu * t
            + lam * t * np.expm1(1j * uu * mu - 0.5 * delta * delta * uu * uu))
    val = np.exp(expo)
    return complex(val) if val.ndim == 0 else val


def merton_jump_price(
    spot: Any,
    strike: Any,
    maturity: Any,
    rate: Any,
    dividend: Any,
    vol: Any,
    intensity: Any,
    jump_mean: Any,
    jump_vol: Any,
    kind: str = "call",
    *,
    tail_tol: float = 1e-12,
) -> float | np.ndarray:
    r"""Merton (1976) jump-diffusion price of a European call or put by the Poisson series.

    Parameters
    ----------
    spot, strike : array_like
        Spot S_0 > 0 and strike K > 0.
    maturity : array_like
        T >= 0 in years.
    rate, dividend : array_like
        Risk-free rate r and continuous dividend yield q.
    vol : array_like
        Diffusion volatility :math:`\sigma \ge 0`.
    intensity : array_like
        Jump intensity :math:`\lambda \ge 0` per year.
    jump_mean, jump_vol : array_like
        Mean :math:`\mu_J` and standard deviation :math:`\delta \ge 0` of the log jump.
    kind : {"call", "put"}
    tail_tol : float, keyword-only
        Bound on the neglected tail of the series, in price units (default 1e-12).

    Returns
    -------
    float or ndarray
        The price; a float when every argument is a scalar (arguments broadcast).

    Raises
    ------
    ParamError
        Out-of-range or non-finite input, unknown ``kind``, a non-positive ``tail_tol``,
        or more than 50000 expected jumps (the series would need as many terms).

    Notes
    -----
    Conditional on n jumps, :math:`\ln S_T` is normal with variance
    :math:`\sigma_n^2 T = \sigma^2T + n\delta^2` and forward
    :math:`F_n = S_0e^{(r-q)T}e^{-\lambda\bar kT}(1+\bar k)^n`, so [1]_ [2]_

    .. math::

        V = \sum_{n\ge0} e^{-\lambda T}\frac{(\lambda T)^n}{n!}\,
            \mathrm{BS}(S_0, K, T, r, q_n, \sigma_n),\qquad
        q_n = q + \lambda\bar k - n\ln(1+\bar k)/T,

    with :math:`\bar k = e^{\mu_J + \delta^2/2} - 1` and BS the Black-Scholes price
    (:func:`~limitcase.references.blackscholes.black_scholes`; the dividend :math:`q_n`
    gives it the forward :math:`F_n`). Truncation after N terms with a stated bound:
    a put term is at most :math:`Ke^{-rT}`, so the put tail is at most
    :math:`Ke^{-rT}\,\Pr[\text{Poisson}(\lambda T) > N]`; a call term is at most
    :math:`e^{-rT}F_n`, and :math:`\sum_{n>N}\Pr[N_T = n]e^{-rT}F_n =
    S_0e^{-qT}\Pr[\text{Poisson}(\lambda(1+\bar k)T) > N]`. N is the least integer making
    the relevant bound at most ``tail_tol`` (Poisson tails from
    :func:`scipy.special.pdtrc`). Without jumps (:math:`\lambda T = 0`) the price is the
    Black-Scholes price.

    References
    ----------
    .. [1] R. C. Merton, "Option pricing when underlying stock returns are discontinuous",
       Journal of Financial Economics 3(1-2), 1976, 125-144.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       section on jump-diffusion models (Merton 1976).
    """
    func = "merton_jump_price"
    call = _check_kind(kind, func) == "call"
    s = _check_range("spot", spot, func, low=0.0, low_open=True, fix="a spot price is positive")
    k = _check_range("strike", strike, func, low=0.0, low_open=True, fix="a strike is positive")
    t = _check_range("maturity", maturity, func, low=0.0, fix="maturity is a time to expiry in years, >= 0")
    r = _check_range("rate", rate, func, fix="pass a finite continuously compounded rate")
    q = _check_range("dividend", dividend, func, fix="pass a finite continuous dividend yield")
    v, lam, mu, delta = _check_jump_params(func, vol, intensity, jump_mean, jump_vol)
    tol = float(_check_range("tail_tol", tail_tol, func, low=0.0, low_open=True,
                             fix="pass a small positive bound such as 1e-12"))
    s, k, t, r, q, v, lam, mu, delta = np.broadcast_arrays(s, k, t, r, q, v, lam, mu, delta)
    kbar = np.expm1(mu + 0.5 * delta * delta)
    mean_jumps = lam * t
    # Poisson mean of the tail bound and the bound's prefactor, per element.
    if call:
        tail_mean = mean_jumps * (1.0 + kbar)
        scale = s * np.exp(-q * t)
    else:
        tail_mean = mean_jumps
        scale = k * np.exp(-r * t)
    n_per = _terms_needed(tail_mean, scale, tol, func)
    n_terms = int(np.max(n_per)) if n_per.size else 0
    kind_s = "call" if call else "put"
    total = np.zeros(s.shape)
    safe_t = np.where(t > 0.0, t, 1.0)
    log1k = np.log1p(kbar)
    for n in range(n_terms + 1):
        active = n <= n_per
        with np.errstate(divide="ignore"):
            log_w = -mean_jumps + n * np.log(np.where(mean_jumps > 0, mean_jumps, 1.0)) - special.gammaln(n + 1)
        weight = np.where(mean_jumps > 0, np.exp(log_w), 1.0 if n == 0 else 0.0)
        vol_n = np.sqrt(v * v + n * delta * delta / safe_t)
        q_n = q + lam * kbar - n * log1k / safe_t
        term = black_scholes(s, k, t, r, np.where(t > 0.0, q_n, q), np.where(t > 0.0, vol_n, v), kind_s)
        total = total + np.where(active, weight * term, 0.0)
    return _out(total)


def _terms_per_element(tail_mean: np.ndarray, scale: np.ndarray, tol: float) -> np.ndarray:
    """Least N per element with scale * P[Poisson(tail_mean) > N] <= tol.

    The search starts below the mean (the tail there is above 1e-12 for any mean that
    matters) and steps up one term at a time: about 10 sqrt(mean) + 30 steps.
    """
    start = np.maximum(np.floor(tail_mean - 10.0 * np.sqrt(tail_mean)) - 1.0, 0.0)
    n = start.astype(np.int64)
    todo = scale * special.pdtrc(n, tail_mean) > tol
    while np.any(todo):
        n = np.where(todo, n + 1, n)
        todo = scale * special.pdtrc(n, tail_mean) > tol
    return n


def _terms_needed(tail_mean: np.ndarray, scale: np.ndarray, tol: float, func: str) -> np.ndarray:
    if tail_mean.size and float(np.max(tail_mean)) > 0.5 * _MAX_TERMS:
        raise ParamError(
            f"intensity * maturity = {float(np.max(tail_mean))!r} expected jumps needs more than "
            f"{_MAX_TERMS // 2} series terms in {func}; price by characteristic-function "
            f"quadrature instead or reduce the intensity"
        )
    return _terms_per_element(tail_mean, scale, tol)
