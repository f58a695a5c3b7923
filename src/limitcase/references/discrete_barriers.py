"""Discretely monitored single and double barrier options by recursive quadrature.

Under Black-Scholes-Merton dynamics the log-price moves by independent Gaussian steps
between monitoring dates, so the value of a knock-out option on the live set at each date
is the integral of its value at the next date against a Gaussian kernel (the QUAD method of
Andricopoulos, Widdicks, Duck and Newton, 2003). Knock-ins follow by in-out parity.

The monitoring dates are an explicit array built by the caller from the contract's terms;
nothing here reads a product's schedule. This module imports only numpy, scipy, math and
:mod:`limitcase.errors`.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy import sparse
from scipy.special import ndtr

from limitcase.references._inputs import _num, _loop
from limitcase.errors import ParamError

__all__ = [
    "DISCRETE_BARRIER_KINDS",
    "DOUBLE_BARRIER_KINDS",
    "discrete_barrier_by_quadrature",
    "discrete_double_barrier_by_quadrature",
]

DISCRETE_BARRIER_KINDS: tuple[str, ...] = (
    "down-and-out-call",
    "up-and-out-call",
    "down-and-in-call",
    "up-and-in-call",
    "down-and-out-put",
    "up-and-out-put",
    "down-and-in-put",
    "up-and-in-put",
)
"""Single-barrier kinds accepted by :func:`discrete_barrier_by_quadrature`."""

DOUBLE_BARRIER_KINDS: tuple[str, ...] = (
    "knock-out-call",
    "knock-out-put",
    "knock-in-call",
    "knock-in-put",
)
"""Double-barrier kinds accepted by :func:`discrete_double_barrier_by_quadrature`."""

# Gauss-Legendre rule used on every panel of the live interval.
_GL_ORDER = 8
_GL_X, _GL_W = np.polynomial.legendre.leggauss(_GL_ORDER)
# Truncation of an infinite side of the live interval, in standard deviations of ln S_T.
_TAIL_SD = 12.0
# Kernel entries beyond this many step standard deviations are dropped (below 1e-31).
_CUT = 12.0
# Largest grid accepted (panels of 8 nodes).
_MAX_PANELS = 20000
# Largest kernel accepted (non-zero entries).
_MAX_ENTRIES = 40_000_000


# ---------------------------------------------------------------------------------------
# input checks
# ---------------------------------------------------------------------------------------
def _times(monitoring_times: Any, maturity: float, func: str) -> np.ndarray:
    """Validate monitoring dates: a 1-D array, strictly increasing, in (0, maturity]."""
    try:
        t = np.asarray(monitoring_times, dtype=float)
    except (TypeError, ValueError) as exc:
        raise ParamError(
            f"monitoring_times={monitoring_times!r} is not an array of numbers in {func}; "
            f"pass the monitoring dates in years"
        ) from exc
    if t.ndim != 1:
        raise ParamError(
            f"monitoring_times has shape {t.shape} in {func}; pass a one-dimensional array of dates"
        )
    if t.size:
        bad = ~np.isfinite(t) | (t <= 0.0) | (t > maturity * (1.0 + 1e-12))
        if np.any(bad):
            i = int(np.argmax(bad))
            raise ParamError(
                f"monitoring_times[{i}]={float(t[i])!r} is outside (0, maturity={maturity!r}] in "
                f"{func}; monitoring dates lie after the start and no later than expiry"
            )
        if np.any(np.diff(t) <= 0.0):
            i = int(np.argmax(np.diff(t) <= 0.0)) + 1
            raise ParamError(
                f"monitoring_times[{i}]={float(t[i])!r} does not follow "
                f"monitoring_times[{i - 1}]={float(t[i - 1])!r} in {func}; dates must be strictly "
                f"increasing"
            )
    return np.minimum(t, maturity)


def _bs(call: bool, s: np.ndarray, k: float, tau: float, r: float, q: float, v: float) -> np.ndarray:
    """Black-Scholes-Merton price with ``tau`` to expiry (Black and Scholes 1973; Merton 1973)."""
    s = np.asarray(s, dtype=float)
    sd = v * math.sqrt(tau)
    df, dq = math.exp(-r * tau), math.exp(-q * tau)
    if sd == 0.0 or k <= 0.0:
        fwd = s * math.exp((r - q) * tau)
        return df * np.maximum(fwd - k, 0.0) if call else df * np.maximum(k - fwd, 0.0)
    with np.errstate(divide="ignore"):
        d1 = (np.log(s / k) + (r - q + 0.5 * v * v) * tau) / sd
    d2 = d1 - sd
    if call:
        return s * dq * ndtr(d1) - k * df * ndtr(d2)
    return k * df * ndtr(-d2) - s * dq * ndtr(-d1)


# ---------------------------------------------------------------------------------------
# the recursion
# ---------------------------------------------------------------------------------------
def _nodes(a: float, b: float, width: float, breaks: list[float]) -> tuple[np.ndarray, np.ndarray]:
    """Composite Gauss-Legendre nodes and weights on [a, b], panels no wider than ``width``,
    with panel edges at every break point inside (a, b)."""
    edges = [a, *sorted(x for x in breaks if a < x < b), b]
    xs, ws = [], []
    for lo, hi in zip(edges[:-1], edges[1:]):
        n = max(1, int(math.ceil((hi - lo) / width)))
        e = np.linspace(lo, hi, n + 1)
        mid, half = 0.5 * (e[1:] + e[:-1]), 0.5 * (e[1:] - e[:-1])
        xs.append((mid[:, None] + half[:, None] * _GL_X[None, :]).ravel())
        ws.append((half[:, None] * _GL_W[None, :]).ravel())
    return np.concatenate(xs), np.concatenate(ws)


def _kernel(x: np.ndarray, w: np.ndarray, y: np.ndarray, mean: float, s: float) -> Any:
    """Sparse matrix of w_j phi((x_j - y_i - mean)/s)/s, keeping |z| <= 40 (the rest
    underflows below 1e-300 relative to the peak)."""
    lo_idx = np.searchsorted(x, y + mean - _CUT * s, side="left")
    hi_idx = np.searchsorted(x, y + mean + _CUT * s, side="right")
    counts = hi_idx - lo_idx
    if int(counts.sum()) > _MAX_ENTRIES:
        raise ParamError(
            f"monitoring_times: a step with log-price standard deviation {s:.3g} next to much "
            f"shorter steps needs a kernel of {int(counts.sum()):.3g} entries in the "
            f"discrete barrier quadrature (limit {_MAX_ENTRIES:.3g}); space the dates more evenly"
        )
    rows = np.repeat(np.arange(y.size), counts)
    offsets = np.arange(int(counts.sum())) - np.repeat(np.cumsum(counts) - counts, counts)
    cols = np.repeat(lo_idx, counts) + offsets
    z = (x[cols] - y[rows] - mean) / s
    vals = np.exp(-0.5 * z * z) * w[cols] / (s * math.sqrt(2.0 * math.pi))
    return sparse.csr_matrix((vals, (rows, cols)), shape=(y.size, x.size))


def _knock_out(
    call: bool | None,
    spot: float,
    strike: float,
    lo: float,
    hi: float,
    times: np.ndarray,
    maturity: float,
    r: float,
    q: float,
    v: float,
    rebate: float,
    at_hit: bool,
    panels_per_sd: float,
) -> float:
    """Value at 0 of a claim paying f(S_T) (a call, a put, or 1 when ``call`` is None) at T
    unless ln(S_t/S_0) leaves (lo, hi) at a monitoring date, in which case ``rebate`` is paid
    at that date (``at_hit``) or at T."""
    nu = r - q - 0.5 * v * v
    m = times.size

    def terminal(x: np.ndarray) -> np.ndarray:
        tau = maturity - (times[-1] if m else 0.0)
        if call is None:
            return np.full_like(x, math.exp(-r * tau))
        return _bs(call, spot * np.exp(x), strike, tau, r, q, v)

    if m == 0:
        return float(terminal(np.zeros(1))[0])

    if v == 0.0:  # deterministic path S_0 e^{(r-q)t}
        for t in times:
            x = nu * t
            if not lo < x < hi:
                return rebate * math.exp(-r * (t if at_hit else maturity))
        return float(terminal(np.array([nu * times[-1]]))[0])

    steps = np.diff(np.concatenate(([0.0], times)))
    sds = v * np.sqrt(steps)
    centre, spread = nu * times[-1], v * math.sqrt(times[-1])
    a = max(lo, min(0.0, centre) - _TAIL_SD * spread)
    b = min(hi, max(0.0, centre) + _TAIL_SD * spread)
    if not a < b:  # live interval empty: knocked at the first date for sure
        t1 = times[0]
        return rebate * math.exp(-r * (t1 if at_hit else maturity))
    # The grid at date i resolves the kernels of the steps on either side of it: its panels
    # are no wider than min(s_i, s_{i+1}) / panels_per_sd (s_{m+1} = s_m at the last date,
    # whose grid also has a panel edge at the strike, where the payoff or the short-dated
    # value bends sharply).
    kink = [math.log(strike / spot)] if call is not None and strike > 0 else []
    widths = [float(min(sds[i], sds[i + 1] if i + 1 < m else sds[i])) / panels_per_sd for i in range(m)]
    grids: dict[tuple[float, bool], tuple[np.ndarray, np.ndarray]] = {}

    def grid(i: int) -> tuple[tuple[float, bool], np.ndarray, np.ndarray]:
        key = (float(f"{widths[i]:.11e}"), i == m - 1)
        if key not in grids:
            if (b - a) / key[0] > _MAX_PANELS:
                raise ParamError(
                    f"monitoring_times: the step of {float(steps[i]):.3g} years ending at "
                    f"{float(times[i]):.6g} is too short for the live interval in the discrete "
                    f"barrier quadrature ({(b - a) / key[0]:.3g} panels, limit {_MAX_PANELS}); "
                    f"merge dates closer than this or raise vol={v!r}"
                )
            grids[key] = _nodes(a, b, key[0], kink if key[1] else [])
        return key, *grids[key]

    key_x, x, w = grid(m - 1)
    value = terminal(x)
    cache: dict[tuple[Any, ...], Any] = {}
    for i in range(m - 1, -1, -1):  # step from date i (value known) back to date i-1
        dt = float(f"{float(steps[i]):.11e}")  # equal steps up to rounding share one kernel
        s = v * math.sqrt(dt)
        if i > 0:
            key_y, y, w_y = grid(i - 1)
        else:
            key_y, y, w_y = None, np.zeros(1), None
        ck = (dt, key_x, key_y)
        if ck not in cache:
            cache[ck] = _kernel(x, w, y, nu * dt, s)
        kern = cache[ck]
        # probability of landing on the knocked side at date i, from each start point
        p_out = np.zeros(y.shape)
        if math.isfinite(lo):
            p_out += ndtr((lo - y - nu * dt) / s)
        if math.isfinite(hi):
            p_out += ndtr(-(hi - y - nu * dt) / s)
        paid = rebate * (1.0 if at_hit else math.exp(-r * (maturity - times[i])))
        value = math.exp(-r * dt) * (kern @ value + paid * p_out)
        if i > 0:
            key_x, x, w = key_y, y, w_y
    return float(value[0])


# ---------------------------------------------------------------------------------------
# public functions
# ---------------------------------------------------------------------------------------
def discrete_barrier_by_quadrature(
    kind: str,
    spot: Any,
    strike: Any,
    barrier: Any,
    monitoring_times: Any,
    maturity: Any,
    rate: Any,
    dividend: Any,
    vol: Any,
    rebate: Any = 0.0,
    rebate_at_hit: bool = True,
    *,
    panels_per_sd: float = 0.75,
) -> float | np.ndarray:
    r"""Single-barrier option monitored at given dates, by recursive quadrature.

    Parameters
    ----------
    kind : str
        One of :data:`DISCRETE_BARRIER_KINDS` (``"down-and-out-call"``, ...).
    spot, strike, maturity, rate, dividend, vol : array_like
        Black-Scholes-Merton inputs (spot > 0, strike >= 0, maturity > 0, vol >= 0);
        ``dividend`` is the continuous yield q. Broadcast against each other.
    barrier : array_like
        Barrier H >= 0 (``inf`` allowed for an up barrier: never reached).
    monitoring_times : array_like
        1-D array of monitoring dates in (0, maturity], strictly increasing, any spacing,
        built by the caller from the contract's terms. Empty: no monitoring. The spot at
        time 0 is not monitored (put 0 in no array; a spot past the barrier is knocked
        at the first date with probability near one, not at once).
    rebate : array_like, optional
        Cash R >= 0. A knock-out pays it at the monitoring date of the breach
        (``rebate_at_hit``) or at expiry; a knock-in pays it at expiry if never knocked in.
    rebate_at_hit : bool, optional
    panels_per_sd : float, keyword-only
        Gauss-Legendre panels (8 nodes each) per standard deviation of the shortest
        step; the default 0.75 gives the accuracy stated below, larger values a finer grid.

    Returns
    -------
    float or ndarray

    Notes
    -----
    With :math:`x = \ln(S/S_0)`, drift :math:`\nu = r - q - \sigma^2/2` and the live set
    :math:`\mathcal L = \{x: \text{not past the barrier}\}`, the knock-out value at
    monitoring date :math:`t_{i-1}` is

    .. math::

        V_{i-1}(y) = e^{-r\Delta_i}\Big[\int_{\mathcal L} V_i(x)\,
            \frac{1}{s_i}\varphi\Big(\frac{x - y - \nu\Delta_i}{s_i}\Big)dx
            + R_i\,P(y + \nu\Delta_i + s_i Z \notin \mathcal L)\Big],
        \quad s_i = \sigma\sqrt{\Delta_i},

    with :math:`R_i = R` (paid at hit) or :math:`R e^{-r(T - t_i)}` (paid at expiry), and
    :math:`V_m` the Black-Scholes value at :math:`t_m` of the payoff at T (the payoff
    itself when :math:`t_m = T`). The integral over the live set is taken by composite
    8-point Gauss-Legendre on panels no wider than one step standard deviation, with a
    panel edge at the strike when the last date is expiry; the knocked side enters only
    through the normal probability, so the jump at the barrier costs no accuracy. This is
    the QUAD scheme of [1]_ with Gauss-Legendre in place of Simpson's rule. An infinite side
    of the live set is cut :math:`12\sigma\sqrt{t_m}` beyond the mean. Knock-ins:

    .. math::

        V_{in} = V_{vanilla} - V_{out}(R=0) + R\,e^{-rT}\,P(\text{never knocked}).

    Limits: no dates (or an unreachable barrier) gives the vanilla for a knock-out and
    :math:`R e^{-rT}` for a knock-in; one date at T gives a European payoff
    :math:`f(S_T)1\{S_T \in \mathcal L\}`; many evenly spaced dates approach continuous
    monitoring from the Broadie-Glasserman-Kou side [2]_.

    Accuracy: absolute error below 1e-9 per unit of spot at the default grid. Measured:
    against the same recursion on a grid four times finer, differences below 2e-13 (spot
    100, 4 to 250 dates, vol 0.3); against an independent scipy quadrature of one and two
    dates, below 1e-10; the published tables agree to their printed digits.

    References
    ----------
    .. [1] A. D. Andricopoulos, M. Widdicks, P. W. Duck and D. P. Newton, "Universal option
       valuation using quadrature methods", Journal of Financial Economics 67(3), 2003.
    .. [2] M. Broadie, P. Glasserman and S. Kou, "A Continuity Correction for Discrete
       Barrier Options", Mathematical Finance 7(4), 1997.
    """
    func = "discrete_barrier_by_quadrature"
    if not isinstance(kind, str) or kind not in DISCRETE_BARRIER_KINDS:
        raise ParamError(
            f"kind={kind!r} is not a barrier kind in {func}; pass one of "
            f"{', '.join(map(repr, DISCRETE_BARRIER_KINDS))}"
        )
    direction, _, io, option = kind.split("-")
    down, out, call = direction == "down", io == "out", option == "call"
    _check_flags(rebate_at_hit, panels_per_sd, func)

    def one(s: float, k: float, h: float, t: float, r: float, q: float, v: float, reb: float) -> float:
        s, k, t, r, q, v, reb = _market(func, s, k, t, r, q, v, reb)
        h = _num("barrier", h, func, low=0.0, allow_inf=True,
                 fix="a barrier is a non-negative price level (inf allowed)")
        times = _times(monitoring_times, t, func)
        ell = math.log(h / s) if 0.0 < h < math.inf else (-math.inf if h == 0.0 else math.inf)
        lo, hi = (ell, math.inf) if down else (-math.inf, ell)
        if out:
            return _knock_out(call, s, k, lo, hi, times, t, r, q, v, reb, rebate_at_hit, panels_per_sd)
        return _knock_in(call, s, k, lo, hi, times, t, r, q, v, reb, panels_per_sd)

    return _loop((spot, strike, barrier, maturity, rate, dividend, vol, rebate), one, func)


def discrete_double_barrier_by_quadrature(
    kind: str,
    spot: Any,
    strike: Any,
    lower: Any,
    upper: Any,
    monitoring_times: Any,
    maturity: Any,
    rate: Any,
    dividend: Any,
    vol: Any,
    rebate: Any = 0.0,
    rebate_at_hit: bool = True,
    *,
    panels_per_sd: float = 0.75,
) -> float | np.ndarray:
    r"""Double-barrier option monitored at given dates, by recursive quadrature.

    A knock-out pays the call or put at expiry if at every monitoring date
    :math:`L < S_{t_i} < U`; otherwise the rebate (at the date of the breach, or at expiry).
    A knock-in pays the call or put if some monitoring date has :math:`S_{t_i} \le L` or
    :math:`S_{t_i} \ge U`, else the rebate at expiry.

    Parameters
    ----------
    kind : str
        One of :data:`DOUBLE_BARRIER_KINDS`.
    lower, upper : array_like
        Barriers :math:`0 \le L < U \le \infty` (L = 0 and U = inf are single barriers or
        none).
    spot, strike, monitoring_times, maturity, rate, dividend, vol, rebate, rebate_at_hit, panels_per_sd
        As in :func:`discrete_barrier_by_quadrature`.

    Returns
    -------
    float or ndarray

    Notes
    -----
    The recursion of :func:`discrete_barrier_by_quadrature` on the finite live interval
    :math:`(\ln(L/S_0), \ln(U/S_0))`; the probability of leaving it in one step is
    :math:`N((\ell - y - \nu\Delta)/s) + N(-(u - y - \nu\Delta)/s)`. Knock-ins by
    in-out parity as there. Same stated accuracy. Method as in [1]_; the double-barrier
    case is one of the examples treated there and by Fusai, Abrahams and Sgarra [2]_.

    References
    ----------
    .. [1] A. D. Andricopoulos, M. Widdicks, P. W. Duck and D. P. Newton, "Universal option
       valuation using quadrature methods", Journal of Financial Economics 67(3), 2003.
    .. [2] G. Fusai, I. D. Abrahams and C. Sgarra, "An exact analytical solution for
       discrete barrier options", Finance and Stochastics 10(1), 2006.
    """
    func = "discrete_double_barrier_by_quadrature"
    if not isinstance(kind, str) or kind not in DOUBLE_BARRIER_KINDS:
        raise ParamError(
            f"kind={kind!r} is not a double-barrier kind in {func}; pass one of "
            f"{', '.join(map(repr, DOUBLE_BARRIER_KINDS))}"
        )
    out, call = kind.startswith("knock-out"), kind.endswith("call")
    _check_flags(rebate_at_hit, panels_per_sd, func)

    def one(s: float, k: float, lb: float, ub: float, t: float, r: float, q: float, v: float,
            reb: float) -> float:
        s, k, t, r, q, v, reb = _market(func, s, k, t, r, q, v, reb)
        lb = _num("lower", lb, func, low=0.0, fix="the lower barrier is a price level >= 0")
        ub = _num("upper", ub, func, low=0.0, allow_inf=True,
                  fix="the upper barrier is a price level (inf allowed)")
        if not lb < ub:
            raise ParamError(
                f"lower={lb!r} is not below upper={ub!r} in {func}; pass 0 <= lower < upper"
            )
        times = _times(monitoring_times, t, func)
        lo = math.log(lb / s) if lb > 0.0 else -math.inf
        hi = math.log(ub / s) if math.isfinite(ub) else math.inf
        if out:
            return _knock_out(call, s, k, lo, hi, times, t, r, q, v, reb, rebate_at_hit, panels_per_sd)
        return _knock_in(call, s, k, lo, hi, times, t, r, q, v, reb, panels_per_sd)

    return _loop((spot, strike, lower, upper, maturity, rate, dividend, vol, rebate), one, func)


def _knock_in(call: bool, s: float, k: float, lo: float, hi: float, times: np.ndarray, t: float,
              r: float, q: float, v: float, reb: float, panels_per_sd: float) -> float:
    """In-out parity: vanilla - knock-out without rebate + rebate * P(never knocked) e^{-rT}."""
    vanilla = float(_bs(call, np.array([s]), k, t, r, q, v)[0])
    ko = _knock_out(call, s, k, lo, hi, times, t, r, q, v, 0.0, True, panels_per_sd)
    alive = _knock_out(None, s, k, lo, hi, times, t, r, q, v, 0.0, True, panels_per_sd) if reb else 0.0
    return vanilla - ko + reb * alive


def _market(func: str, s: float, k: float, t: float, r: float, q: float, v: float,
            reb: float) -> tuple[float, ...]:
    return (
        _num("spot", s, func, low=0.0, low_open=True, fix="a spot price is positive"),
        _num("strike", k, func, low=0.0, fix="a strike is a price level >= 0"),
        _num("maturity", t, func, low=0.0, low_open=True, fix="maturity is a time in years > 0"),
        _num("rate", r, func, fix="pass a finite continuously compounded rate"),
        _num("dividend", q, func, fix="pass a finite continuous dividend yield"),
        _num("vol", v, func, low=0.0, fix="a volatility is >= 0"),
        _num("rebate", reb, func, low=0.0, fix="a rebate is a cash amount >= 0"),
    )


def _check_flags(rebate_at_hit: Any, panels_per_sd: Any, func: str) -> None:
    if not isinstance(rebate_at_hit, (bool, np.bool_)):
        raise ParamError(
            f"rebate_at_hit={rebate_at_hit!r} is not a bool in {func}; pass True (paid at the "
            f"monitoring date of the breach) or False (paid at expiry)"
        )
    _num("panels_per_sd", panels_per_sd, func, low=0.25,
         fix="pass a grid density of at least 0.25 panels per step standard deviation")
