"""Monte Carlo repricing of every quote under the calibrated model, and the decision
quote by quote (the test is in the package docstring, :mod:`limitcase.calibrate`).

The quotes are priced as European calls and puts of this module's own (the calibration
does not depend on the shipped catalogue), through :func:`limitcase.engine.evaluate`, on
common paths, one call per expiry."""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Callable, Sequence

import numpy as np

from ..engine import case_key, evaluate
from ..encoding import jsonable
from ..errors import InputError, LimitcaseError, ParamError
from ..models import Model
from ..params import Param
from ..product import Observed, Product
from ..quotes import Market, Quote, describe
from ..references import black_scholes, implied_vol
from ..suite import RunResult
from ..verdict import Outcome, finalise, p_value
from .fit import DEFAULT_STEPS_PER_YEAR, DEFAULT_TOLERANCE_VOL, Calibration
from .pricing import bs_vega

__all__ = ["EuropeanCall", "EuropeanPut", "RepriceRow", "Repricing", "reprice"]


class EuropeanCall(Product):
    """Pays max(S(T) - K, 0) at T: the repriced call quote."""

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs: Observed) -> np.ndarray:
        return np.maximum(obs.s[:, -1] - self.strike, 0.0)


class EuropeanPut(Product):
    """Pays max(K - S(T), 0) at T: the repriced put quote."""

    strike = Param(100.0, low=0.0, doc="strike")
    maturity = Param(1.0, low=0.0, low_open=True, doc="expiry in years")

    def dates(self) -> np.ndarray:
        return np.array([self.maturity])

    def payoff(self, obs: Observed) -> np.ndarray:
        return np.maximum(self.strike - obs.s[:, -1], 0.0)


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
        return jsonable({
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

    def smiles(self, z: float = 2.0, points: int = 80) -> list[dict[str, Any]]:
        """Plain records of one smile plot per expiry (for :func:`limitcase.report.reprice.plot_smiles`):
        the model's implied vols by formula on ``points`` strikes spanning the quotes (puts
        below the forward, calls above; a formula price with no implied vol leaves a gap),
        the market's implied vols with bid and ask, and the Monte Carlo prices' implied vols
        with bars of ``z`` standard errors (shifted a little to the right of the market point)."""
        cal = self.calibration
        m = cal.quotes.market
        by_t: dict[float, list[RepriceRow]] = {}
        for r in self.rows:
            by_t.setdefault(r.quote.expiry, []).append(r)
        out = []
        for t, rows in sorted(by_t.items()):
            ks = np.array([r.quote.strike for r in rows])
            f = m.forward(t)
            grid = np.linspace(ks.min() * 0.97, ks.max() * 1.03, points)
            curve = []
            for kind, mask in (("put", grid < f), ("call", grid >= f)):
                if mask.any():
                    for k, p in zip(grid[mask], cal.formula(t, grid[mask], kind)):
                        try:
                            iv = implied_vol(float(p), m.spot, k, t, m.rate(t), m.dividend(t), kind)
                        except ParamError:
                            continue
                        curve.append((float(k), 100 * float(iv)))
            market = [{"strike": r.quote.strike, "iv": 100 * r.quote.iv,
                       "below": 100 * (r.quote.iv - r.quote.bid_iv) if r.quote.bid_iv is not None else 0.0,
                       "above": 100 * (r.quote.ask_iv - r.quote.iv) if r.quote.ask_iv is not None else 0.0}
                      for r in rows if r.quote.iv is not None]
            shift = 0.004 * float(ks.max() - ks.min())
            mc = [{"strike": r.quote.strike + shift, "iv": 100 * r.mc_iv, "bar": 100 * z * (r.mc_iv_se or 0.0),
                   "verdict": r.verdict} for r in rows if r.mc_iv is not None]
            out.append({"expiry": float(t), "expiry_text": rows[0].quote.expiry_text, "forward": float(f),
                        "curve": sorted(curve), "market": market, "mc": mc})
        return out


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
                target_source=f"{source}; formula: " + {
                    "heston": "Heston characteristic function (Lewis integral)",
                    "local-vol": "the SVI surface's own price (Dupire)"}.get(cal.model, "Black-Scholes closed form"),
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
    extra = jsonable({
        "quotes": describe(qs),
        "calibration": cal.summary(),
        "scheme": {"heston": scheme, "local-vol": "log-euler"}.get(cal.model, "exact"),
        "steps_per_year": steps_per_year if cal.model in ("heston", "local-vol") else None,
        "tolerance_vol_points": tolerance_vol,
        "simulated_models": used_models,
        "table": [r.to_dict() for r in table],
    })
    result = RunResult(final, paths=paths, seed=seed, alpha=alpha, extra=extra)
    shown = {"heston": scheme, "local-vol": "log-euler"}.get(cal.model, "exact")
    return Repricing(cal, table, result, shown, steps_per_year, tolerance_vol)
