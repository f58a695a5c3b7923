"""Calibrate a model to vanilla quotes, then reprice every quote by Monte Carlo.

A model calibrated to market quotes must price them back under the Monte Carlo engine that
prices the exotics; otherwise every exotic priced with it is suspect. This module does both
halves:

* :func:`calibrate` fits Black-Scholes (one volatility per expiry) or Heston (one parameter
  set for the whole surface, by its characteristic function) with
  :func:`scipy.optimize.least_squares`, and reports the parameters, their linearised
  standard errors, the fit errors and the Feller condition;
* :func:`reprice` prices every quote by the engine (:func:`limitcase.engine.evaluate`, the
  catalogue's :class:`~limitcase_payoffs.vanilla.EuropeanCall` and
  :class:`~limitcase_payoffs.vanilla.EuropeanPut` on common paths, one call per expiry)
  under the calibrated model and decides, quote by quote, with Holm's correction over all
  quotes (:func:`limitcase.verdict.finalise`).

The decision for one quote joins two tests of the Monte Carlo price ``M`` (standard error
``s``):

* **market**: ``M`` lies in the quote's band ``[lo, hi]`` (its bid-ask, or the market price
  moved by a declared tolerance in volatility points when there is no bid-ask), widened by
  ``z s``: ``p_band = 2 (1 - Phi(max(|M - c| - h, 0) / s))`` with ``c`` and ``h`` the
  band's centre and half-width (the verdict module's test with allowance ``h``);
* **formula**: ``M`` agrees with the model's own formula price ``F`` (Heston: Lewis'
  integral of the characteristic function; Black-Scholes: the closed form):
  ``p_formula = 2 (1 - Phi(|M - F| / s))`` (the formula's error, below 1e-10, is left out).

The quote's p-value is ``min(1, 2 min(p_band, p_formula))`` (Bonferroni over its two
hypotheses, valid whatever their dependence), and Holm over the quotes keeps the
family-wise false-alarm rate of the whole table at most ``alpha``. A failure of the first
test alone says the calibration does not fit that quote; of the second, that the
simulation does not reproduce the model it was given (scheme, time step or code).

Rates and dividends: the quote expiring at T is simulated and priced with the zero rate
R(T) and the yield Q(T) held flat to T (exact for Europeans under deterministic rates; see
:mod:`limitcase.quotes`), so each expiry has its own model and its own ``evaluate`` call.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any, Callable, Sequence

import numpy as np
from scipy.optimize import least_squares
from scipy.stats import norm, qmc

from .engine import case_key, evaluate
from .errors import InputError, LimitcaseError, ParamError
from .models import BlackScholes, Heston, Model
from .quotes import Market, Quote, QuoteSet, describe
from .references import black_scholes, heston_price, implied_vol
from .suite import RunResult
from .verdict import Outcome, finalise, p_value

__all__ = [
    "MODELS",
    "WEIGHTINGS",
    "HESTON_BOUNDS",
    "DEFAULT_STEPS_PER_YEAR",
    "DEFAULT_TOLERANCE_VOL",
    "DEFAULT_STARTS",
    "Calibration",
    "RepriceRow",
    "Repricing",
    "calibrate",
    "reprice",
    "bs_vega",
    "heston_lewis_prices",
    "heston_log_cf",
]

MODELS = {"heston": "Heston", "black-scholes": "Black-Scholes"}
"""Calibratable models: command-line name -> report name."""

WEIGHTINGS = ("vega", "spread")

HESTON_BOUNDS: dict[str, tuple[float, float]] = {
    "v0": (1e-4, 1.0),
    "kappa": (1e-2, 20.0),
    "theta": (1e-4, 1.0),
    "vol_of_vol": (1e-2, 4.0),
    "rho": (-0.99, 0.99),
}
"""Search box of the Heston fit: volatilities of 1% to 100% (v0, theta), mean-reversion
half-lives from 0.03 to 70 years (kappa), vol of vol to 400%, |rho| < 0.99 (a perfectly
correlated model is degenerate). Wide enough for equity-index surfaces (common practice)."""

HESTON_PARAMS = tuple(HESTON_BOUNDS)
BS_VOL_BOUNDS = (1e-3, 5.0)

DEFAULT_STEPS_PER_YEAR = 32
"""Heston scheme steps per year in the reprice. The QE scheme's bias at 16 steps a year was
below 0.7 standard errors of 200,000 paths on every strike of the demo surface (T = 0.3
and 2); 32 halves the step again."""

DEFAULT_TOLERANCE_VOL = 0.5
"""Declared tolerance (implied-volatility points) of a quote without bid-ask."""

DEFAULT_STARTS = 6
VEGA_FLOOR = 1e-3
"""Vega weights are floored at ``VEGA_FLOOR * S e^{-qT} sqrt(T)`` (about 1/400 of the
at-the-money vega): a far-wing quote with almost no vega would otherwise dominate the fit."""

_GL_X, _GL_W = np.polynomial.legendre.leggauss(16)
_ENVELOPE_TOL = 1e-12


# ----------------------------------------------------------------------------------------
# formulas used by the fit


def bs_vega(spot: float, strike: Any, maturity: float, rate: float, dividend: float, vol: Any) -> np.ndarray:
    r"""Black-Scholes vega :math:`\partial c/\partial\sigma = S e^{-qT} n(d_1)\sqrt T`.

    With :math:`d_1 = [\ln(S/K) + (r - q + \sigma^2/2)T]/(\sigma\sqrt T)`; the same for calls
    and puts (Hull, *Options, Futures, and Other Derivatives*, chapter on the Greek letters).
    """
    k = np.asarray(strike, dtype=float)
    v = np.maximum(np.asarray(vol, dtype=float), 1e-12)
    srt = v * math.sqrt(maturity)
    d1 = (np.log(spot / k) + (rate - dividend) * maturity) / srt + 0.5 * srt
    return spot * math.exp(-dividend * maturity) * norm.pdf(d1) * math.sqrt(maturity)


def heston_log_cf(u: Any, maturity: Any, v0: Any, kappa: Any, theta: Any, vol_of_vol: Any, rho: Any) -> np.ndarray:
    r"""Log characteristic function of :math:`X_T = \ln(S_T/S_0) - (r-q)T` under Heston,
    broadcasting over ``u`` (complex) and every parameter (the calibration's own, vectorised
    over parameter sets; no validation).

    Notes
    -----
    With :math:`a = \kappa - \rho\sigma iu`, :math:`\beta = iu + u^2`,
    :math:`d = \sqrt{a^2 + \sigma^2\beta}` (principal root) and
    :math:`g = (a-d)/(a+d)`, the form of Albrecher, Mayer, Schoutens and Tistaert ("The
    little Heston trap", Wilmott Magazine, January 2007), free of branch-cut jumps:

    .. math::

        \ln\varphi = \frac{\kappa\theta}{\sigma^2}\Big[(a-d)T
            - 2\ln\frac{1-ge^{-dT}}{1-g}\Big]
            + \frac{v_0(a-d)}{\sigma^2}\frac{1-e^{-dT}}{1-ge^{-dT}},

    evaluated with :math:`a - d = -\sigma^2\beta/(a+d)` and
    :math:`\ln((1-ge^{-dT})/(1-g)) = \ln(1+z)`, :math:`z = g(1-e^{-dT})/(1-g)`, whose
    division by :math:`\sigma^2` is carried out analytically (:math:`z/\sigma^2` and
    :math:`\ln(1+z)/z` by its series for small :math:`|z|`), so no digits are lost as the
    vol of vol gets small. Needs :math:`\sigma > 0` (the fit keeps :math:`\sigma \ge 0.01`).
    """
    u = np.asarray(u, dtype=complex)
    iu = 1j * u
    beta = iu + u * u
    a = kappa - rho * vol_of_vol * iu
    d = np.sqrt(a * a + vol_of_vol * vol_of_vol * beta)
    apd = a + d
    amd_s2 = -beta / apd  # (a - d) / sigma^2
    g = vol_of_vol * vol_of_vol * amd_s2 / apd
    em = -np.expm1(-d * maturity)  # 1 - e^{-dT}
    z_s2 = amd_s2 / apd * em / (1.0 - g)  # z / sigma^2, z = g (1 - e^{-dT}) / (1 - g)
    z = vol_of_vol * vol_of_vol * z_s2
    # log(1 + z) / z: numpy's complex log1p is log(1 + z), inaccurate for small |z|
    small = np.abs(z) < 1e-4
    zs = np.where(small, z, 0.0)
    with np.errstate(all="ignore"):
        direct = np.log(1.0 + np.where(small, 1.0, z)) / np.where(small, 1.0, z)
    ratio = np.where(small, 1.0 - zs * (0.5 - zs * (1.0 / 3.0 - zs * 0.25)), direct)
    c = kappa * theta * (amd_s2 * maturity - 2.0 * ratio * z_s2)
    return c + v0 * amd_s2 * em / (1.0 - g * (1.0 - em))


class _LewisGrid:
    """Gauss-Legendre nodes of Lewis' integral for several expiries, built for one
    parameter set and reusable for nearby ones (finite-difference Jacobians on one grid).

    Per expiry: the upper limit U beyond which ``u |phi_X(u - i/2)| / (u^2 + 1/4) < 1e-12``
    on a geometric scan (ratio 2^(1/4)); 16-point panels of width
    ``min(1/4 + u/4, 3/(k_max + 0.05), U/24)``: narrow near the poles of ``1/(u^2 + 1/4)``
    at ``u = +-i/2``, at most 3 radians of ``e^{iuk}`` each, and at least 24 panels over a
    range where the integrand decays by 1e-12 (a factor of about 3 per panel).
    """

    _SCAN = 0.05 * 2.0 ** (np.arange(0, 4 * 34) / 4.0)  # 0.05 .. 1.7e9

    def __init__(self, maturities: Sequence[float], k_max: Sequence[float], params: Sequence[float]) -> None:
        t = np.asarray(maturities, dtype=float)
        u = self._SCAN
        with np.errstate(all="ignore"):
            env = u * np.exp(heston_log_cf(u[None, :] - 0.5j, t[:, None], *params).real) / (u * u + 0.25)
        nodes, weights, owner = [], [], []
        for j, (row, km) in enumerate(zip(env, k_max)):
            bad = np.nonzero(~(row < _ENVELOPE_TOL))[0]
            upper = float(u[0] if bad.size == 0 else u[min(bad[-1] + 1, u.size - 1)])
            w_max = min(3.0 / (km + 0.05), upper / 24.0)
            edges = [0.0]
            e = 0.0
            while e < upper:
                e = min(upper, e + max(min(w_max, 0.25 + 0.25 * e), 1e-3))
                edges.append(e)
            ed = np.asarray(edges)
            half = 0.5 * np.diff(ed)
            x = ((0.5 * (ed[1:] + ed[:-1]))[:, None] + half[:, None] * _GL_X[None, :]).ravel()
            nodes.append(x)
            weights.append((half[:, None] * _GL_W[None, :]).ravel())
            owner.append(np.full(x.size, j))
        self.maturities = t
        self.bounds = np.cumsum([0] + [x.size for x in nodes])
        self.nodes = np.concatenate(nodes)
        self.weights = np.concatenate(weights)
        self.t_of_node = t[np.concatenate(owner)]

    def cf_over_pole(self, params: np.ndarray) -> np.ndarray:
        """``phi_X(u - i/2) / (u^2 + 1/4)`` at every node for each parameter row
        (``params`` of shape (P, 5)) -> (P, nodes)."""
        p = np.atleast_2d(params)
        cols = [p[:, i : i + 1] for i in range(5)]
        x = self.nodes[None, :]
        return np.exp(heston_log_cf(x - 0.5j, self.t_of_node[None, :], *cols)) / (x * x + 0.25)


class _HestonSurface:
    """Quotes grouped by expiry, priced together for one or many parameter vectors."""

    def __init__(self, spot: float, groups: Sequence[tuple[float, float, float, np.ndarray, np.ndarray, np.ndarray]], n: int) -> None:
        self.spot = spot
        self.groups = list(groups)  # (T, r, q, strikes, calls, positions)
        self.n = n
        self.logm = [np.log(spot / k) + (r - q) * t for t, r, q, k, _, _ in self.groups]
        self.k_max = [float(np.max(np.abs(lm))) for lm in self.logm]

    @classmethod
    def of(cls, qs: QuoteSet, chosen: np.ndarray) -> "_HestonSurface":
        m = qs.market
        groups = []
        for t, _ in qs.by_expiry():
            sel = np.array([j for j, i in enumerate(chosen) if qs.quotes[i].expiry == t], dtype=int)
            if sel.size:
                k = np.array([qs.quotes[chosen[j]].strike for j in sel])
                calls = np.array([qs.quotes[chosen[j]].kind == "call" for j in sel])
                groups.append((t, m.rate(t), m.dividend(t), k, calls, sel))
        return cls(m.spot, groups, chosen.size)

    def grid(self, params: Sequence[float]) -> _LewisGrid:
        return _LewisGrid([g[0] for g in self.groups], self.k_max, params)

    def prices(self, params: Any, grid: _LewisGrid | None = None) -> np.ndarray:
        """Prices for parameter rows ``params`` (shape (5,) or (P, 5)) on ``grid`` (default:
        the grid of the first row) -> (n,) or (P, n)."""
        p = np.asarray(params, dtype=float)
        rows = np.atleast_2d(p)
        grid = grid if grid is not None else self.grid(rows[0])
        cf = grid.cf_over_pole(rows)
        out = np.empty((rows.shape[0], self.n))
        for j, ((t, r, q, k, calls, sel), lm) in enumerate(zip(self.groups, self.logm)):
            a, b = grid.bounds[j], grid.bounds[j + 1]
            x, w = grid.nodes[a:b], grid.weights[a:b]
            phase = np.outer(lm, x)
            cos_w, sin_w = np.cos(phase) * w, np.sin(phase) * w
            integral = cf[:, a:b].real @ cos_w.T - cf[:, a:b].imag @ sin_w.T  # (P, strikes)
            pf = self.spot * math.exp(-q * t)
            call = pf - np.sqrt(self.spot * k) * math.exp(-0.5 * (r + q) * t) / math.pi * integral
            out[:, sel] = np.where(calls, call, call - pf + k * math.exp(-r * t))
        return out[0] if p.ndim == 1 else out


def heston_lewis_prices(
    spot: float,
    strikes: Any,
    maturity: float,
    rate: float,
    dividend: float,
    params: Sequence[float],
    calls: Any,
) -> np.ndarray:
    r"""Heston prices of one expiry's calls and puts in one pass (the calibration's pricer).

    Parameters
    ----------
    spot, strikes, maturity, rate, dividend
        Market of one expiry; ``strikes`` an array.
    params
        ``(v0, kappa, theta, vol_of_vol, rho)``.
    calls
        Boolean array, True for a call, False for a put.

    Notes
    -----
    Lewis' formula (A. L. Lewis, *Option Valuation under Stochastic Volatility*, 2000) with
    :math:`k = \ln(S/K) + (r - q)T` and :math:`\varphi_X` the characteristic function of
    :math:`\ln(S_T/S_0) - (r-q)T` (:func:`heston_log_cf`):

    .. math::

        C = S e^{-qT} - \frac{\sqrt{SK}\,e^{-(r+q)T/2}}{\pi}\int_0^\infty
            \operatorname{Re}\big[e^{iuk}\varphi_X(u - \tfrac i2)\big]\frac{du}{u^2 + 1/4},
        \qquad P = C - S e^{-qT} + K e^{-rT},

    on one fixed Gauss-Legendre grid (:class:`_LewisGrid`) shared by all strikes, one pass,
    no refinement: fast enough for least squares. It agrees with the reference
    :func:`limitcase.references.heston_price` to about 1e-12 per unit of spot over random
    parameters across :data:`HESTON_BOUNDS` and expiries 0.02 to 5 years (tested).
    """
    k = np.atleast_1d(np.asarray(strikes, dtype=float))
    c = np.broadcast_to(np.asarray(calls, dtype=bool), k.shape)
    surface = _HestonSurface(spot, [(maturity, rate, dividend, k, c, np.arange(k.size))], k.size)
    return surface.prices(np.asarray(params, dtype=float))


# ----------------------------------------------------------------------------------------
# calibration


@dataclass(frozen=True)
class Calibration:
    """A fitted model and how well it fits.

    ``formula_prices`` / ``formula_ivs`` are per quote, in the quote set's order, by the
    model's own formula (Heston: :func:`limitcase.references.heston_price`; Black-Scholes:
    the closed form). ``rmse_vol`` and ``max_vol_error`` are in volatility points (1 point =
    0.01). ``jacobian`` is that of the weighted residuals at the fit (rows: ``fitted``
    quotes; columns: ``params``), ``scales`` the residuals' divisors.
    """

    model: str
    name: str
    quotes: QuoteSet
    params: dict[str, float]
    stderr: dict[str, float | None]
    at_bound: tuple[str, ...]
    weighting: str
    formula_prices: np.ndarray
    formula_ivs: np.ndarray
    rmse_price: float
    rmse_vol: float
    max_vol_error: float
    within_spread: tuple[int, int]
    cost: float
    starts: int
    nfev: int
    feller: bool | None = None
    feller_sides: tuple[float, float] | None = None
    expiry_vols: dict[float, float] = field(default_factory=dict)
    fitted: np.ndarray = field(default_factory=lambda: np.zeros(0, dtype=int))
    scales: np.ndarray = field(default_factory=lambda: np.zeros(0))
    jacobian: np.ndarray = field(default_factory=lambda: np.zeros((0, 0)))
    notes: tuple[str, ...] = ()

    @property
    def market(self) -> Market:
        return self.quotes.market

    def model_for(self, expiry: float, *, scheme: str = "qe", steps_per_year: int = DEFAULT_STEPS_PER_YEAR) -> Model:
        """The Monte Carlo model of the quotes expiring at ``expiry``: the fitted parameters,
        spot, and the zero rate and dividend yield to that expiry held flat."""
        m = self.market
        r, q = m.rate(expiry), m.dividend(expiry)
        if self.model == "heston":
            substeps = max(1, math.ceil(expiry * steps_per_year - 1e-9))
            return Heston(scheme=scheme, spot=m.spot, rate=r, dividend=q, substeps=substeps, **self.params)
        return BlackScholes(spot=m.spot, rate=r, dividend=q, vol=self.expiry_vols[expiry])

    def formula(self, expiry: float, strikes: Any, kind: str) -> np.ndarray:
        """Model prices by formula at one expiry (Heston: the reference characteristic-
        function price; Black-Scholes: closed form at that expiry's volatility)."""
        m = self.market
        k = np.atleast_1d(np.asarray(strikes, dtype=float))
        r, q = m.rate(expiry), m.dividend(expiry)
        if self.model == "heston":
            p = [self.params[n] for n in HESTON_PARAMS]
            return np.atleast_1d(heston_price(m.spot, k, expiry, r, q, *p, kind=kind))
        return np.atleast_1d(black_scholes(m.spot, k, expiry, r, q, self.expiry_vols[expiry], kind))

    def parameter_covariance(self, noise_sd: Any) -> np.ndarray:
        r"""Linearised covariance of the fitted parameters if the fitted quotes' prices carry
        independent errors of standard deviation ``noise_sd`` (price units, per fitted quote
        or one number).

        Notes
        -----
        For least squares :math:`\min \sum_i r_i(\theta)^2`, :math:`r_i = \sqrt{w_i}(P_i(\theta)
        - P_i^{mkt})/s_i`, with Jacobian :math:`J` at the fit, a perturbation of the market
        prices with covariance :math:`\Sigma` moves the estimate by, to first order,
        :math:`\Delta\theta = -(J^TJ)^{-1}J^T D\,\Delta P` with
        :math:`D = \operatorname{diag}(\sqrt{w_i}/s_i)`, hence
        :math:`\operatorname{Cov}\hat\theta = (J^TJ)^{-1}J^TD\Sigma DJ(J^TJ)^{-1}`
        (the sandwich form; e.g. Seber and Wild, *Nonlinear Regression*, 1989, section 2.1).
        """
        if self.jacobian.size == 0:
            raise ParamError("parameter_covariance needs a fit with a Jacobian (Heston calibration)")
        sd = np.broadcast_to(np.asarray(noise_sd, dtype=float), self.fitted.shape)
        w = np.array([self.quotes.quotes[i].weight for i in self.fitted])
        d = np.sqrt(w) / self.scales
        j = self.jacobian
        inv = np.linalg.pinv(j.T @ j)
        meat = (j * ((d * sd) ** 2)[:, None]).T @ j
        return inv @ meat @ inv

    def summary(self) -> dict[str, Any]:
        """JSON-ready description of the fit."""
        out: dict[str, Any] = {
            "model": self.name,
            "parameters": dict(self.params),
            "stderr": dict(self.stderr),
            "at_bound": list(self.at_bound),
            "weighting": self.weighting,
            "rmse_price": self.rmse_price,
            "rmse_vol_points": self.rmse_vol,
            "max_vol_error_points": self.max_vol_error,
            "within_bid_ask": {"count": self.within_spread[0], "of": self.within_spread[1]},
            "cost": self.cost,
            "starts": self.starts,
            "evaluations": self.nfev,
            "notes": list(self.notes),
        }
        if self.feller is not None and self.feller_sides is not None:
            out["feller"] = {"holds": self.feller, "two_kappa_theta": self.feller_sides[0],
                             "vol_of_vol_squared": self.feller_sides[1]}
        return out


def _ivs(qs: QuoteSet, prices: np.ndarray) -> np.ndarray:
    m = qs.market
    out = np.full(len(qs), np.nan)
    for i, (q, p) in enumerate(zip(qs.quotes, prices)):
        try:
            out[i] = implied_vol(float(p), m.spot, q.strike, q.expiry, m.rate(q.expiry), m.dividend(q.expiry), q.kind)
        except ParamError:
            pass
    return out


def _scales(qs: QuoteSet, fitted: np.ndarray, weighting: str) -> np.ndarray:
    m = qs.market
    out = np.empty(fitted.size)
    if weighting == "spread":
        for j, i in enumerate(fitted):
            q = qs.quotes[i]
            if q.spread is None or not q.spread > 0.0:
                raise InputError(
                    f"{qs.path} line {q.line} ({q.label}): weighting 'spread' needs a bid-ask with ask > bid on "
                    f"every quote of positive weight; use --weighting vega or give the quote weight 0"
                )
            out[j] = q.spread
        return out
    for t, idx in qs.by_expiry():
        sel = [j for j, i in enumerate(fitted) if qs.quotes[i].expiry == t]
        if not sel:
            continue
        vols = [qs.quotes[fitted[j]].iv for j in sel]
        known = [v for v in vols if v is not None]
        fallback = float(np.median(known)) if known else 0.2
        v = np.array([fallback if x is None else x for x in vols])
        k = np.array([qs.quotes[fitted[j]].strike for j in sel])
        vega = bs_vega(m.spot, k, t, m.rate(t), m.dividend(t), v)
        floor = VEGA_FLOOR * m.spot * math.exp(-m.dividend(t) * t) * math.sqrt(t)
        out[sel] = np.maximum(vega, floor)
    return out


def _fit_errors(qs: QuoteSet, prices: np.ndarray, ivs: np.ndarray, fitted: np.ndarray) -> tuple[float, float, float, tuple[int, int]]:
    mkt = np.array([q.price for q in qs.quotes])
    rmse_p = float(np.sqrt(np.mean((prices[fitted] - mkt[fitted]) ** 2)))
    miv = np.array([np.nan if q.iv is None else q.iv for q in qs.quotes])[fitted]
    err = (ivs[fitted] - miv) * 100.0
    ok = np.isfinite(err)
    rmse_v = float(np.sqrt(np.mean(err[ok] ** 2))) if ok.any() else math.nan
    max_v = float(np.max(np.abs(err[ok]))) if ok.any() else math.nan
    with_spread = [i for i in fitted if qs.quotes[i].has_spread]
    inside = sum(1 for i in with_spread if qs.quotes[i].bid <= prices[i] <= qs.quotes[i].ask)  # type: ignore[operator]
    return rmse_p, rmse_v, max_v, (inside, len(with_spread))


def _atm_vol(qs: QuoteSet, t: float) -> float:
    f = qs.market.forward(t)
    cands = [q for q in qs.quotes if q.expiry == t and q.iv is not None]
    if not cands:
        return 0.2
    return float(min(cands, key=lambda q: abs(math.log(q.strike / f))).iv)  # type: ignore[arg-type]


def _heston_starts(n: int, qs: QuoteSet) -> np.ndarray:
    """Deterministic starting points: one from the at-the-money term structure
    (v0 from the shortest expiry, theta from the longest), the rest on a scrambled Sobol
    sequence of fixed seed over kappa (log-uniform 0.2..10), vol of vol (log-uniform
    0.1..2) and rho (-0.95..0.5), v0 and theta as in the first."""
    ts = qs.expiries()
    v0 = min(max(_atm_vol(qs, ts[0]) ** 2, 2e-4), 0.9)
    th = min(max(_atm_vol(qs, ts[-1]) ** 2, 2e-4), 0.9)
    rows = [[v0, 2.0, th, 0.6, -0.6]]
    if n > 1:
        u = qmc.Sobol(3, scramble=True, seed=20260302).random(8)[: n - 1]
        for a, b, c in u:
            rows.append([v0, 0.2 * 50.0**a, th, 0.1 * 20.0**b, -0.95 + 1.45 * c])
    return np.asarray(rows)


def calibrate(
    qs: QuoteSet,
    model: str = "heston",
    *,
    weighting: str = "vega",
    starts: int = DEFAULT_STARTS,
) -> Calibration:
    r"""Fit ``model`` to the quotes of positive weight.

    Parameters
    ----------
    qs
        Validated quotes (:func:`limitcase.quotes.load_quotes`).
    model
        ``"heston"`` or ``"black-scholes"`` (:data:`MODELS`).
    weighting
        ``"vega"``: residual :math:`\sqrt{w_i}(P_i - P_i^{mkt})/\mathcal V_i`, the price error
        over the Black-Scholes vega at the market's implied volatility, about the error in
        implied volatility (vega floored, see :data:`VEGA_FLOOR`); ``"spread"``: the price
        error over the bid-ask spread :math:`(P_i - P_i^{mkt})/(a_i - b_i)`.
    starts
        Heston: number of starting points (:func:`_heston_starts`); the best fit is kept.

    Returns
    -------
    Calibration

    Notes
    -----
    Black-Scholes: for each expiry the one volatility minimising the weighted squared
    residuals of its quotes (bounded to [0.001, 5]). Heston: one parameter set
    ``(v0, kappa, theta, vol_of_vol, rho)`` in :data:`HESTON_BOUNDS` for all expiries,
    prices by :func:`heston_lewis_prices`, trust-region reflective least squares
    (Branch, Coleman and Li 1999, as in :func:`scipy.optimize.least_squares`) from each
    start. Standard errors: :math:`s^2 (J^TJ)^{-1}` with :math:`s^2` the residual sum of
    squares over ``m - 5`` (classical nonlinear least squares; meaningless at a bound).
    The Feller condition :math:`2\kappa\theta \ge \sigma^2` (Feller 1951) says whether the
    variance can reach zero; the QE scheme handles both cases.

    References
    ----------
    .. [1] S. L. Heston, "A closed-form solution for options with stochastic volatility with
       applications to bond and currency options", Review of Financial Studies 6(2), 1993.
    .. [2] W. Feller, "Two singular diffusion problems", Annals of Mathematics 54(1), 1951.
    """
    if model not in MODELS:
        raise ParamError(f"model={model!r} is not one of {', '.join(map(repr, MODELS))}; pick one of them")
    if weighting not in WEIGHTINGS:
        raise ParamError(f"weighting={weighting!r} is not one of {', '.join(map(repr, WEIGHTINGS))}")
    if not isinstance(starts, int) or starts < 1:
        raise ParamError(f"starts={starts!r} must be an integer >= 1")
    fitted = np.array([i for i, q in enumerate(qs.quotes) if q.weight > 0], dtype=int)
    scales = _scales(qs, fitted, weighting)
    if model == "black-scholes":
        return _calibrate_bs(qs, fitted, scales, weighting)
    return _calibrate_heston(qs, fitted, scales, weighting, starts)


def _calibrate_bs(qs: QuoteSet, fitted: np.ndarray, scales: np.ndarray, weighting: str) -> Calibration:
    m = qs.market
    vols: dict[float, float] = {}
    params: dict[str, float] = {}
    stderr: dict[str, float | None] = {}
    at_bound: list[str] = []
    nfev = 0
    cost = 0.0
    for t, idx in qs.by_expiry():
        sel = [j for j, i in enumerate(fitted) if qs.quotes[i].expiry == t]
        text = qs.quotes[idx[0]].expiry_text
        if not sel:
            raise InputError(
                f"{qs.path}: no quote of positive weight expires at T={text}; Black-Scholes fits one volatility "
                "per expiry from that expiry's quotes"
            )
        qq = [qs.quotes[fitted[j]] for j in sel]
        k = np.array([q.strike for q in qq])
        calls = np.array([q.kind == "call" for q in qq])
        mkt = np.array([q.price for q in qq])
        sw = np.sqrt([q.weight for q in qq]) / scales[sel]
        r, q_ = m.rate(t), m.dividend(t)

        def resid(x: np.ndarray) -> np.ndarray:
            c = np.asarray(black_scholes(m.spot, k, t, r, q_, x[0], "call"))
            p = c - m.spot * math.exp(-q_ * t) + k * math.exp(-r * t)
            return sw * (np.where(calls, c, p) - mkt)

        known = [q.iv for q in qq if q.iv is not None]
        x0 = float(np.clip(np.mean(known) if known else 0.2, 0.01, 4.0))
        res = least_squares(resid, [x0], bounds=([BS_VOL_BOUNDS[0]], [BS_VOL_BOUNDS[1]]),
                            method="trf", xtol=1e-14, ftol=1e-14, gtol=1e-14)
        nfev += int(res.nfev)
        cost += float(res.cost)
        name = f"vol[T={text}]"
        vols[t] = float(res.x[0])
        params[name] = float(res.x[0])
        n = len(qq)
        jj = float(res.jac[:, 0] @ res.jac[:, 0])
        stderr[name] = math.sqrt(2.0 * res.cost / (n - 1) / jj) if n > 1 and jj > 0 else None
        if not BS_VOL_BOUNDS[0] < res.x[0] < BS_VOL_BOUNDS[1]:
            at_bound.append(name)
    prices = np.empty(len(qs))
    for t, idx in qs.by_expiry():
        for i in idx:
            q = qs.quotes[i]
            prices[i] = black_scholes(m.spot, q.strike, t, m.rate(t), m.dividend(t), vols[t], q.kind)
    ivs = _ivs(qs, prices)
    rp, rv, mv, ws = _fit_errors(qs, prices, ivs, fitted)
    return Calibration(
        model="black-scholes", name=MODELS["black-scholes"], quotes=qs, params=params, stderr=stderr,
        at_bound=tuple(at_bound), weighting=weighting, formula_prices=prices, formula_ivs=ivs,
        rmse_price=rp, rmse_vol=rv, max_vol_error=mv, within_spread=ws, cost=cost, starts=1, nfev=nfev,
        expiry_vols=vols, fitted=fitted, scales=scales,
    )


def _calibrate_heston(qs: QuoteSet, fitted: np.ndarray, scales: np.ndarray, weighting: str, starts: int) -> Calibration:
    surface = _HestonSurface.of(qs, fitted)
    mkt = np.array([qs.quotes[i].price for i in fitted])
    sw = np.sqrt([qs.quotes[i].weight for i in fitted]) / scales
    lo = np.array([b[0] for b in HESTON_BOUNDS.values()])
    hi = np.array([b[1] for b in HESTON_BOUNDS.values()])
    typical = np.array([0.04, 1.0, 0.04, 0.5, 0.5])
    cache: dict[tuple[float, ...], _LewisGrid] = {}

    def grid_at(x: np.ndarray) -> _LewisGrid:
        key = tuple(float(v) for v in x)
        if key not in cache:
            cache.clear()
            cache[key] = surface.grid(x)
        return cache[key]

    def resid(x: np.ndarray) -> np.ndarray:
        return sw * (surface.prices(x, grid_at(x)) - mkt)

    def jac(x: np.ndarray) -> np.ndarray:
        # forward differences, all five on the grid of x (one batched pass): the quadrature
        # error is then common to both ends and cancels from the difference
        h = 1e-6 * (np.abs(x) + typical)
        h = np.where(x + h > hi, -h, h)
        rows = np.vstack([x, x + np.diag(h)])
        p = surface.prices(rows, grid_at(x))
        return ((p[1:] - p[0]) / h[:, None]).T * sw[:, None]

    best = None
    nfev = 0
    for x0 in _heston_starts(starts, qs):
        x0 = np.clip(x0, lo * 1.001, hi * 0.999)
        res = least_squares(resid, x0, jac=jac, bounds=(lo, hi), method="trf", x_scale="jac",
                            xtol=1e-12, ftol=1e-12, gtol=1e-12, max_nfev=400)
        nfev += int(res.nfev) + int(res.njev or 0) * (len(x0) + 1)
        if best is None or res.cost < best.cost:
            best = res
    assert best is not None
    x = best.x
    params = {n: float(v) for n, v in zip(HESTON_PARAMS, x)}
    m_res, n_par = fitted.size, len(x)
    jac = np.asarray(best.jac, dtype=float)
    stderr: dict[str, float | None] = {n: None for n in HESTON_PARAMS}
    if m_res > n_par:
        cov = 2.0 * best.cost / (m_res - n_par) * np.linalg.pinv(jac.T @ jac)
        for n, v in zip(HESTON_PARAMS, np.diag(cov)):
            stderr[n] = float(math.sqrt(v)) if v >= 0 and math.isfinite(v) else None
    at_bound = tuple(n for n, v, a, b in zip(HESTON_PARAMS, x, lo, hi) if v <= a * (1 + 1e-6) + 1e-12 or v >= b * (1 - 1e-6))
    notes: list[str] = []
    if m_res <= n_par:
        notes.append(f"{m_res} quotes of positive weight for {n_par} parameters: the fit is not determined")
    # the formula column: the reference characteristic-function price
    m = qs.market
    prices = np.empty(len(qs))
    fast_gap = 0.0
    fallback = False
    for t, idx in qs.by_expiry():
        k = np.array([qs.quotes[i].strike for i in idx])
        calls = np.array([qs.quotes[i].kind == "call" for i in idx])
        fast = heston_lewis_prices(m.spot, k, t, m.rate(t), m.dividend(t), x, calls)
        try:
            c = np.atleast_1d(heston_price(m.spot, k, t, m.rate(t), m.dividend(t), *x, kind="call"))
            ref = np.where(calls, c, c - m.spot * math.exp(-m.dividend(t) * t) + k * m.discount(t))
        except Exception as exc:  # the reference failed: say so and use the fit's own integral
            notes.append(f"reference heston_price failed at T={t:g} ({type(exc).__name__}: {exc}); "
                         "formula prices there by the calibration's Lewis integral")
            ref, fallback = fast, True
        fast_gap = max(fast_gap, float(np.max(np.abs(fast - ref))))
        prices[idx] = ref
    if not fallback and fast_gap > 1e-8 * m.spot:
        notes.append(f"the calibration's pricer differs from the reference by {fast_gap:.3g} at the fit")
    ivs = _ivs(qs, prices)
    rp, rv, mv, ws = _fit_errors(qs, prices, ivs, fitted)
    two_kt, s2 = 2.0 * params["kappa"] * params["theta"], params["vol_of_vol"] ** 2
    return Calibration(
        model="heston", name=MODELS["heston"], quotes=qs, params=params, stderr=stderr, at_bound=at_bound,
        weighting=weighting, formula_prices=prices, formula_ivs=ivs, rmse_price=rp, rmse_vol=rv,
        max_vol_error=mv, within_spread=ws, cost=float(best.cost), starts=starts, nfev=nfev,
        feller=bool(two_kt >= s2), feller_sides=(two_kt, s2), fitted=fitted, scales=scales, jacobian=jac,
        notes=tuple(notes),
    )


# ----------------------------------------------------------------------------------------
# repricing


@dataclass(frozen=True)
class RepriceRow:
    """One quote: market, formula and Monte Carlo prices, their implied volatilities, and the
    two tests. Volatility differences are in points (0.01)."""

    quote: Quote
    formula: float
    formula_iv: float | None
    mc: float | None
    mc_se: float | None
    mc_iv: float | None
    mc_iv_se: float | None
    band: tuple[float, float]
    band_source: str
    z_band: float | None
    z_formula: float | None
    p_band: float | None
    p_formula: float | None
    verdict: str = ""
    error: str = ""

    @property
    def diff_price(self) -> float | None:
        return None if self.mc is None else self.mc - self.quote.price

    @property
    def diff_vol(self) -> float | None:
        if self.mc_iv is None or self.quote.iv is None:
            return None
        return (self.mc_iv - self.quote.iv) * 100.0

    @property
    def diff_spreads(self) -> float | None:
        s = self.quote.spread
        if self.mc is None or s is None or s <= 0:
            return None
        return (self.mc - self.quote.price) / s

    def to_dict(self) -> dict[str, Any]:
        q = self.quote
        return _finite({
            "case": q.label, "line": q.line, "expiry": q.expiry, "strike": q.strike, "type": q.kind,
            "market": q.price, "bid": q.bid, "ask": q.ask, "market_iv": q.iv,
            "formula": self.formula, "formula_iv": self.formula_iv,
            "mc": self.mc, "mc_stderr": self.mc_se, "mc_iv": self.mc_iv, "mc_iv_stderr": self.mc_iv_se,
            "diff_price": self.diff_price, "diff_vol_points": self.diff_vol, "diff_spreads": self.diff_spreads,
            "band": list(self.band), "band_source": self.band_source,
            "z_band": self.z_band, "z_formula": self.z_formula, "p_band": self.p_band, "p_formula": self.p_formula,
            "verdict": self.verdict, "error": self.error,
        })


@dataclass
class Repricing:
    """The repricing table, its run result (outcomes of kind ``"reprice"``) and settings."""

    calibration: Calibration
    rows: list[RepriceRow]
    result: RunResult
    scheme: str
    steps_per_year: int
    tolerance_vol: float


def _finite(d: Any) -> Any:
    """JSON-safe: NaN -> None, numpy scalars -> Python numbers, recursively."""
    if isinstance(d, dict):
        return {k: _finite(v) for k, v in d.items()}
    if isinstance(d, (list, tuple)):
        return [_finite(v) for v in d]
    if isinstance(d, (np.floating, float)):
        x = float(d)
        return x if math.isfinite(x) else None
    if isinstance(d, np.integer):
        return int(d)
    if isinstance(d, np.bool_):
        return bool(d)
    return d


def _band(q: Quote, market: Market, tolerance_vol: float) -> tuple[float, float, str]:
    if q.bid is not None and q.ask is not None:
        return q.bid, q.ask, "bid-ask"
    t = q.expiry
    if q.iv is None or tolerance_vol == 0.0:
        return q.price, q.price, "market price (no bid-ask; no implied vol to widen by)" if q.iv is None else "market price"
    d = tolerance_vol / 100.0
    args = (market.spot, q.strike, t, market.rate(t), market.dividend(t))
    lo = float(black_scholes(*args, max(q.iv - d, 0.0), q.kind))
    hi = float(black_scholes(*args, q.iv + d, q.kind))
    return lo, hi, f"market price +/- {tolerance_vol:g} vol points (declared tolerance: no bid-ask)"


def _iv(price: float, q: Quote, market: Market) -> float | None:
    t = q.expiry
    try:
        return float(implied_vol(price, market.spot, q.strike, t, market.rate(t), market.dividend(t), q.kind))
    except ParamError:
        return None


def reprice(
    calibration: Calibration,
    *,
    paths: int,
    seed: int,
    alpha: float,
    scheme: str = "qe",
    steps_per_year: int = DEFAULT_STEPS_PER_YEAR,
    tolerance_vol: float = DEFAULT_TOLERANCE_VOL,
    select: Sequence[str] = (),
    mc_model: Callable[[Model], Model] | None = None,
    progress: Callable[[int, int], None] | None = None,
) -> Repricing:
    """Reprice every quote by Monte Carlo under the calibrated model and decide.

    Parameters
    ----------
    calibration
        The fit (:func:`calibrate`).
    paths, seed, alpha
        Paths per expiry, seed of the run, family-wise false-alarm rate (Holm over quotes).
    scheme, steps_per_year
        Heston discretisation (``"qe"`` or ``"euler"``) and its steps per year.
    tolerance_vol
        Half-width, in volatility points, of the band of a quote without bid-ask.
    select
        Reprice only quotes whose ``"<model>/<label>"`` contains one of these texts (the
        calibration still uses all quotes; the streams of an expiry do not depend on which
        of its quotes are priced, so a selected quote sees the same paths and gets the same
        number, up to the rounding of the sums).
    mc_model
        Maps each expiry's calibrated model to the model actually simulated (default: the
        same). A hook to show that a wrong simulation is caught.
    progress
        ``progress(done, total)`` after each expiry.

    Returns
    -------
    Repricing
        Rows in quote-file order and the :class:`~limitcase.suite.RunResult` whose outcomes
        (kind ``"reprice"``, product the model's name, case the quote's label) carry the
        verdicts after Holm's correction.

    Notes
    -----
    The test of one quote is in the module docstring. Each expiry's quotes are priced by
    one :func:`~limitcase.engine.evaluate` call on common paths, with stream key
    ``case_key("reprice", <model>, "T=<expiry>")``.
    """
    from limitcase_payoffs.vanilla import EuropeanCall, EuropeanPut

    if not isinstance(steps_per_year, int) or steps_per_year < 1:
        raise ParamError(f"steps_per_year={steps_per_year!r} must be an integer >= 1")
    if not (isinstance(tolerance_vol, (int, float)) and 0.0 <= tolerance_vol <= 100.0):
        raise ParamError(f"tolerance_vol={tolerance_vol!r} must be in [0, 100] volatility points")
    cal = calibration
    qs = cal.quotes
    market = qs.market
    name = cal.name
    chosen = [i for i, q in enumerate(qs.quotes)
              if not select or any(s in f"{name}/{q.label}" for s in select)]
    if not chosen:
        raise InputError(f"no quote matches --select {' '.join(select)!r}; labels look like "
                         f"'{name}/{qs.quotes[0].label}'")
    chosen_set = set(chosen)
    groups = [(t, [i for i in idx if i in chosen_set]) for t, idx in qs.by_expiry()]
    groups = [(t, idx) for t, idx in groups if idx]
    rows: dict[int, RepriceRow] = {}
    outcomes: dict[int, Outcome] = {}
    used_models: list[str] = []
    for g, (t, idx) in enumerate(groups):
        base_model = cal.model_for(t, scheme=scheme, steps_per_year=steps_per_year)
        sim_model = mc_model(base_model) if mc_model is not None else base_model
        used_models.append(sim_model.label())
        products = [(EuropeanCall if qs.quotes[i].kind == "call" else EuropeanPut)(strike=qs.quotes[i].strike, maturity=t)
                    for i in idx]
        key = case_key("reprice", name, f"T={qs.quotes[idx[0]].expiry_text}")
        err = ""
        joint = None
        try:
            joint = evaluate(products, sim_model, paths=paths, seed=seed, key=key)
        except LimitcaseError as exc:
            err = str(exc)
        for j, i in enumerate(idx):
            q = qs.quotes[i]
            lo, hi, source = _band(q, market, tolerance_vol)
            formula = float(cal.formula_prices[i])
            f_iv = None if not math.isfinite(cal.formula_ivs[i]) else float(cal.formula_ivs[i])
            base = dict(product=name, case=q.label, kind="reprice", paths=paths, seed=seed,
                        legs=(products[j].label(),))
            if joint is None:
                rows[i] = RepriceRow(q, formula, f_iv, None, None, None, None, (lo, hi), source,
                                     None, None, None, None, "error", err)
                outcomes[i] = Outcome(verdict="error", message=err, **base)
                continue
            est = joint.estimate([1.0 if jj == j else 0.0 for jj in range(len(idx))])
            mc, se = est.value, est.stderr
            dof = joint.dof if math.isfinite(joint.dof) else None
            centre, half = 0.5 * (lo + hi), 0.5 * (hi - lo)
            d_band = mc - centre
            p_b = p_value(d_band, se, "==", half, dof)
            p_f = p_value(mc - formula, se, "==", 0.0, dof)
            excess = max(abs(d_band) - half, 0.0)
            z_b = excess / se if se > 0 else (0.0 if excess == 0 else math.inf)
            z_f = (mc - formula) / se if se > 0 else (0.0 if mc == formula else math.copysign(math.inf, mc - formula))
            mc_iv = _iv(mc, q, market)
            mc_iv_se = None
            if mc_iv is not None:
                v = float(bs_vega(market.spot, q.strike, t, market.rate(t), market.dividend(t), max(mc_iv, 1e-4)))
                mc_iv_se = se / v if v > 0 else None
            rows[i] = RepriceRow(q, formula, f_iv, mc, se, mc_iv, mc_iv_se, (lo, hi), source, z_b, z_f, p_b, p_f)
            msg = (f"MC {mc:.6g} +/- {se:.2g}; {source} [{lo:.6g}, {hi:.6g}]: outside by {excess:.3g} = {z_b:.2f} SE "
                   f"(p={p_b:.3g}); formula {formula:.6g}: MC - formula {mc - formula:.3g} = {z_f:.2f} SE (p={p_f:.3g})")
            outcomes[i] = Outcome(
                verdict="pass", value=mc, stderr=se, reference=centre, difference=d_band,
                z=(d_band / se if se > 0 else None), p_value=min(1.0, 2.0 * min(p_b, p_f)),
                allowance=half, allowance_reason=f"half-width of the {source} band" if half > 0 else "",
                sense="==", message=msg, method=joint.method, dof=dof,
                target_source=f"{source}; formula: " + ("Heston characteristic function (Lewis integral)"
                                                        if cal.model == "heston" else "Black-Scholes closed form"),
                note=f"market {q.price:.6g} (line {q.line} of {qs.path})", **base,
            )
        if progress is not None:
            progress(g + 1, len(groups))
    order = [i for i in range(len(qs)) if i in rows]
    final = finalise([outcomes[i] for i in order], alpha)
    table = []
    for i, o in zip(order, final):
        rows[i] = replace(rows[i], verdict=o.verdict)
        table.append(rows[i])
    extra = _finite({
        "quotes": describe(qs),
        "calibration": cal.summary(),
        "scheme": scheme if cal.model == "heston" else "exact",
        "steps_per_year": steps_per_year if cal.model == "heston" else None,
        "tolerance_vol_points": tolerance_vol,
        "simulated_models": used_models,
        "table": [r.to_dict() for r in table],
    })
    result = RunResult(final, paths=paths, seed=seed, alpha=alpha, extra=extra)
    return Repricing(cal, table, result, scheme, steps_per_year, tolerance_vol)
