"""Fitting a model to vanilla quotes: Black-Scholes (one volatility per expiry) or Heston
(one parameter set for the whole surface) by :func:`scipy.optimize.least_squares`, with the
parameters' linearised standard errors, the fit errors and the Feller condition."""

from __future__ import annotations

import math
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np
from scipy.optimize import least_squares
from scipy.stats import qmc

from ..errors import InputError, ParamError
from ..models import BlackScholes, Heston, LocalVol, Model
from ..quotes import Market, QuoteSet
from ..references import black_scholes, heston_price, implied_vol
from ..references.heston import HestonGrid
from ..settings import REPRICE_STARTS as DEFAULT_STARTS
from ..settings import REPRICE_STEPS_PER_YEAR as DEFAULT_STEPS_PER_YEAR
from ..settings import REPRICE_TOLERANCE_VOL as DEFAULT_TOLERANCE_VOL
from ..volsurface import VarianceSurface, surface_from_quotes
from .pricing import HestonSurface, bs_vega, heston_lewis_prices

__all__ = [
    "MODELS",
    "WEIGHTINGS",
    "HESTON_BOUNDS",
    "HESTON_PARAMS",
    "BS_VOL_BOUNDS",
    "DEFAULT_STEPS_PER_YEAR",
    "DEFAULT_TOLERANCE_VOL",
    "DEFAULT_STARTS",
    "VEGA_FLOOR",
    "Calibration",
    "calibrate",
]

MODELS = {"heston": "Heston", "black-scholes": "Black-Scholes", "local-vol": "LocalVol"}
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

VEGA_FLOOR = 1e-3
"""Vega weights are floored at ``VEGA_FLOOR * S e^{-qT} sqrt(T)`` (about 1/400 of the
at-the-money vega): a far-wing quote with almost no vega would otherwise dominate the fit."""


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
    surface: VarianceSurface | None = None

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
        if self.model == "local-vol":
            substeps = max(1, math.ceil(expiry * steps_per_year - 1e-9))
            return LocalVol(surface=self.surface, spot=m.spot, rate=r, dividend=q, substeps=substeps)
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
        if self.model == "local-vol":
            lv = self.model_for(expiry)
            return np.array([lv.european_price(kind, float(x), expiry) for x in k])
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
        ``"heston"``, ``"black-scholes"`` or ``"local-vol"`` (:data:`MODELS`).
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
    variance can reach zero; the QE scheme handles both cases. Local volatility: one raw
    SVI slice per expiry fitted to the implied total variances, the surface refused if it
    has static arbitrage (:func:`limitcase.volsurface.surface_from_quotes`), and Dupire's
    local volatility simulated by log-Euler; its formula prices are the surface's own.

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
    if model == "local-vol":
        return _calibrate_localvol(qs, fitted, scales, weighting)
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


def _calibrate_localvol(qs: QuoteSet, fitted: np.ndarray, scales: np.ndarray, weighting: str) -> Calibration:
    """The SVI surface of the quotes (weights as given; the fit is in total variance, not in
    the chosen price weighting, which only scores the result) and its formula prices."""
    surface = surface_from_quotes(qs)
    params: dict[str, float] = {}
    texts = {q.expiry: q.expiry_text for q in qs.quotes}
    for t, sl in zip(surface.expiries, surface.slices):
        for name in ("a", "b", "rho", "m", "s"):
            params[f"svi_{name}[T={texts.get(float(t), f'{t:g}')}]"] = float(getattr(sl, name))
    stub = Calibration(
        model="local-vol", name=MODELS["local-vol"], quotes=qs, params=params, stderr={k: None for k in params},
        at_bound=(), weighting=weighting, formula_prices=np.zeros(0), formula_ivs=np.zeros(0), rmse_price=0.0,
        rmse_vol=0.0, max_vol_error=0.0, within_spread=(0, 0), cost=0.0, starts=1, nfev=0, surface=surface,
    )
    prices = np.empty(len(qs))
    for t, idx in qs.by_expiry():
        for i in idx:
            q = qs.quotes[i]
            prices[i] = stub.formula(t, [q.strike], q.kind)[0]
    ivs = _ivs(qs, prices)
    rp, rv, mv, ws = _fit_errors(qs, prices, ivs, fitted)
    return replace(stub, formula_prices=prices, formula_ivs=ivs, rmse_price=rp, rmse_vol=rv, max_vol_error=mv,
                   within_spread=ws, fitted=fitted, scales=scales,
                   notes=(f"SVI slices at {len(surface.expiries)} expiries, free of static arbitrage on "
                          f"log-moneyness [{surface.k_range[0]:.3g}, {surface.k_range[1]:.3g}]",))


def _calibrate_heston(qs: QuoteSet, fitted: np.ndarray, scales: np.ndarray, weighting: str, starts: int) -> Calibration:
    surface = HestonSurface.of(qs, fitted)
    mkt = np.array([qs.quotes[i].price for i in fitted])
    sw = np.sqrt([qs.quotes[i].weight for i in fitted]) / scales
    lo = np.array([b[0] for b in HESTON_BOUNDS.values()])
    hi = np.array([b[1] for b in HESTON_BOUNDS.values()])
    typical = np.array([0.04, 1.0, 0.04, 0.5, 0.5])
    cache: dict[tuple[float, ...], HestonGrid] = {}

    def grid_at(x: np.ndarray) -> HestonGrid:
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
