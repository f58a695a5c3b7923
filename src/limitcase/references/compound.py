r"""Compound options (Geske 1979) and the complex chooser (Rubinstein 1991) under
Black-Scholes-Merton, in closed form with the bivariate normal distribution.

The bivariate normal is evaluated by adaptive quadrature of its correlation integral
(accurate to about 1e-14). This module imports only numpy, scipy, math and
:mod:`limitcase.errors`.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy import integrate, optimize
from scipy.special import ndtr

from limitcase.references._inputs import _num, _loop
from limitcase.errors import ParamError

__all__ = ["bivariate_normal_cdf", "complex_chooser", "compound_option"]

_COMPOUND_KINDS = ("call-on-call", "put-on-call", "call-on-put", "put-on-put")


def _bvn(a: float, b: float, rho: float) -> float:
    """P(X <= a, Y <= b) for standard normals with correlation rho, by quadrature of
    dM/drho = phi2(a, b; rho) from 0 to rho (Plackett's identity)."""
    if a == -math.inf or b == -math.inf:
        return 0.0
    if a == math.inf:
        return float(ndtr(b))
    if b == math.inf:
        return float(ndtr(a))
    if rho == 0.0:
        return float(ndtr(a) * ndtr(b))
    if abs(rho) >= 1.0:
        return float(ndtr(min(a, b))) if rho > 0 else max(0.0, float(ndtr(a) - ndtr(-b)))

    def dens(r: float) -> float:
        one_m = 1.0 - r * r
        return math.exp(-(a * a - 2.0 * a * b * r + b * b) / (2.0 * one_m)) / math.sqrt(one_m)

    val, _ = integrate.quad(dens, 0.0, rho, epsabs=1e-15, epsrel=1e-13, limit=200)
    return float(ndtr(a) * ndtr(b) + val / (2.0 * math.pi))


def bivariate_normal_cdf(a: Any, b: Any, rho: Any) -> float | np.ndarray:
    r"""Standard bivariate normal distribution function :math:`M(a, b; \rho)`.

    Parameters
    ----------
    a, b : array_like
        Upper limits (``-inf`` and ``inf`` allowed).
    rho : array_like
        Correlation in [-1, 1].

    Returns
    -------
    float or ndarray

    Notes
    -----
    Plackett's identity :math:`\partial M/\partial\rho = \varphi_2(a, b; \rho)` gives

    .. math::

        M(a, b; \rho) = N(a)N(b) + \frac{1}{2\pi}\int_0^\rho
        \frac{1}{\sqrt{1 - r^2}}\exp\Big(-\frac{a^2 - 2abr + b^2}{2(1 - r^2)}\Big)dr,

    integrated by QUADPACK; agreement with a direct two-dimensional scipy quadrature is
    tested to 1e-12.

    References
    ----------
    .. [1] R. L. Plackett, "A reduction formula for normal multivariate integrals",
       Biometrika 41, 1954.
    .. [2] A. Genz, "Numerical computation of rectangular bivariate and trivariate normal
       and t probabilities", Statistics and Computing 14, 2004.
    """
    func = "bivariate_normal_cdf"

    def one(x: float, y: float, r: float) -> float:
        if math.isnan(x) or math.isnan(y):
            raise ParamError(f"a={x!r}, b={y!r} in {func}: limits must not be NaN")
        if not -1.0 <= r <= 1.0:
            raise ParamError(f"rho={r!r} is outside [-1, 1] in {func}")
        return _bvn(x, y, r)

    return _loop((a, b, rho), one)


def _bs(call: bool, s: float, k: float, tau: float, r: float, q: float, v: float) -> float:
    """Black-Scholes-Merton price (Black and Scholes 1973; Merton 1973)."""
    sd = v * math.sqrt(tau)
    if sd == 0.0 or s == 0.0:
        fwd = s * math.exp((r - q) * tau)
        return math.exp(-r * tau) * (max(fwd - k, 0.0) if call else max(k - fwd, 0.0))
    if k == 0.0:
        return s * math.exp(-q * tau) if call else 0.0
    d1 = (math.log(s / k) + (r - q + 0.5 * v * v) * tau) / sd
    d2 = d1 - sd
    if call:
        return float(s * math.exp(-q * tau) * ndtr(d1) - k * math.exp(-r * tau) * ndtr(d2))
    return float(k * math.exp(-r * tau) * ndtr(-d2) - s * math.exp(-q * tau) * ndtr(-d1))


def _root(f: Any, s: float) -> float:
    """The spot I > 0 with f(I) = 0 for an increasing f with f(0+) < 0 < f(inf)."""
    lo, hi = s, s
    while f(lo) > 0.0:
        lo *= 0.5
        if lo < 1e-300:
            return 0.0
    while f(hi) < 0.0:
        hi *= 2.0
        if hi > 1e300:
            return math.inf
    return float(optimize.brentq(f, lo, hi, xtol=1e-14 * s, rtol=1e-15, maxiter=500))


def compound_option(
    kind: str,
    spot: Any,
    strike_underlying: Any,
    strike_compound: Any,
    first_expiry: Any,
    second_expiry: Any,
    rate: Any,
    dividend: Any,
    vol: Any,
) -> float | np.ndarray:
    r"""Option on an option (Geske 1979): call or put, expiring at :math:`t_1` with strike
    :math:`X_2`, on a call or put expiring at :math:`T_2 > t_1` with strike :math:`X_1`.

    Parameters
    ----------
    kind : {"call-on-call", "put-on-call", "call-on-put", "put-on-put"}
    spot, rate, dividend, vol : array_like
        Black-Scholes-Merton inputs (dividend = continuous yield q, b = r - q).
    strike_underlying : array_like
        :math:`X_1 > 0`, strike of the underlying option.
    strike_compound : array_like
        :math:`X_2 \ge 0`, price paid at :math:`t_1` for the underlying option.
    first_expiry, second_expiry : array_like
        :math:`0 < t_1 < T_2`.

    Returns
    -------
    float or ndarray

    Notes
    -----
    With :math:`I` the spot at :math:`t_1` at which the underlying option is worth
    :math:`X_2`, :math:`\rho = \sqrt{t_1/T_2}`,
    :math:`y_1 = [\ln(S/I) + (b + \sigma^2/2)t_1]/(\sigma\sqrt{t_1})`,
    :math:`y_2 = y_1 - \sigma\sqrt{t_1}`,
    :math:`z_1 = [\ln(S/X_1) + (b + \sigma^2/2)T_2]/(\sigma\sqrt{T_2})`,
    :math:`z_2 = z_1 - \sigma\sqrt{T_2}` and M the bivariate normal:

    .. math::

        \text{call on call} &= S e^{(b-r)T_2} M(z_1, y_1; \rho)
            - X_1 e^{-rT_2} M(z_2, y_2; \rho) - X_2 e^{-rt_1} N(y_2), \\
        \text{put on call} &= X_1 e^{-rT_2} M(z_2, -y_2; -\rho)
            - S e^{(b-r)T_2} M(z_1, -y_1; -\rho) + X_2 e^{-rt_1} N(-y_2), \\
        \text{call on put} &= X_1 e^{-rT_2} M(-z_2, -y_2; \rho)
            - S e^{(b-r)T_2} M(-z_1, -y_1; \rho) - X_2 e^{-rt_1} N(-y_2), \\
        \text{put on put} &= S e^{(b-r)T_2} M(-z_1, y_1; -\rho)
            - X_1 e^{-rT_2} M(-z_2, y_2; -\rho) + X_2 e^{-rt_1} N(y_2).

    I is found by Brent's method to 1e-14 relative. Edge cases: :math:`X_2 = 0` (a
    call on the option is the option, a put is worthless); an underlying put worth less
    than :math:`X_2` at every spot (a call on it is worthless, a put on it always
    exercised). Zero vol: the deterministic forward path.

    References
    ----------
    .. [1] R. Geske, "The Valuation of Compound Options", Journal of Financial Economics
       7(1), 1979.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       options on options (with a worked example).
    """
    func = "compound_option"
    if kind not in _COMPOUND_KINDS:
        raise ParamError(f"kind={kind!r} is not one of {', '.join(map(repr, _COMPOUND_KINDS))} in {func}")
    outer_call = kind.startswith("call")
    inner_call = kind.endswith("call")

    def one(s: float, x1: float, x2: float, t1: float, t2: float, r: float, q: float, v: float) -> float:
        s = _num("spot", s, func, low=0.0, low_open=True, fix="a spot price is positive")
        x1 = _num("strike_underlying", x1, func, low=0.0, low_open=True, fix="the underlying strike is positive")
        x2 = _num("strike_compound", x2, func, low=0.0, fix="the compound strike is >= 0")
        t1 = _num("first_expiry", t1, func, low=0.0, fix="a time in years >= 0")
        t2 = _num("second_expiry", t2, func, low=0.0, fix="a time in years >= 0")
        if not t1 < t2:
            raise ParamError(f"first_expiry={t1!r} is not before second_expiry={t2!r} in {func}")
        r = _num("rate", r, func, fix="pass a finite rate")
        q = _num("dividend", q, func, fix="pass a finite dividend yield")
        v = _num("vol", v, func, low=0.0, fix="a volatility is >= 0")
        b, tau = r - q, t2 - t1
        under = _bs(inner_call, s, x1, t2, r, q, v)
        if v == 0.0 or t1 == 0.0:
            s1 = s * math.exp(b * t1)
            inner = _bs(inner_call, s1, x1, tau, r, q, v)
            return math.exp(-r * t1) * (max(inner - x2, 0.0) if outer_call else max(x2 - inner, 0.0))
        if x2 == 0.0:
            return under if outer_call else 0.0
        if inner_call:
            crit = _root(lambda i: _bs(True, i, x1, tau, r, q, v) - x2, s)
        else:
            cap = x1 * math.exp(-r * tau)  # the put's value as the spot goes to 0
            if x2 >= cap:  # never exercised (call on put) / always exercised (put on put)
                return 0.0 if outer_call else x2 * math.exp(-r * t1) - under
            crit = _root(lambda i: x2 - _bs(False, i, x1, tau, r, q, v), s)
        sd1, sd2 = v * math.sqrt(t1), v * math.sqrt(t2)
        y1 = (math.log(s / crit) + (b + 0.5 * v * v) * t1) / sd1
        y2 = y1 - sd1
        z1 = (math.log(s / x1) + (b + 0.5 * v * v) * t2) / sd2
        z2 = z1 - sd2
        rho = math.sqrt(t1 / t2)
        sf, kf, cf = s * math.exp((b - r) * t2), x1 * math.exp(-r * t2), x2 * math.exp(-r * t1)
        if kind == "call-on-call":
            return sf * _bvn(z1, y1, rho) - kf * _bvn(z2, y2, rho) - cf * float(ndtr(y2))
        if kind == "put-on-call":
            return kf * _bvn(z2, -y2, -rho) - sf * _bvn(z1, -y1, -rho) + cf * float(ndtr(-y2))
        if kind == "call-on-put":
            return kf * _bvn(-z2, -y2, rho) - sf * _bvn(-z1, -y1, rho) - cf * float(ndtr(-y2))
        return sf * _bvn(-z1, y1, -rho) - kf * _bvn(-z2, y2, -rho) + cf * float(ndtr(y2))

    return _loop((spot, strike_underlying, strike_compound, first_expiry, second_expiry, rate, dividend, vol), one)


def complex_chooser(
    spot: Any,
    strike_call: Any,
    strike_put: Any,
    choose_time: Any,
    call_maturity: Any,
    put_maturity: Any,
    rate: Any,
    dividend: Any,
    vol: Any,
) -> float | np.ndarray:
    r"""Complex chooser (Rubinstein 1991): at time t the holder takes the more valuable of
    a call (strike :math:`X_c`, expiry :math:`T_c`) and a put (:math:`X_p`, :math:`T_p`).

    Parameters
    ----------
    spot, rate, dividend, vol : array_like
        Black-Scholes-Merton inputs (b = r - q).
    strike_call, strike_put : array_like
        :math:`X_c, X_p > 0`.
    choose_time, call_maturity, put_maturity : array_like
        :math:`0 \le t < T_c` and :math:`t < T_p`.

    Returns
    -------
    float or ndarray

    Notes
    -----
    With I the spot at t where the call and the put are worth the same,
    :math:`d_1 = [\ln(S/I) + (b + \sigma^2/2)t]/(\sigma\sqrt t)`, :math:`d_2 = d_1 -
    \sigma\sqrt t`, :math:`y_1 = [\ln(S/X_c) + (b + \sigma^2/2)T_c]/(\sigma\sqrt{T_c})`,
    :math:`y_2 = [\ln(S/X_p) + (b + \sigma^2/2)T_p]/(\sigma\sqrt{T_p})`,
    :math:`\rho_1 = \sqrt{t/T_c}`, :math:`\rho_2 = \sqrt{t/T_p}`:

    .. math::

        w = S e^{(b-r)T_c} M(d_1, y_1; \rho_1) - X_c e^{-rT_c} M(d_2, y_1 - \sigma\sqrt{T_c}; \rho_1)
          - S e^{(b-r)T_p} M(-d_1, -y_2; \rho_2)
          + X_p e^{-rT_p} M(-d_2, -y_2 + \sigma\sqrt{T_p}; \rho_2).

    Limits: :math:`X_c = X_p`, :math:`T_c = T_p` is the simple chooser; t = 0 gives the
    larger of the call and the put today; zero vol, the deterministic path.

    References
    ----------
    .. [1] M. Rubinstein, "Options for the Undecided", Risk 4(4), 1991.
    .. [2] E. G. Haug, *The Complete Guide to Option Pricing Formulas*, 2nd ed., 2007,
       complex chooser options (with a worked example).
    """
    func = "complex_chooser"

    def one(s: float, xc: float, xp: float, t: float, tc: float, tp: float, r: float, q: float,
            v: float) -> float:
        s = _num("spot", s, func, low=0.0, low_open=True, fix="a spot price is positive")
        xc = _num("strike_call", xc, func, low=0.0, low_open=True, fix="a strike is positive")
        xp = _num("strike_put", xp, func, low=0.0, low_open=True, fix="a strike is positive")
        t = _num("choose_time", t, func, low=0.0, fix="a time in years >= 0")
        tc = _num("call_maturity", tc, func, low=0.0, fix="a time in years")
        tp = _num("put_maturity", tp, func, low=0.0, fix="a time in years")
        if not (t < tc and t < tp):
            raise ParamError(f"choose_time={t!r} is not before call_maturity={tc!r} and "
                             f"put_maturity={tp!r} in {func}")
        r = _num("rate", r, func, fix="pass a finite rate")
        q = _num("dividend", q, func, fix="pass a finite dividend yield")
        v = _num("vol", v, func, low=0.0, fix="a volatility is >= 0")
        b = r - q
        if v == 0.0 or t == 0.0:
            st = s * math.exp(b * t)
            c, p = _bs(True, st, xc, tc - t, r, q, v), _bs(False, st, xp, tp - t, r, q, v)
            return math.exp(-r * t) * max(c, p)
        crit = _root(lambda i: _bs(True, i, xc, tc - t, r, q, v) - _bs(False, i, xp, tp - t, r, q, v), s)
        sdt, sdc, sdp = v * math.sqrt(t), v * math.sqrt(tc), v * math.sqrt(tp)
        d1 = (math.log(s / crit) + (b + 0.5 * v * v) * t) / sdt
        d2 = d1 - sdt
        y1 = (math.log(s / xc) + (b + 0.5 * v * v) * tc) / sdc
        y2 = (math.log(s / xp) + (b + 0.5 * v * v) * tp) / sdp
        rho1, rho2 = math.sqrt(t / tc), math.sqrt(t / tp)
        return (s * math.exp((b - r) * tc) * _bvn(d1, y1, rho1)
                - xc * math.exp(-r * tc) * _bvn(d2, y1 - sdc, rho1)
                - s * math.exp((b - r) * tp) * _bvn(-d1, -y2, rho2)
                + xp * math.exp(-r * tp) * _bvn(-d2, -y2 + sdp, rho2))

    return _loop((spot, strike_call, strike_put, choose_time, call_maturity, put_maturity, rate, dividend, vol), one)
