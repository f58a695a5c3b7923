"""Discretely monitored single-barrier options under local volatility, by a finite-difference
solution of the pricing equation.

Under a local-volatility model the forward-normalised price ``X = S / F(t)`` (``F(t) = S_0
e^{(r - q) t}``) is a martingale with ``dX / X = sigma(t, x) dW``, ``x = log X``. The value
in time-T money ``u(t, x) = E[payoff | x_t = x]`` solves, between monitoring dates,

    u_t + 1/2 sigma^2(t, x) (u_xx - u_x) = 0,

and at each monitoring date the knocked side of the barrier is reset to the rebate. This
module solves that equation by Crank-Nicolson on a uniform grid in ``x``, restarting with
two implicit Euler half-steps after every reset (Rannacher 1984) so that the jump at the
barrier does not ring, and averages the reset over the grid cell the barrier falls in
(the barrier moves in ``x`` with the forward, so it cannot sit on a node).

The local variance is a callable of ``(k, t)`` (``k = log(S / F(t))``), supplied by the
caller (e.g. a surface's Dupire local variance); the monitoring dates are an explicit array
built by the caller from the contract's terms. This module imports only numpy, scipy,
math and :mod:`limitcase.errors`.
"""

from __future__ import annotations

import math
from typing import Any, Callable

import numpy as np
from scipy.linalg import solve_banded

from limitcase.errors import ParamError
from limitcase.references._inputs import _num

__all__ = ["LOCAL_VOL_BARRIER_KINDS", "local_vol_barrier_by_pde"]

LOCAL_VOL_BARRIER_KINDS: tuple[str, ...] = (
    "down-and-out-call",
    "up-and-out-call",
    "down-and-in-call",
    "up-and-in-call",
    "down-and-out-put",
    "up-and-out-put",
    "down-and-in-put",
    "up-and-in-put",
    "call",
    "put",
)
"""Kinds accepted by :func:`local_vol_barrier_by_pde` (``call``/``put``: no barrier)."""

_WIDTH_SD = 8.0
"""Half-width of the grid in standard deviations of ``x_T`` at the largest local variance
met near the money (the far boundary holds its value, exact for payoffs affine in S)."""

_SAMPLE_K = np.linspace(-1.5, 1.5, 61)


def _solve(
    payoff: Callable[[np.ndarray], np.ndarray],
    lo: float,
    hi: float,
    times: np.ndarray,
    maturity: float,
    forward: float,
    growth: float,
    rate: float,
    rebate: float,
    at_hit: bool,
    local_variance: Callable[[np.ndarray, float], np.ndarray],
    half_width: float,
    nodes: int,
    steps_per_year: float,
    steps_per_interval: int,
) -> float:
    """``E[payoff(S_T) 1{alive}] + rebate terms``, in time-T money, at ``x = 0`` today; the
    barrier is knocked at a date ``t`` when ``log(S_t / S_0)`` is not in ``(lo, hi)``."""
    n = int(nodes) // 2 * 2 + 1  # odd: x = 0 is the middle node
    x = np.linspace(-half_width, half_width, n)
    dx = x[1] - x[0]
    u = payoff(forward * np.exp(x))

    def reset(u: np.ndarray, t: float) -> np.ndarray:
        # knocked at t where log(S_t/S_0) = x + growth t is out of (lo, hi): the share of each
        # node's cell on the knocked side pays the rebate (in time-T money)
        paid = rebate * (math.exp(rate * (maturity - t)) if at_hit else 1.0)
        y = x + growth * t
        share = np.zeros(n)
        if math.isfinite(lo):
            share += np.clip((lo - (y - 0.5 * dx)) / dx, 0.0, 1.0)
        if math.isfinite(hi):
            share += np.clip(((y + 0.5 * dx) - hi) / dx, 0.0, 1.0)
        share = np.minimum(share, 1.0)
        return u * (1.0 - share) + paid * share

    def step(u: np.ndarray, t_hi: float, dt: float, theta: float) -> np.ndarray:
        a = 0.5 * np.asarray(local_variance(x, t_hi - 0.5 * dt), dtype=float)
        if a.shape != x.shape or not np.all(np.isfinite(a)) or np.any(a < 0):
            raise ParamError(f"local_variance returned {a!r:.80}: expected finite values >= 0 of shape "
                             f"{x.shape} at t={t_hi - 0.5 * dt:.6g}")
        lower = a * (1.0 / dx**2 + 0.5 / dx)  # coefficient of u_{j-1} in L u_j
        upper = a * (1.0 / dx**2 - 0.5 / dx)
        diag = -2.0 * a / dx**2
        for arr in (lower, upper, diag):  # the boundary nodes hold their value
            arr[0] = arr[-1] = 0.0
        rhs = u + (1.0 - theta) * dt * (diag * u + lower * np.roll(u, 1) + upper * np.roll(u, -1))
        rhs[0], rhs[-1] = u[0], u[-1]
        ab = np.zeros((3, n))
        ab[0, 1:] = -theta * dt * upper[:-1]
        ab[1] = 1.0 - theta * dt * diag
        ab[2, :-1] = -theta * dt * lower[1:]
        return solve_banded((1, 1), ab, rhs, overwrite_ab=True, overwrite_b=True, check_finite=False)

    grid_t = np.concatenate(([0.0], times))
    if times.size and times[-1] == maturity:
        u = reset(u, maturity)
        starts = grid_t
    else:
        starts = np.concatenate((grid_t, [maturity]))
    for i in range(starts.size - 1, 0, -1):
        t_hi, t_lo = float(starts[i]), float(starts[i - 1])
        span = t_hi - t_lo
        k = max(steps_per_interval, int(math.ceil(span * steps_per_year)))
        dt = span / k
        t = t_hi
        for s in range(k):
            if s == 0:  # Rannacher: two implicit half-steps after a reset or the payoff's kink
                u = step(u, t, 0.5 * dt, 1.0)
                u = step(u, t - 0.5 * dt, 0.5 * dt, 1.0)
            else:
                u = step(u, t, dt, 0.5)
            t -= dt
        if i > 1:
            u = reset(u, t_lo)
    return float(u[n // 2])


def local_vol_barrier_by_pde(
    kind: str,
    spot: Any,
    strike: Any,
    barrier: Any,
    monitoring_times: Any,
    maturity: Any,
    rate: Any,
    dividend: Any,
    local_variance: Callable[[np.ndarray, float], np.ndarray],
    rebate: Any = 0.0,
    rebate_at_hit: bool = True,
    *,
    nodes: int = 1601,
    steps_per_year: float = 400.0,
    steps_per_interval: int = 10,
) -> float:
    r"""Single-barrier option monitored at given dates under local volatility.

    Parameters
    ----------
    kind : str
        One of :data:`LOCAL_VOL_BARRIER_KINDS`.
    spot, strike, maturity, rate, dividend : float
        Spot > 0, strike >= 0, maturity > 0, flat short rate and continuous dividend yield.
    barrier : float
        Barrier H > 0 (``inf`` for an up barrier never reached; ignored for ``call``/``put``).
    monitoring_times : array_like
        Monitoring dates in (0, maturity], strictly increasing, built from the contract's
        terms. The spot today is not monitored (as in
        :func:`~limitcase.references.discrete_barrier_by_quadrature`).
    local_variance : callable
        ``local_variance(k, t)``: the local variance :math:`\sigma^2(t, S)` at log-moneyness
        ``k = log(S / F(t))`` (an array) and time ``t``, finite and non-negative.
    rebate, rebate_at_hit
        A knock-out pays ``rebate`` at the breached date (``rebate_at_hit``) or at T; a
        knock-in pays it at T if never knocked in.
    nodes, steps_per_year, steps_per_interval : keyword-only
        Grid nodes in ``x`` over :math:`\pm 8` standard deviations; time steps per year, and
        at least ``steps_per_interval`` between two monitoring dates (the reset at a date is
        a jump that needs a few steps to be smoothed).

    Notes
    -----
    Knock-ins by in-out parity on the same grid,
    :math:`V_{in} = V_{vanilla} - V_{out}(R = 0) + R e^{-rT} P(\text{never knocked})`.

    Accuracy at the defaults, measured: with a constant local variance the equation is
    Black-Scholes', and the price meets the "true discrete" prices of Broadie, Glasserman
    and Kou (1997, Mathematical Finance 7(4), table of the down-and-out call, S = K = 100,
    sigma = 0.3, r = 0.1, T = 0.2, 50 dates) within 3.5e-4 for barriers 85 to 99.5, and the
    recursive quadrature (:func:`~limitcase.references.discrete_barrier_by_quadrature`)
    within 2e-5 per unit of spot (volatilities 10% to 60%, 4 to 250 dates, rebates). With
    a CEV local volatility and no barrier it meets Schroder's (1989) closed form within
    3e-6 per unit of spot (elasticities 0.5 and 0.8, 6 months to 2 years, strikes 80 to
    120). The scheme's error is second order in the grid steps.

    References
    ----------
    B. Dupire, "Pricing with a smile", Risk 7(1), 1994. R. Rannacher, "Finite element
    solution of diffusion problems with irregular data", Numerische Mathematik 43, 1984.
    J. Crank and P. Nicolson, Proc. Cambridge Philos. Soc. 43, 1947.
    """
    func = "local_vol_barrier_by_pde"
    if kind not in LOCAL_VOL_BARRIER_KINDS:
        raise ParamError(f"kind={kind!r} is not one of {LOCAL_VOL_BARRIER_KINDS} in {func}")
    s0 = _num("spot", spot, func, low=0.0, low_open=True)
    k = _num("strike", strike, func, low=0.0)
    t_end = _num("maturity", maturity, func, low=0.0, low_open=True)
    r = _num("rate", rate, func)
    q = _num("dividend", dividend, func)
    reb = _num("rebate", rebate, func, low=0.0)
    if not callable(local_variance):
        raise ParamError(f"local_variance={local_variance!r} is not callable in {func}")
    if int(nodes) < 41 or not steps_per_year > 0 or int(steps_per_interval) < 2:
        raise ParamError(f"nodes={nodes!r} (>= 41), steps_per_year={steps_per_year!r} (> 0) or "
                         f"steps_per_interval={steps_per_interval!r} (>= 2) out of range in {func}")
    times = np.asarray(monitoring_times, dtype=float).reshape(-1)
    if times.size and (not np.all(np.isfinite(times)) or times[0] <= 0 or times[-1] > t_end * (1 + 1e-12)
                       or np.any(np.diff(times) <= 0)):
        raise ParamError(f"monitoring_times={times!r} must be strictly increasing in (0, maturity={t_end!r}] in {func}")
    times = np.minimum(times, t_end)
    call = kind.endswith("call")
    growth = r - q

    def vanilla_payoff(s: np.ndarray) -> np.ndarray:
        return np.maximum(s - k, 0.0) if call else np.maximum(k - s, 0.0)

    # the grid's half-width from the largest local variance near the money
    sample_t = np.linspace(t_end / 8, t_end, 8)
    peak = max(float(np.max(np.asarray(local_variance(_SAMPLE_K, float(t)), dtype=float))) for t in sample_t)
    if not math.isfinite(peak) or peak < 0:
        raise ParamError(f"local_variance is not finite and >= 0 near the money in {func} (largest {peak!r})")
    half = _WIDTH_SD * math.sqrt(max(peak, 1e-4) * t_end)
    lv_args = (local_variance, half, nodes, steps_per_year, int(steps_per_interval))
    disc = math.exp(-r * t_end)

    def run(payoff: Callable[[np.ndarray], np.ndarray], lo: float, hi: float, reb_: float, at_hit: bool) -> float:
        return disc * _solve(payoff, lo, hi, times, t_end, s0 * math.exp(growth * t_end), growth, r, reb_, at_hit,
                             *lv_args)

    if kind in ("call", "put"):
        return run(vanilla_payoff, -math.inf, math.inf, 0.0, False)
    h = _num("barrier", barrier, func, low=0.0, low_open=True, allow_inf=True)
    down = kind.startswith("down")
    lo, hi = (math.log(h / s0), math.inf) if down else (-math.inf, math.log(h / s0) if math.isfinite(h) else math.inf)
    if "-out-" in kind:
        return run(vanilla_payoff, lo, hi, reb, bool(rebate_at_hit))
    vanilla = run(vanilla_payoff, -math.inf, math.inf, 0.0, False)
    out = run(vanilla_payoff, lo, hi, 0.0, False)
    alive = run(lambda s: np.ones_like(s), lo, hi, 0.0, False) if reb > 0 else 0.0
    return vanilla - out + reb * alive
