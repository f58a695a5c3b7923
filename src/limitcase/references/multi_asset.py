"""References for European options on several correlated log-normal assets.

Two methods, both from the contract's terms and the market's numbers only:

* :func:`two_asset_rainbow_call`: the call on the maximum or the minimum of two assets in
  closed form (Stulz 1982; Johnson 1987), with the bivariate normal distribution function
  of :mod:`limitcase.references.compound`;
* :func:`weighted_sum_option`: a call or put on ``sum_i w_i S_i(T) - K`` for up to
  :data:`MAX_QUADRATURE_ASSETS` assets (baskets, spreads) by Gauss-Hermite product
  quadrature over the Cholesky factor of the correlation, the last asset integrated in
  closed form (it is log-normal given the others), the node count doubled until two
  successive sums agree to the stated tolerance.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from scipy.special import ndtr

from limitcase.errors import ParamError
from limitcase.references.compound import bivariate_normal_cdf

__all__ = [
    "MAX_QUADRATURE_ASSETS",
    "WEIGHTED_SUM_TOL",
    "two_asset_rainbow_call",
    "weighted_sum_option",
]

MAX_QUADRATURE_ASSETS = 3
"""Assets :func:`weighted_sum_option` handles: a product rule over ``d - 1`` dimensions
costs ``nodes ** (d - 1)`` points (up to 256**2 at three assets)."""

WEIGHTED_SUM_TOL = 1e-8
"""Default absolute tolerance of :func:`weighted_sum_option` (per unit of ``max(1, price)``)."""

_START_NODES = 32
_MAX_NODES = {1: 256, 2: 256}  # numpy.polynomial.hermite.hermgauss overflows beyond ~300  # per dimension, by the number of dimensions summed over


def _positive(name: str, value: Any, func: str, *, allow_zero: bool = False) -> float:
    x = float(value)
    if not math.isfinite(x) or x < 0.0 or (x == 0.0 and not allow_zero):
        bound = ">= 0" if allow_zero else "> 0"
        raise ParamError(f"{name}={value!r} in {func}: must be finite and {bound}")
    return x


def two_asset_rainbow_call(
    kind: str,
    spot1: float,
    spot2: float,
    strike: float,
    maturity: float,
    rate: float,
    dividend1: float,
    dividend2: float,
    vol1: float,
    vol2: float,
    rho: float,
) -> float:
    r"""Call on the maximum (``kind="max"``) or the minimum (``kind="min"``) of two
    correlated geometric Brownian motions: payoff :math:`\max(\max/\min(S_1, S_2)(T) - K, 0)`.

    Parameters
    ----------
    kind : {"max", "min"}
    spot1, spot2, strike, maturity : float
        Positive spots, strike >= 0, maturity > 0 (years).
    rate, dividend1, dividend2 : float
        Continuously compounded short rate and dividend yields (cost of carry
        :math:`b_i = r - q_i`).
    vol1, vol2 : float
        Positive volatilities.
    rho : float
        Correlation of the two Brownian motions, in [-1, 1]; the volatility of the ratio
        :math:`\sigma^2 = \sigma_1^2 + \sigma_2^2 - 2\rho\sigma_1\sigma_2` must be positive.

    Returns
    -------
    float
        Today's price.

    Notes
    -----
    With :math:`d = (\ln(S_1/S_2) + (b_1 - b_2 + \sigma^2/2)T)/(\sigma\sqrt T)`,
    :math:`y_i = (\ln(S_i/K) + (b_i + \sigma_i^2/2)T)/(\sigma_i\sqrt T)`,
    :math:`\rho_1 = (\sigma_1 - \rho\sigma_2)/\sigma`, :math:`\rho_2 = (\sigma_2 - \rho\sigma_1)/\sigma`:

    .. math::

        C_{\max} = S_1e^{-q_1T}M(y_1, d; \rho_1) + S_2e^{-q_2T}M(y_2, -d + \sigma\sqrt T; \rho_2)
                   - Ke^{-rT}\big[1 - M(-y_1 + \sigma_1\sqrt T, -y_2 + \sigma_2\sqrt T; \rho)\big],

        C_{\min} = S_1e^{-q_1T}M(y_1, -d; -\rho_1) + S_2e^{-q_2T}M(y_2, d - \sigma\sqrt T; -\rho_2)
                   - Ke^{-rT}M(y_1 - \sigma_1\sqrt T, y_2 - \sigma_2\sqrt T; \rho).

    At strike 0 the minimum call is :math:`S_1e^{-q_1T}N(-d) + S_2e^{-q_2T}N(d - \sigma\sqrt T)`
    (the limits :math:`y_i \to \infty`).

    References
    ----------
    .. [1] R. M. Stulz, "Options on the minimum or the maximum of two risky assets:
       analysis and applications", Journal of Financial Economics 10(2), 1982.
    .. [2] H. Johnson, "Options on the maximum or the minimum of several assets", Journal
       of Financial and Quantitative Analysis 22(3), 1987.
    """
    func = "two_asset_rainbow_call"
    if kind not in ("max", "min"):
        raise ParamError(f"kind={kind!r} in {func}: expected 'max' or 'min'")
    s1 = _positive("spot1", spot1, func)
    s2 = _positive("spot2", spot2, func)
    k = _positive("strike", strike, func, allow_zero=True)
    t = _positive("maturity", maturity, func)
    v1 = _positive("vol1", vol1, func)
    v2 = _positive("vol2", vol2, func)
    r, q1, q2, c = float(rate), float(dividend1), float(dividend2), float(rho)
    if not all(math.isfinite(x) for x in (r, q1, q2)):
        raise ParamError(f"rate={rate!r}, dividend1={dividend1!r}, dividend2={dividend2!r} in {func}: must be finite")
    if not -1.0 <= c <= 1.0:
        raise ParamError(f"rho={rho!r} is outside [-1, 1] in {func}")
    var = v1 * v1 + v2 * v2 - 2.0 * c * v1 * v2
    if var <= 1e-14 * (v1 * v1 + v2 * v2):
        raise ParamError(
            f"vol1={v1!r}, vol2={v2!r}, rho={c!r} in {func}: the ratio S1/S2 has no volatility "
            "(rho = 1 and equal volatilities); the assets move as one, price the call on the larger/smaller"
        )
    sig = math.sqrt(var)
    st = math.sqrt(t)
    b1, b2 = r - q1, r - q2
    p1, p2 = s1 * math.exp(-q1 * t), s2 * math.exp(-q2 * t)
    d = (math.log(s1 / s2) + (b1 - b2 + 0.5 * var) * t) / (sig * st)
    rho1 = min(1.0, max(-1.0, (v1 - c * v2) / sig))
    rho2 = min(1.0, max(-1.0, (v2 - c * v1) / sig))
    if k == 0.0:
        worst = p1 * float(ndtr(-d)) + p2 * float(ndtr(d - sig * st))
        return worst if kind == "min" else p1 + p2 - worst
    y1 = (math.log(s1 / k) + (b1 + 0.5 * v1 * v1) * t) / (v1 * st)
    y2 = (math.log(s2 / k) + (b2 + 0.5 * v2 * v2) * t) / (v2 * st)
    disc = k * math.exp(-r * t)
    if kind == "max":
        return float(
            p1 * bivariate_normal_cdf(y1, d, rho1)
            + p2 * bivariate_normal_cdf(y2, -d + sig * st, rho2)
            - disc * (1.0 - bivariate_normal_cdf(-y1 + v1 * st, -y2 + v2 * st, c))
        )
    return float(
        p1 * bivariate_normal_cdf(y1, -d, -rho1)
        + p2 * bivariate_normal_cdf(y2, d - sig * st, -rho2)
        - disc * bivariate_normal_cdf(y1 - v1 * st, y2 - v2 * st, c)
    )


def _factor(corr: np.ndarray, func: str) -> np.ndarray:
    """Lower Cholesky factor of a positive semi-definite correlation matrix, zero columns
    where a pivot vanishes (an asset that is a combination of the earlier ones)."""
    d = corr.shape[0]
    low = np.zeros((d, d))
    for i in range(d):
        for j in range(i + 1):
            s = corr[i, j] - low[i, :j] @ low[j, :j]
            if i == j:
                if s < -1e-10:
                    raise ParamError(f"correlation={corr.tolist()!r} in {func}: not positive semi-definite")
                low[i, i] = math.sqrt(max(s, 0.0))
            else:
                low[i, j] = s / low[j, j] if low[j, j] > 1e-12 else 0.0
    return low


def _conditional_sum(
    z: np.ndarray, fwd: np.ndarray, tv: np.ndarray, low: np.ndarray, w: np.ndarray, strike: float
) -> np.ndarray:
    """E[max(sum_i w_i S_i - K, 0) | Z_1..Z_{d-1}] in units of forwards (undiscounted), the
    last asset log-normal given the others: a Black (1976) call on it, or its forward when
    the rest of the sum already exceeds K. ``z`` has shape (points, d - 1)."""
    d = fwd.size
    x = z @ low[:, : d - 1].T  # (points, d): the part of each log-return driven by Z_1..Z_{d-1}
    last_sd = tv[-1] * low[-1, -1]
    s_rest = fwd[:-1] * np.exp(tv[:-1] * x[:, :-1] - 0.5 * tv[:-1] ** 2)
    rest = s_rest @ w[:-1] if d > 1 else np.zeros(z.shape[0])
    # E[S_d | Z_<d]: the conditional mean of a log-normal
    f_last = w[-1] * fwd[-1] * np.exp(tv[-1] * x[:, -1] - 0.5 * tv[-1] ** 2 + 0.5 * last_sd**2)
    k = strike - rest
    if last_sd <= 0.0:
        return np.maximum(f_last - k, 0.0)
    out = f_last - k  # k <= 0: the call is always in the money
    pos = k > 0.0
    kp = k[pos]
    fp = f_last[pos]
    d1 = (np.log(fp / kp) + 0.5 * last_sd**2) / last_sd
    out[pos] = fp * ndtr(d1) - kp * ndtr(d1 - last_sd)
    return out


def _gauss_hermite_sum(
    nodes: int, dims: int, fwd: np.ndarray, tv: np.ndarray, low: np.ndarray, w: np.ndarray, strike: float
) -> float:
    x, wt = np.polynomial.hermite.hermgauss(nodes)
    z1, w1 = math.sqrt(2.0) * x, wt / math.sqrt(math.pi)  # nodes and weights for N(0, 1)
    if dims == 0:
        return float(_conditional_sum(np.zeros((1, 0)), fwd, tv, low, w, strike)[0])
    grids = np.meshgrid(*([z1] * dims), indexing="ij")
    wgrid = np.ones_like(grids[0])
    for g in np.meshgrid(*([w1] * dims), indexing="ij"):
        wgrid = wgrid * g
    z = np.stack([g.ravel() for g in grids], axis=1)
    return float(wgrid.ravel() @ _conditional_sum(z, fwd, tv, low, w, strike))


def weighted_sum_option(
    kind: str,
    weights: Any,
    strike: float,
    maturity: float,
    spots: Any,
    vols: Any,
    dividends: Any,
    correlation: Any,
    rate: float,
    *,
    tol: float = WEIGHTED_SUM_TOL,
) -> tuple[float, float]:
    r"""Call or put on a weighted sum of correlated log-normal assets: payoff
    :math:`\max(\pm(\sum_i w_i S_i(T) - K), 0)` (a basket with positive weights, a spread
    with weights (1, -1)).

    Parameters
    ----------
    kind : {"call", "put"}
    weights : sequence of float
        One real weight per asset; at least one positive (the asset integrated in closed form).
    strike, maturity : float
        Strike (any real for a spread; the formula needs none positive) and maturity > 0.
    spots, vols, dividends : sequence of float
        Per asset: spot > 0, volatility >= 0, dividend yield.
    correlation : (d, d) array_like
        Correlation matrix, positive semi-definite; ``d <= MAX_QUADRATURE_ASSETS``.
    rate : float
        Short rate.
    tol : float
        Absolute tolerance per unit of ``max(1, price)`` on two successive node counts.

    Returns
    -------
    (float, float)
        Today's price and the refinement estimate of its error (the difference of the last
        two sums, the node count doubled).

    Notes
    -----
    Order the assets so that one with a positive weight is last and write
    :math:`\ln S_i(T) = \ln F_i - \sigma_i^2T/2 + \sigma_i\sqrt T (LZ)_i` with :math:`L` the
    lower Cholesky factor of the correlation. Given :math:`Z_1..Z_{d-1}`, the last asset is
    log-normal with standard deviation :math:`\sigma_d\sqrt T L_{dd}`, so the payoff's
    conditional expectation is a Black (1976) call struck at :math:`K - \sum_{i<d} w_iS_i`
    (or the forward of the rest when that strike is not positive); it is smooth in
    :math:`Z_1..Z_{d-1}`, and the remaining Gaussian expectation is a Gauss-Hermite product
    rule (conditioning on all but one factor is common practice for baskets and spreads).
    The put follows by parity: :math:`P = C - e^{-rT}(\sum_i w_iF_i - K)`. The node count
    starts at 32 per dimension and doubles until two successive sums agree to ``tol``;
    ParamError if that fails within 256 nodes per dimension, or if no positive-weight asset
    keeps any variance given the others (the conditional payoff would be kinked).

    References
    ----------
    .. [1] G. H. Golub and J. H. Welsch, "Calculation of Gauss quadrature rules",
       Mathematics of Computation 23, 1969 (the Gauss-Hermite rule).
    .. [2] F. Black, "The pricing of commodity contracts", Journal of Financial Economics
       3, 1976 (the conditional call).
    .. [3] R. Carmona and V. Durrleman, "Pricing and hedging spread options", SIAM Review
       45(4), 2003 (conditioning on one asset for the spread).
    """
    func = "weighted_sum_option"
    if kind not in ("call", "put"):
        raise ParamError(f"kind={kind!r} in {func}: expected 'call' or 'put'")
    w = np.atleast_1d(np.asarray(weights, dtype=float))
    s0 = np.atleast_1d(np.asarray(spots, dtype=float))
    vol = np.atleast_1d(np.asarray(vols, dtype=float))
    q = np.atleast_1d(np.asarray(dividends, dtype=float))
    d = w.size
    corr = np.asarray(correlation, dtype=float)
    if corr.ndim == 0:
        corr = np.array([[1.0, float(corr)], [float(corr), 1.0]]) if d == 2 else np.eye(d) * float(corr)
    if not 1 <= d <= MAX_QUADRATURE_ASSETS:
        raise ParamError(f"weights has {d} assets in {func}: the quadrature handles 1 to {MAX_QUADRATURE_ASSETS}")
    for name, arr in (("spots", s0), ("vols", vol), ("dividends", q)):
        if arr.shape != (d,):
            raise ParamError(f"{name} has shape {arr.shape} in {func}; expected ({d},) like weights")
    if corr.shape != (d, d) or not np.allclose(corr, corr.T) or not np.allclose(np.diag(corr), 1.0):
        raise ParamError(f"correlation={corr.tolist()!r} in {func}: expected a symmetric ({d}, {d}) matrix, unit diagonal")
    if not (np.all(np.isfinite(w)) and np.all(s0 > 0) and np.all(vol >= 0) and np.all(np.isfinite(q))):
        raise ParamError(
            f"weights={w.tolist()!r}, spots={s0.tolist()!r}, vols={vol.tolist()!r}, dividends={q.tolist()!r} "
            f"in {func}: need finite weights and dividends, spots > 0, vols >= 0"
        )
    t = _positive("maturity", maturity, func)
    k, r = float(strike), float(rate)
    if not (math.isfinite(k) and math.isfinite(r)):
        raise ParamError(f"strike={strike!r}, rate={rate!r} in {func}: must be finite")
    if not (w > 0).any():
        raise ParamError(f"weights={w.tolist()!r} in {func}: need at least one positive weight")
    # the last asset integrated in closed form: of the positive weights, the one whose part of
    # the sum keeps the largest spread given the other assets (the smoothest outer integrand)
    best = None
    for cand in (i for i in range(d) if w[i] > 0):
        idx_c = np.array([i for i in range(d) if i != cand] + [cand])
        low_c = _factor(corr[np.ix_(idx_c, idx_c)], func)
        sd = vol[cand] * low_c[-1, -1]
        spread = sd * w[cand] * s0[cand] * math.exp(-q[cand] * t)  # its share of the sum's spread
        if best is None or spread > best[0]:
            best = (spread, sd, idx_c, low_c)
    _, sd_last, idx, low = best
    if sd_last * math.sqrt(t) < 1e-6:
        raise ParamError(
            f"weights={w.tolist()!r}, vols={vol.tolist()!r}, correlation={corr.tolist()!r} in {func}: no asset "
            "with a positive weight keeps any variance given the others (a degenerate market), so the "
            "quadrature would meet a kink; such markets reduce to fewer assets (assets that move as one "
            "are one Black-Scholes asset)"
        )
    fwd = s0[idx] * np.exp((r - q[idx]) * t)
    tv = vol[idx] * math.sqrt(t)
    ww = w[idx]
    dims = d - 1
    nodes = _START_NODES
    prev = _gauss_hermite_sum(nodes, dims, fwd, tv, low, ww, k)
    err = math.inf
    while True:
        if dims == 0:
            value, err = prev, 0.0
            break
        nodes *= 2
        if nodes > _MAX_NODES[dims]:
            raise ParamError(
                f"{func}: the Gauss-Hermite sums did not settle to tol={tol!r} within {_MAX_NODES[dims]} nodes "
                f"per dimension (last change {err:.3g}); vols={vol.tolist()!r}, correlation={corr.tolist()!r}"
            )
        value = _gauss_hermite_sum(nodes, dims, fwd, tv, low, ww, k)
        err = abs(value - prev)
        prev = value
        if err <= tol * max(1.0, abs(value)):
            break
    disc = math.exp(-r * t)
    call = disc * value
    if kind == "call":
        return call, disc * err
    return call - disc * (float(w @ (s0 * np.exp((r - q) * t))) - k), disc * err
