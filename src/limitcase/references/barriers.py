"""Single-barrier options under Black-Scholes-Merton, continuous and (approximately) discrete
monitoring.

All functions broadcast their numeric arguments and return a float for scalar input.
Conventions as in :mod:`limitcase.references.blackscholes` (b = rate - dividend).
"""

from __future__ import annotations

import math

import numpy as np
from scipy.special import log_ndtr, ndtr, zeta

from limitcase.errors import ParamError
from limitcase.references.blackscholes import (
    ArrayLike,
    _as_float,
    _bs_core,
    _check,
    _market,
    _out,
)

__all__ = [
    "BARRIER_KINDS",
    "BGK_BETA",
    "barrier_option",
    "bgk_barrier_shift",
    "discrete_barrier_option",
]

BARRIER_KINDS: tuple[str, ...] = (
    "down-and-out-call",
    "up-and-out-call",
    "down-and-in-call",
    "up-and-in-call",
    "down-and-out-put",
    "up-and-out-put",
    "down-and-in-put",
    "up-and-in-put",
)
"""The eight single-barrier kinds accepted by :func:`barrier_option`."""

BGK_BETA: float = float(-zeta(0.5) / math.sqrt(2.0 * math.pi))
r"""Broadie-Glasserman-Kou constant :math:`\beta = -\zeta(1/2)/\sqrt{2\pi} \approx 0.5825971579`."""


def _parse_kind(kind: object, func: str) -> tuple[bool, bool, bool]:
    """Return (is_down, is_out, is_call) for a barrier kind string."""
    if not isinstance(kind, str) or kind not in BARRIER_KINDS:
        raise ParamError(
            f"kind={kind!r} is not a barrier kind in {func}; pass one of "
            f"{', '.join(map(repr, BARRIER_KINDS))}"
        )
    direction, _, io, option = kind.split("-")
    return direction == "down", io == "out", option == "call"


def _continuous_barrier(
    down: bool,
    out: bool,
    call: bool,
    s: np.ndarray,
    x: np.ndarray,
    h: np.ndarray,
    t: np.ndarray,
    r: np.ndarray,
    q: np.ndarray,
    v: np.ndarray,
    rebate: np.ndarray,
    at_hit: bool,
) -> np.ndarray:
    """Reiner-Rubinstein formulas for S strictly on the live side of a finite, positive
    barrier and sigma*sqrt(T) > 0 (the caller substitutes safe values elsewhere)."""
    eta = 1.0 if down else -1.0
    phi = 1.0 if call else -1.0
    b = r - q
    sd = v * np.sqrt(t)
    v2 = v * v
    mu = (b - 0.5 * v2) / v2
    # lambda may be imaginary when r < 0; the rebate term below is even in lambda and so real
    lam = np.sqrt((mu * mu + 2.0 * r / v2).astype(complex))
    pf = s * np.exp(-q * t)
    kd = x * np.exp(-r * t)
    lhs = np.log(h / s)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        x1 = np.log(s / x) / sd + (1.0 + mu) * sd
        y1 = (2.0 * lhs - np.log(x / s)) / sd + (1.0 + mu) * sd
    x2 = -lhs / sd + (1.0 + mu) * sd
    y2 = lhs / sd + (1.0 + mu) * sd

    def _pn(power: np.ndarray, arg: np.ndarray) -> np.ndarray:
        # (H/S)**power * N(arg) in log space: the power overflows for small vol, the product does not
        return np.exp(power * lhs + log_ndtr(arg))

    def _kx(term: np.ndarray) -> np.ndarray:
        # strike times a probability; a zero strike contributes exactly zero (not 0 * nan)
        return np.where(x > 0, kd * term, 0.0)

    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        a = phi * pf * ndtr(phi * x1) - phi * _kx(ndtr(phi * x1 - phi * sd))
        b_ = phi * pf * ndtr(phi * x2) - phi * kd * ndtr(phi * x2 - phi * sd)
        c = phi * pf * _pn(2.0 * (mu + 1.0), eta * y1) - phi * _kx(_pn(2.0 * mu, eta * y1 - eta * sd))
        d = phi * pf * _pn(2.0 * (mu + 1.0), eta * y2) - phi * kd * _pn(2.0 * mu, eta * y2 - eta * sd)
    df = np.exp(-r * t)
    # risk-neutral probability that the barrier is never touched before T
    p_live = ndtr(eta * x2 - eta * sd) - _pn(2.0 * mu, eta * y2 - eta * sd)
    e_term = rebate * df * p_live
    if out:
        if at_hit:
            z = lhs / sd + lam * sd
            f_term = rebate * np.real(
                np.exp((mu + lam) * lhs + log_ndtr(eta * z))
                + np.exp((mu - lam) * lhs + log_ndtr(eta * z - 2.0 * eta * lam * sd))
            )
        else:
            f_term = rebate * df * (1.0 - p_live)
    above = x > h  # strike above the barrier
    if call and down and not out:
        return np.where(above, c + e_term, a - b_ + d + e_term)
    if call and not down and not out:
        return np.where(above, a + e_term, b_ - c + d + e_term)
    if not call and down and not out:
        return np.where(above, b_ - c + d + e_term, a + e_term)
    if not call and not down and not out:
        return np.where(above, a - b_ + d + e_term, c + e_term)
    if call and down and out:
        return np.where(above, a - c + f_term, b_ - d + f_term)
    if call and not down and out:
        return np.where(above, f_term, a - b_ + c - d + f_term)
    if not call and down and out:
        return np.where(above, a - b_ + c - d + f_term, f_term)
    return np.where(above, b_ - d + f_term, a - c + f_term)  # up-and-out put


def barrier_option(
    kind: str,
    spot: ArrayLike,
    strike: ArrayLike,
    barrier: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    rebate: ArrayLike = 0.0,
    rebate_at_hit: bool = True,
) -> float | np.ndarray:
    r"""Single-barrier European option, barrier monitored continuously.

    Parameters
    ----------
    kind : str
        One of :data:`BARRIER_KINDS`: ``"down-and-out-call"``, ``"up-and-out-call"``,
        ``"down-and-in-call"``, ``"up-and-in-call"`` and the same four with ``put``.
    spot, strike, maturity, rate, dividend, vol : array_like
        As in :func:`limitcase.references.black_scholes`.
    barrier : array_like
        Barrier level H >= 0; ``inf`` is allowed (an up barrier that is never reached).
    rebate : array_like, optional
        Cash rebate R >= 0. A knock-out pays it when the barrier is hit (``rebate_at_hit``
        True) or at expiry (False); a knock-in pays it at expiry if the barrier was never hit.
    rebate_at_hit : bool, optional
        Timing of the knock-out rebate; ignored for knock-ins.

    Returns
    -------
    float or ndarray

    Notes
    -----
    With :math:`\mu = (b - \sigma^2/2)/\sigma^2`,
    :math:`\lambda = \sqrt{\mu^2 + 2r/\sigma^2}`, :math:`\eta = +1` for a down and
    :math:`-1` for an up barrier, :math:`\phi = +1` for a call and :math:`-1` for a put,

    .. math::

        x_1 &= \frac{\ln(S/X)}{\sigma\sqrt T} + (1+\mu)\sigma\sqrt T, \quad
        x_2 = \frac{\ln(S/H)}{\sigma\sqrt T} + (1+\mu)\sigma\sqrt T, \\
        y_1 &= \frac{\ln(H^2/(SX))}{\sigma\sqrt T} + (1+\mu)\sigma\sqrt T, \quad
        y_2 = \frac{\ln(H/S)}{\sigma\sqrt T} + (1+\mu)\sigma\sqrt T, \quad
        z = \frac{\ln(H/S)}{\sigma\sqrt T} + \lambda\sigma\sqrt T, \\
        A &= \phi S e^{(b-r)T} N(\phi x_1) - \phi X e^{-rT} N(\phi x_1 - \phi\sigma\sqrt T), \\
        B &= \phi S e^{(b-r)T} N(\phi x_2) - \phi X e^{-rT} N(\phi x_2 - \phi\sigma\sqrt T), \\
        C &= \phi S e^{(b-r)T} (H/S)^{2(\mu+1)} N(\eta y_1)
             - \phi X e^{-rT} (H/S)^{2\mu} N(\eta y_1 - \eta\sigma\sqrt T), \\
        D &= \phi S e^{(b-r)T} (H/S)^{2(\mu+1)} N(\eta y_2)
             - \phi X e^{-rT} (H/S)^{2\mu} N(\eta y_2 - \eta\sigma\sqrt T), \\
        E &= R e^{-rT}\,[N(\eta x_2 - \eta\sigma\sqrt T) - (H/S)^{2\mu} N(\eta y_2 - \eta\sigma\sqrt T)], \\
        F &= R\,[(H/S)^{\mu+\lambda} N(\eta z) + (H/S)^{\mu-\lambda} N(\eta z - 2\eta\lambda\sigma\sqrt T)].

    Then (X = strike):

    ===================  ===================  ===================
    kind                 X > H                X < H
    ===================  ===================  ===================
    down-and-in call     C + E                A - B + D + E
    up-and-in call       A + E                B - C + D + E
    down-and-in put      B - C + D + E        A + E
    up-and-in put        A - B + D + E        C + E
    down-and-out call    A - C + F            B - D + F
    up-and-out call      F                    A - B + C - D + F
    down-and-out put     A - B + C - D + F    F
    up-and-out put       B - D + F            A - C + F
    ===================  ===================  ===================

    E is the rebate paid at expiry if the barrier is never touched (E/R e^{-rT} is the
    no-touch probability); F is the rebate paid at the hitting time. A knock-out whose
    rebate is paid at expiry uses :math:`R e^{-rT} - E` in place of F. When r < 0 makes
    :math:`\lambda` imaginary, F is still real (it is even in :math:`\lambda`) and is
    evaluated in complex arithmetic.

    Cases handled explicitly, not by the formula: barrier already breached at the start
    (S <= H for down, S >= H for up): a knock-out is worth its rebate (R now if paid at
    hit, :math:`R e^{-rT}` otherwise) and a knock-in is the vanilla option. A barrier that
    can never be reached (H = 0 for down, H = inf for up, or S = 0 under an up barrier):
    a knock-out is the vanilla, a knock-in is worth :math:`R e^{-rT}`. Zero
    :math:`\sigma\sqrt T`: the path :math:`S e^{bt}` is deterministic; the barrier is hit
    iff :math:`S e^{bT}` is on or past it, at time :math:`\tau = \ln(H/S)/b`.

    References
    ----------
    .. [1] M. Rubinstein and E. Reiner, "Breaking Down the Barriers", Risk 4(8), 1991.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       chapter 4 (standard barrier options), including the table of example values
       S = 100, T = 0.5, r = 0.08, b = 0.04, rebate 3.
    """
    func = "barrier_option"
    down, out, call = _parse_kind(kind, func)
    if not isinstance(rebate_at_hit, (bool, np.bool_)):
        raise ParamError(
            f"rebate_at_hit={rebate_at_hit!r} is not a bool in {func}; pass True (paid when the "
            f"barrier is hit) or False (paid at expiry)"
        )
    s, x, t, r, q, v = _market(func, spot, strike, maturity, rate, dividend, vol)
    h = _as_float("barrier", barrier, func)
    _check("barrier", h, func, low=0.0, allow_inf=True, fix="a barrier is a non-negative price level (inf allowed)")
    reb = _as_float("rebate", rebate, func)
    _check("rebate", reb, func, low=0.0, fix="a rebate is a non-negative cash amount")
    s, x, h, t, r, q, v, reb = np.broadcast_arrays(s, x, h, t, r, q, v, reb)

    df = np.exp(-r * t)
    vanilla = _bs_core(s, x, t, r, q, v, call)
    breached = (s <= h) if down else (s >= h)
    unreachable = ~breached & ((h == 0) if down else (np.isinf(h) | (s == 0)))
    sd = v * np.sqrt(t)
    deterministic = ~breached & ~unreachable & (sd == 0)
    regular = ~breached & ~unreachable & ~deterministic

    # regular case, evaluated on safe stand-in values where it does not apply
    ss = np.where(regular, s, 100.0)
    hs_ = np.where(regular, h, 90.0 if down else 110.0)
    ts = np.where(regular, t, 1.0)
    vs = np.where(regular, v, 0.2)
    with np.errstate(all="ignore"):
        price = _continuous_barrier(down, out, call, ss, x, hs_, ts, r, q, vs, reb, rebate_at_hit)
    price = np.where(regular, price, 0.0)

    # knocked already
    knocked = (reb if rebate_at_hit else reb * df) if out else vanilla
    price = np.where(breached, knocked, price)
    # never reachable
    price = np.where(unreachable, vanilla if out else reb * df, price)

    # deterministic path S e^{bt}
    if np.any(deterministic):
        b = r - q
        st = s * np.exp(b * t)
        hit = (st <= h) if down else (st >= h)
        with np.errstate(all="ignore"):
            tau = np.where(hit & (b != 0), np.log(h / s) / np.where(b != 0, b, 1.0), t)
        tau = np.clip(np.nan_to_num(tau, nan=0.0), 0.0, t)
        if out:
            paid = reb * np.exp(-r * tau) if rebate_at_hit else reb * df
            det = np.where(hit, paid, vanilla)
        else:
            det = np.where(hit, vanilla, reb * df)
        price = np.where(deterministic, det, price)
    return _out(price)


def bgk_barrier_shift(
    barrier: ArrayLike, vol: ArrayLike, dt: ArrayLike, direction: str
) -> float | np.ndarray:
    r"""Broadie-Glasserman-Kou continuity correction: the continuous-monitoring barrier that
    approximates a barrier monitored every ``dt`` years.

    Parameters
    ----------
    barrier : array_like
        Discretely monitored barrier H >= 0 (inf allowed).
    vol : array_like
        Volatility sigma >= 0.
    dt : array_like
        Time between monitoring dates (> 0; 0 gives H back).
    direction : {"up", "down"}
        Side of the barrier: an up barrier moves up, a down barrier moves down.

    Returns
    -------
    float or ndarray
        :math:`H e^{+\beta\sigma\sqrt{\Delta t}}` (up) or
        :math:`H e^{-\beta\sigma\sqrt{\Delta t}}` (down), with
        :math:`\beta = -\zeta(1/2)/\sqrt{2\pi} \approx 0.5825971579`.

    Notes
    -----
    The discretely monitored price equals the continuously monitored price at the shifted
    barrier up to :math:`o(1/\sqrt m)` for m monitoring dates. This is an asymptotic
    correction, an APPROXIMATION (see :func:`discrete_barrier_option`).

    References
    ----------
    .. [1] M. Broadie, P. Glasserman and S. Kou, "A Continuity Correction for Discrete
       Barrier Options", Mathematical Finance 7(4), 1997.
    """
    func = "bgk_barrier_shift"
    if direction not in ("up", "down"):
        raise ParamError(
            f"direction={direction!r} is not 'up' or 'down' in {func}; pass 'down' for a barrier "
            f"below the spot, 'up' for one above"
        )
    h = _as_float("barrier", barrier, func)
    v = _as_float("vol", vol, func)
    d = _as_float("dt", dt, func)
    _check("barrier", h, func, low=0.0, allow_inf=True, fix="a barrier is a non-negative price level")
    _check("vol", v, func, low=0.0, fix="a volatility is a non-negative annualised standard deviation")
    _check("dt", d, func, low=0.0, fix="dt is the time between monitoring dates in years")
    sign = 1.0 if direction == "up" else -1.0
    return _out(h * np.exp(sign * BGK_BETA * v * np.sqrt(d)))


def discrete_barrier_option(
    kind: str,
    spot: ArrayLike,
    strike: ArrayLike,
    barrier: ArrayLike,
    maturity: ArrayLike,
    rate: ArrayLike,
    dividend: ArrayLike,
    vol: ArrayLike,
    n_monitoring: int | None = None,
    *,
    dt: ArrayLike | None = None,
    rebate: ArrayLike = 0.0,
    rebate_at_hit: bool = True,
) -> float | np.ndarray:
    r"""APPROXIMATION of a discretely monitored barrier option (Broadie-Glasserman-Kou).

    **Never use this as a pass/fail reference.** It is the continuous-monitoring price of
    :func:`barrier_option` at the barrier moved away from the spot by
    :func:`bgk_barrier_shift`; its error is :math:`o(1/\sqrt m)` in the number m of
    monitoring dates, with no usable bound at finite m, and it is poor when the barrier
    is close to the spot (within a few :math:`\sigma\sqrt{\Delta t}`). Measured for a
    down-and-out call, S = K = 100, sigma = 0.3, r = 0.1, q = 0, T = 0.2, m = 50 dates,
    against backward induction on a fine grid (true discrete price / this approximation):
    H = 85: 6.3222 / 6.3223; H = 95: 4.9068 / 4.9071; H = 99: 2.3364 / 2.2713 (-2.8%);
    H = 99.5: 1.9359 / 1.7933 (-7.4%). The continuous prices are 6.3076, 4.3975, 1.1708
    and 0.6048.

    Parameters
    ----------
    kind, spot, strike, barrier, maturity, rate, dividend, vol, rebate, rebate_at_hit
        As in :func:`barrier_option`; the barrier is the discretely monitored level.
    n_monitoring : int, optional
        Number m of equally spaced monitoring dates :math:`t_i = iT/m`, i = 1..m.
    dt : array_like, optional
        Time between monitoring dates instead of ``n_monitoring`` (give exactly one).

    Returns
    -------
    float or ndarray

    Notes
    -----
    :math:`V_m(H) \approx V(H e^{\pm\beta\sigma\sqrt{T/m}})`, + for up and - for down
    barriers, :math:`\beta = -\zeta(1/2)/\sqrt{2\pi}`. A spot already on or past the
    *shifted* barrier is treated as knocked at the start, as in :func:`barrier_option`.
    A rebate paid at hit is paid at the continuous hitting time of the shifted barrier.

    References
    ----------
    .. [1] M. Broadie, P. Glasserman and S. Kou, "A Continuity Correction for Discrete
       Barrier Options", Mathematical Finance 7(4), 1997.
    """
    func = "discrete_barrier_option"
    down, _, _ = _parse_kind(kind, func)
    if (n_monitoring is None) == (dt is None):
        raise ParamError(
            f"n_monitoring={n_monitoring!r} and dt={dt!r} in {func}: give exactly one of them "
            f"(the number of monitoring dates, or the time between them)"
        )
    if dt is None:
        if isinstance(n_monitoring, bool) or not isinstance(n_monitoring, (int, np.integer)) or n_monitoring < 1:
            raise ParamError(
                f"n_monitoring={n_monitoring!r} is not an integer >= 1 in {func}; pass the number "
                f"of monitoring dates"
            )
        t = _as_float("maturity", maturity, func)
        _check("maturity", t, func, low=0.0, fix="maturity is a time to expiry in years, >= 0")
        step = t / int(n_monitoring)
    else:
        step = _as_float("dt", dt, func)
    shifted = bgk_barrier_shift(barrier, vol, step, "down" if down else "up")
    return barrier_option(
        kind, spot, strike, shifted, maturity, rate, dividend, vol,
        rebate=rebate, rebate_at_hit=rebate_at_hit,
    )
