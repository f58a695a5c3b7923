"""Engine audits: before any exotic priced on a model is believed, the simulation itself
must pass its own checks.

Five audits, each yielding :class:`~limitcase.verdict.Outcome` records of kind ``"audit"``
(``product`` = the model's class name, ``case`` = the audit's name), Holm-corrected over the
whole run by :func:`~limitcase.verdict.finalise` in :func:`run_audits`:

``martingale``
    :math:`E[e^{-rt}S_i(t)] = S_i(0)e^{-q_it}` at every date of a grid and for every asset,
    one z-test per (date, asset) with the standard error at that date; the dates and assets
    are combined into one outcome by Bonferroni's min-p,
    :math:`p = \\min(1, L\\,\\min_l p_l)` over the L tests (a valid p-value whatever their
    dependence; Holm then runs over the audits). The error at 1/16 and 1/4 of the paths is
    reported beside it (its decay as paths grow). With ``drift_correction=True`` the same
    test is also run on paths rescaled to the forward (:class:`DriftCorrected`), as a
    separate outcome ``martingale_corrected``: the uncorrected test is always run and
    always decides, so the correction can never hide a bug.
``paths``
    The reported standard error of the reference option against the path count, over
    disjoint groups of paths, on a log-log weighted least-squares fit: the slope must be
    -1/2 (z-test of slope + 1/2; the slope and its interval are reported).
``seeds``
    K independent seeds: :math:`Q = \\sum_k ((v_k - \\bar v)/s_k)^2` with :math:`\\bar v`
    the inverse-variance weighted mean is chi-square with K - 1 degrees of freedom (Cochran
    1954) when the standard errors are right. Two-sided: a spread above what the standard
    errors claim (paths within a run not independent, SE understated) and one below it
    (seeds not independent of each other) are both flagged.
``steps``
    The reference option priced with the step halved three times (dt, dt/2, dt/4, dt/8).
    A discretised scheme (``exact = False`` on the model, e.g. Heston) is stepped through
    its ``substeps`` on common random numbers (the coarse normals are sums of the fine
    ones), the weak order is estimated from successive differences, and the Richardson
    limit :math:`(2^pP_{h} - P_{2h})/(2^p - 1)` (p the scheme's declared weak order) is
    tested against the reference price (``steps_limit``). An exact scheme is stepped by
    refining the date grid on independent normals; its level prices must agree
    (``steps_flat``, chi-square on the differences) and their pooled mean must match the
    reference price (``steps_limit``).
``degenerations``
    Each of the model's declared :class:`~limitcase.models.base.Degeneration` cases, and
    for a multi-asset model each asset alone: the reference option priced by Monte Carlo at
    the degenerate parameters against the reference library's price under the model it
    becomes.

Every audit prices through :func:`limitcase.engine.evaluate` with small products of its own
(a delivery of the asset at a date, a European call, an exchange option), so it tests the
same code path the checks use.
"""

from __future__ import annotations

import inspect
import math
import time
from dataclasses import dataclass
from typing import Any, Callable, Iterable, Mapping, Sequence

import numpy as np
from scipy.stats import chi2, norm

from .engine import BLOCK, Joint, case_key, coerce_seed, evaluate
from .errors import InputError, LimitcaseError, ModelError, NoReference, ParamError
from .models.base import Model, Simulated
from .models.gbm import BlackScholes, MultiBlackScholes
from .models.heston import Heston
from .models.merton import Merton
from .product import Observed, Product
from .settings import DEFAULT_ALPHA, DEFAULT_PATHS, DEFAULT_SEED
from .verdict import FLOAT_FLOOR, Outcome, RunResult, finalise, p_value

__all__ = [
    "AUDITS",
    "MARTINGALE_DATES",
    "AuditOption",
    "DriftCorrected",
    "default_models",
    "reference_option",
    "reference_price",
    "register_reference",
    "audit_martingale",
    "audit_paths",
    "audit_seeds",
    "audit_steps",
    "audit_degenerations",
    "audit_model",
    "run_audits",
]

AUDITS = ("martingale", "paths", "seeds", "steps", "degenerations")
"""The audits, in the order :func:`run_audits` runs them."""

MARTINGALE_DATES = (1.0 / 12.0, 0.25, 0.5, 1.0, 2.0)
"""Dates of the martingale audit: one month to two years, unevenly spaced on purpose."""

PATHS_GROUP_MIN = 1000
"""Fewest paths in a group of the paths audit (the delta-method variance of a log standard
error, about (kurtosis - 1)/(4n), is then below 0.01 for the audit options' payoffs)."""

SEED_PATHS_MIN = 1000
"""Fewest paths per seed in the seeds audit (each seed's mean is then close to normal for
the audit options, so Q is close to chi-square)."""

OPTION_MATURITY = 1.0
OPTION_DATES = 4
"""The reference option expires in one year and is observed quarterly (the quarterly grid
is the coarsest step ``dt`` of the steps audit; the payoff reads the last date)."""


def default_models() -> dict[str, Model]:
    """Every shipped model at its default parameters, by name (the ``audit`` default)."""
    return {
        "BlackScholes": BlackScholes(),
        "MultiBlackScholes": MultiBlackScholes(),
        "Heston": Heston(),
        "Merton": Merton(),
    }


# ----------------------------------------------------------------------------------------
# the audits' own small products


class _Probe(Product):
    """A product of the audits: reads some asset columns of the simulated paths.

    ``multi_asset`` is set so that the probe sees every asset a model simulates (one or
    many); ``columns`` picks the ones its payoff reads.
    """

    multi_asset = True
    abstract = True

    def __init__(self, name: str, dates: Sequence[float], n_assets: int, columns: Sequence[int]) -> None:
        super().__init__()
        object.__setattr__(self, "_name", name)
        object.__setattr__(self, "_dates", np.asarray(dates, dtype=float))
        object.__setattr__(self, "n_assets", int(n_assets))
        object.__setattr__(self, "columns", tuple(int(c) for c in columns))

    def dates(self) -> np.ndarray:
        return self._dates

    def label(self) -> str:
        return self._name

    def _read(self, obs: Observed) -> np.ndarray:
        s = obs.s[:, :, list(self.columns)]
        if not np.all(np.isfinite(s)):
            bad = np.flatnonzero(~np.isfinite(s).all(axis=(1, 2)))
            raise ModelError(
                f"the model simulated NaN or inf prices on {bad.size} of {s.shape[0]} paths "
                f"(first at path {bad[0]}); a variance or volatility went outside its domain"
            )
        return s

    def __eq__(self, other: object) -> bool:
        return self is other

    def __hash__(self) -> int:
        return id(self)


class _Delivery(_Probe):
    """Pays asset ``column`` at its one date: a prepaid forward, worth S0 exp(-q t)."""

    def payoff(self, obs: Observed) -> np.ndarray:
        return self._read(obs)[:, -1, 0]


@dataclass(frozen=True)
class AuditOption:
    """The option an audit prices: a European call on one asset, or an exchange option
    (receive asset ``columns[0]``, give asset ``columns[1]``), at ``maturity``, observed
    on ``dates_count`` equally spaced dates (the payoff reads the last)."""

    kind: str  # "call" or "exchange"
    maturity: float
    strike: float = 0.0
    columns: tuple[int, ...] = (0,)
    dates_count: int = OPTION_DATES

    def dates(self, refine: int = 1) -> np.ndarray:
        n = self.dates_count * refine
        return self.maturity * np.arange(1, n + 1) / n

    def describe(self) -> str:
        if self.kind == "call":
            return f"call K={self.strike:g} T={self.maturity:g} on asset {self.columns[0] + 1}"
        return f"exchange asset {self.columns[0] + 1} for asset {self.columns[1] + 1}, T={self.maturity:g}"

    def probe(self, n_assets: int, offset: int = 0, squared: bool = False, name: str = "") -> "_OptionProbe":
        cols = tuple(c + offset for c in self.columns)
        label = name or self.describe()
        return _OptionProbe(label + (" squared" if squared else ""), self.dates(), n_assets, cols, self, squared)


class _OptionProbe(_Probe):
    def __init__(self, name: str, dates: Sequence[float], n_assets: int, columns: Sequence[int],
                 option: AuditOption, squared: bool) -> None:
        super().__init__(name, dates, n_assets, columns)
        object.__setattr__(self, "option", option)
        object.__setattr__(self, "squared", squared)

    def payoff(self, obs: Observed) -> np.ndarray:
        s = self._read(obs)[:, -1, :]
        if self.option.kind == "call":
            x = np.maximum(s[:, 0] - self.option.strike, 0.0)
        else:
            x = np.maximum(s[:, 0] - s[:, 1], 0.0)
        return x * x if self.squared else x


def reference_option(model: Model) -> AuditOption:
    """The option the paths, seeds, steps and degenerations audits price on ``model``:
    an at-the-money call expiring in a year for one asset, an exchange of the first two
    assets for several (it depends on their correlation)."""
    if model.n_assets >= 2:
        return AuditOption("exchange", OPTION_MATURITY, columns=(0, 1))
    return AuditOption("call", OPTION_MATURITY, strike=float(model.initial()[0]))


# ----------------------------------------------------------------------------------------
# reference prices: a registry from model class to a trusted pricer


_REFERENCES: dict[type, Callable[[Model, AuditOption], tuple[float, str]]] = {}


def register_reference(model_type: type, pricer: Callable[[Model, AuditOption], tuple[float, str]]) -> None:
    """Register ``pricer(model, option) -> (price, source)`` for ``model_type`` and its
    subclasses; raise :class:`~limitcase.errors.NoReference` inside for options it cannot
    price."""
    _REFERENCES[model_type] = pricer


def reference_price(model: Model, option: AuditOption) -> tuple[float, str]:
    """The trusted price of ``option`` under ``model`` and where it comes from.

    The pricer is found along the model's class hierarchy (a subclass of
    :class:`~limitcase.models.Heston` is priced as Heston: it claims to be one).
    """
    for klass in type(model).__mro__:
        if klass in _REFERENCES:
            return _REFERENCES[klass](model, option)
    raise NoReference(
        f"no reference price registered for {type(model).__name__}; "
        "register one with limitcase.audits.register_reference"
    )


def _call_only(model: Model, option: AuditOption) -> None:
    if option.kind != "call":
        raise NoReference(f"{type(model).__name__} has a reference for calls only, not {option.kind!r}")


def _bs_reference(model: Model, option: AuditOption) -> tuple[float, str]:
    from .references import black_scholes

    _call_only(model, option)
    m: Any = model
    return float(black_scholes(m.spot, option.strike, option.maturity, m.rate, m.dividend, m.vol, "call")), \
        "Black-Scholes call"


def _multi_reference(model: Model, option: AuditOption) -> tuple[float, str]:
    from .references import black_scholes, margrabe_exchange

    m: Any = model
    if option.kind == "call":
        i = option.columns[0]
        return float(black_scholes(m.spots[i], option.strike, option.maturity, m.rate, m.dividends[i],
                                   m.vols[i], "call")), "Black-Scholes call on the asset's marginal"
    i, j = option.columns
    return float(margrabe_exchange(m.spots[i], m.spots[j], option.maturity, m.dividends[i], m.dividends[j],
                                   m.vols[i], m.vols[j], m.correlation[i, j])), "Margrabe (1978) exchange option"


def _heston_reference(model: Model, option: AuditOption) -> tuple[float, str]:
    from .references import heston_price

    _call_only(model, option)
    m: Any = model
    value = heston_price(m.spot, option.strike, option.maturity, m.rate, m.dividend, m.v0, m.kappa, m.theta,
                         m.vol_of_vol, m.rho, "call")
    return float(value), "Heston (1993) call by Lewis' integral"


def _merton_reference(model: Model, option: AuditOption) -> tuple[float, str]:
    from .references import merton_jump_price

    _call_only(model, option)
    m: Any = model
    value = merton_jump_price(m.spot, option.strike, option.maturity, m.rate, m.dividend, m.vol, m.intensity,
                              m.jump_mean, m.jump_vol, "call")
    return float(value), "Merton (1976) call by the Poisson series"


register_reference(BlackScholes, _bs_reference)
register_reference(MultiBlackScholes, _multi_reference)
register_reference(Heston, _heston_reference)
register_reference(Merton, _merton_reference)


def _marginal(model: Model, i: int) -> Model | None:
    """Asset ``i`` of a multi-asset model alone, as a one-asset model (None if unknown)."""
    if isinstance(model, MultiBlackScholes):
        return BlackScholes(spot=float(model.spots[i]), rate=model.rate, dividend=float(model.dividends[i]),
                            vol=float(model.vols[i]))
    return None


# ----------------------------------------------------------------------------------------
# model wrappers used by the audits


class DriftCorrected(Model):
    """A model whose simulated prices are rescaled, block by block and date by date, so
    that their discounted sample mean is the forward exactly: the empirical martingale
    correction of Duan and Simonato (1998), "Empirical martingale simulation for asset
    prices", Management Science 44(9), in its simplest (one-factor-per-date) form.

    It repairs a scheme's drift for pricing; it is never evidence that the scheme is right.
    The martingale audit therefore always tests the uncorrected model and reports the
    corrected one separately.
    """

    def __init__(self, model: Model) -> None:
        super().__init__()
        object.__setattr__(self, "base", model)
        object.__setattr__(self, "n_assets", model.n_assets)

    @property
    def short_rate(self) -> float:
        return self.base.short_rate

    def normals_per_step(self) -> int:
        return self.base.normals_per_step()

    def initial(self) -> np.ndarray:
        return self.base.initial()

    def dividend_yields(self) -> np.ndarray:
        return self.base.dividend_yields()

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        sim = self.base.simulate(times, z, rng)
        s = sim.s
        target = self.base.forward(times)  # (dates, assets)
        s *= (target / s.mean(axis=0))[None, :, :]
        return Simulated(s=s, step_var=sim.step_var)

    def label(self) -> str:
        return f"DriftCorrected({self.base.label()})"

    def __repr__(self) -> str:
        return self.label()

    def __eq__(self, other: object) -> bool:
        return isinstance(other, DriftCorrected) and other.base == self.base

    def __hash__(self) -> int:
        return hash(("DriftCorrected", self.base))


@dataclass(frozen=True)
class _Level:
    model: Model
    factor: int  # steps of this level per interval of the base grid
    refine: int  # date-grid refinement (1 when the level steps through substeps)


class _Levels(Model):
    """Several step sizes of one model side by side, stacked along the asset axis, so the
    engine prices them in one pass and returns their joint covariance.

    With ``common=True`` every level reads the same normals: the finest level's, summed
    over each coarse step and scaled by ``1/sqrt(group)`` (the Brownian increment of the
    coarse step). With ``common=False`` each level reads its own slice of normals and the
    levels are independent. A level steps either through the model's ``substeps`` (normals
    laid out substep by substep, ``factors`` per substep) or through a refined date grid.
    """

    def __init__(self, base: Model, levels: Sequence[_Level], factors: int, common: bool) -> None:
        super().__init__()
        object.__setattr__(self, "base", base)
        object.__setattr__(self, "levels", tuple(levels))
        object.__setattr__(self, "factors", int(factors))
        object.__setattr__(self, "common", bool(common))
        object.__setattr__(self, "n_assets", base.n_assets * len(levels))
        object.__setattr__(self, "finest", max(lv.factor for lv in levels))
        if common and any(self.finest % lv.factor for lv in levels):
            raise ModelError("common random numbers across levels need step counts that divide the finest")

    @property
    def short_rate(self) -> float:
        return self.base.short_rate

    def normals_per_step(self) -> int:
        if self.common:
            return self.finest * self.factors
        return sum(lv.factor for lv in self.levels) * self.factors

    def initial(self) -> np.ndarray:
        return np.tile(self.base.initial(), len(self.levels))

    def dividend_yields(self) -> np.ndarray:
        return np.tile(self.base.dividend_yields(), len(self.levels))

    def _simulate(self, times: np.ndarray, z: np.ndarray, rng: np.random.Generator) -> Simulated:
        n, steps = z.shape[0], times.size
        fct = self.factors
        out_s, out_v = [], []
        offset = 0
        for lv in self.levels:
            if self.common:
                group = self.finest // lv.factor
                fine = z.reshape(n, steps, lv.factor, group, fct)
                zl = fine.sum(axis=3) / math.sqrt(group)
            else:
                width = lv.factor * fct
                zl = z[:, :, offset:offset + width].reshape(n, steps, lv.factor, fct)
                offset += width
            if lv.refine == 1:
                zl = np.ascontiguousarray(zl.reshape(n, steps, lv.factor * fct))
                sim = lv.model.simulate(times, zl, rng)
                s, v = sim.s, np.broadcast_to(sim.step_var, sim.s.shape)
            else:
                r = lv.refine
                zl = np.ascontiguousarray(zl.reshape(n, steps * r, (lv.factor // r) * fct))
                prev = np.concatenate(([0.0], times[:-1]))
                fine_t = (prev[:, None] + (times - prev)[:, None] * np.arange(1, r + 1)[None, :] / r).reshape(-1)
                sim = lv.model.simulate(fine_t, zl, rng)
                s = sim.s[:, r - 1::r, :]
                v = np.broadcast_to(sim.step_var, sim.s.shape).reshape(n, steps, r, -1).sum(axis=2)
            out_s.append(s)
            out_v.append(v)
        return Simulated(s=np.concatenate(out_s, axis=2), step_var=np.concatenate(out_v, axis=2))

    def label(self) -> str:
        return f"levels of {self.base.label()}"


# ----------------------------------------------------------------------------------------
# helpers


def _name(model: Model) -> str:
    return type(model).__name__


def _outcome(model: Model, case: str, **kw: Any) -> Outcome:
    kw.setdefault("note", model.label())
    return Outcome(product=_name(model), case=case, kind="audit", verdict="pass", **kw)


def _error(model: Model, case: str, exc: BaseException, paths: int, seed: int) -> Outcome:
    kind = "" if isinstance(exc, LimitcaseError) else f"{type(exc).__name__}: "
    return Outcome(product=_name(model), case=case, kind="audit", verdict="error", message=f"{kind}{exc}",
                   paths=paths, seed=seed, note=model.label())


def _z(diff: float, se: float) -> float:
    if se > 0:
        return diff / se
    return 0.0 if diff == 0 else math.copysign(math.inf, diff)


def _seed_int(seed: Any) -> int | None:
    return int(seed) if isinstance(seed, (int, np.integer)) else None


def _check_paths(paths: int, least: int, audit: str) -> None:
    if not isinstance(paths, (int, np.integer)) or paths < least:
        raise ParamError(f"paths={paths!r} is too few for the {audit} audit; it needs at least {least}")


def _evaluate(products: Sequence[Product], model: Model, **kwargs: Any) -> Joint:
    """:func:`limitcase.engine.evaluate` on plain pseudo-random paths, always.

    The audits test the simulation itself: a control variate on the discounted underlying
    would make the martingale test vacuous (it would pin the mean to the forward), and
    antithetic or quasi-random points change what the paths and seeds audits measure.
    """
    if "method" in _EVALUATE_PARAMS:
        kwargs["method"] = "plain"
    return evaluate(products, model, **kwargs)


_EVALUATE_PARAMS = frozenset(inspect.signature(evaluate).parameters)


# ----------------------------------------------------------------------------------------
# martingale


def audit_martingale(
    model: Model,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    dates: Sequence[float] = MARTINGALE_DATES,
    drift_correction: bool = False,
    alpha: float = DEFAULT_ALPHA,
) -> list[Outcome]:
    r"""Test :math:`E[e^{-rt}S_i(t)] = S_i(0)e^{-q_it}` at every date and asset.

    Parameters
    ----------
    model
        The model audited.
    paths, seed
        Monte Carlo paths and the run's seed.
    dates
        The grid; all dates are simulated together (one path per date, common paths).
    drift_correction
        Also report the test on paths rescaled to the forward (:class:`DriftCorrected`),
        as the separate outcome ``martingale_corrected``.
    alpha
        Only used for the interval quoted in the message.

    Returns
    -------
    list of Outcome
        ``martingale`` (and ``martingale_corrected``), before the run-wide correction.

    Notes
    -----
    Per (date, asset): :math:`z_l = (\hat m_l - S_0e^{-qt})/\widehat{se}_l`,
    :math:`p_l = 2(1 - \Phi(|z_l|))`; combined by Bonferroni,
    :math:`p = \min(1, L\min_l p_l)`. The outcome shows the worst (date, asset).
    """
    _check_paths(paths, 2 * BLOCK, "martingale")
    t = np.asarray(dates, dtype=float)
    if t.ndim != 1 or t.size == 0 or t[0] <= 0 or np.any(np.diff(t) <= 0):
        raise ParamError(f"dates={tuple(dates)!r} must be increasing and > 0 for the martingale audit")
    a = model.n_assets
    legs = [_Delivery(f"S{i + 1}({tj:g})", [tj], a, [i]) for tj in t for i in range(a)]
    target = model.forward(t) * np.exp(-model.short_rate * t)[:, None]  # S0 exp(-q t), (dates, assets)
    target = target.reshape(-1)
    key = case_key(_name(model), "martingale")

    def measure(m: Model, n: int) -> tuple[Joint, np.ndarray, np.ndarray, np.ndarray]:
        joint = _evaluate(legs, m, paths=n, seed=seed, key=key)
        se = np.sqrt(np.clip(np.diag(joint.cov), 0.0, None) / joint.paths)
        # a date with no randomness (zero volatility) leaves rounding noise only: no mean is
        # taken to be more precise than FLOAT_FLOOR of its size (as in the checks' decisions)
        se = np.maximum(se, FLOAT_FLOOR * np.abs(target))
        diff = joint.mean - target
        return joint, diff, se, np.array([p_value(d, s, "==") for d, s in zip(diff, se)])

    joint, diff, se, pv = measure(model, paths)
    small = [(n, measure(model, n)[1]) for n in (paths // 16, paths // 4) if n >= 2 * BLOCK]
    decay = ", ".join(f"{np.max(np.abs(d / target)):.2g} at {n}" for n, d in small + [(paths, diff)])
    out = [_combine_dates(model, "martingale", legs, diff, se, pv, target, joint.paths, seed,
                          f"max relative error by paths: {decay}; "
                          + _worst_text(legs, diff, se, pv, "Bonferroni over"))]
    if drift_correction:
        jc, dc, sec, pvc = measure(DriftCorrected(model), paths)
        size = float(np.max(np.abs(target / joint.mean - 1.0)))
        out.append(_combine_dates(
            model, "martingale_corrected", legs, dc, sec, pvc, target, jc.paths, seed,
            f"paths rescaled to the forward (Duan-Simonato); largest rescaling {size:.3g} "
            "= the uncorrected error, which the 'martingale' outcome tests; "
            + _worst_text(legs, dc, sec, pvc, "Bonferroni over")))
    return out


def _worst_text(legs: Sequence[_Probe], diff: np.ndarray, se: np.ndarray, pv: np.ndarray, how: str) -> str:
    w = int(np.argmin(pv))
    return f"worst {legs[w].label()}: z {_z(diff[w], se[w]):.3g} ({how} {len(legs)} date-asset tests)"


def _combine_dates(model: Model, case: str, legs: Sequence[_Probe], diff: np.ndarray, se: np.ndarray,
                   pv: np.ndarray, target: np.ndarray, n: int, seed: int, message: str) -> Outcome:
    w = int(np.argmin(pv))
    p = min(1.0, len(pv) * float(pv[w]))
    return _outcome(
        model, case, value=float(target[w] + diff[w]), stderr=float(se[w]), reference=float(target[w]),
        difference=float(diff[w]), z=_z(float(diff[w]), float(se[w])), p_value=p, paths=n,
        seed=_seed_int(seed), target_source="S0 exp(-q t): the discounted price is a martingale",
        message=message, legs=tuple(leg.label() for leg in legs),
    )


# ----------------------------------------------------------------------------------------
# paths


def audit_paths(
    model: Model,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    groups: int = 5,
    alpha: float = DEFAULT_ALPHA,
    option: AuditOption | None = None,
) -> list[Outcome]:
    r"""The standard error falls like :math:`n^{-1/2}`: slope of log SE on log n.

    The ``paths`` are split into ``groups`` disjoint groups of sizes proportional to
    :math:`2^{g}` (each from its own streams), the reference option is priced on each and
    :math:`y_g = \ln \widehat{se}_g` is regressed on :math:`x_g = \ln n_g` by weighted least
    squares. By the delta method
    :math:`\mathrm{Var}\,y_g \approx \mathrm{Var}[(Y-\mu)^2]/(4n_g\sigma^4)`, with
    :math:`\mathrm{Var}[(Y-\mu)^2] = \mathrm{Var}\,Y^2 - 4\mu\,\mathrm{Cov}(Y^2, Y) +
    4\mu^2\mathrm{Var}\,Y` estimated from the option and its square priced on common paths
    and pooled over the groups; the slope :math:`\hat b` has standard error
    :math:`(\sum_g w_g(x_g - \bar x)^2)^{-1/2}`, :math:`w_g = 1/\mathrm{Var}\,y_g`. The check:
    :math:`\hat b = -1/2`.
    """
    if groups < 3:
        raise ParamError(f"groups={groups!r} must be at least 3 to fit and test a slope")
    # as many groups (up to ``groups``) as keep the smallest at PATHS_GROUP_MIN paths
    while groups > 3 and paths < PATHS_GROUP_MIN * (2**groups - 1):
        groups -= 1
    weights = 2.0 ** np.arange(groups)[::-1]
    sizes = np.floor(paths * weights / weights.sum()).astype(int)
    if sizes[-1] < PATHS_GROUP_MIN:
        raise ParamError(
            f"paths={paths!r} is too few for the paths audit: its smallest of {groups} groups would have "
            f"{int(sizes[-1])} paths; use at least {PATHS_GROUP_MIN * (2**groups - 1)}"
        )
    option = option or reference_option(model)
    a = model.n_assets
    legs = [option.probe(a), option.probe(a, squared=True)]
    disc = math.exp(-model.short_rate * option.maturity)
    se_g, var4, var2 = [], [], []
    for g, n in enumerate(sizes):
        joint = _evaluate(legs, model, paths=int(n), seed=seed, key=case_key(_name(model), "paths", str(g)))
        mu = joint.mean[0]
        vy, cwy, vw = joint.cov[0, 0], joint.cov[0, 1], joint.cov[1, 1]
        # Y = disc f, W = disc f^2 = Y^2 / disc: Var Y^2 = disc^2 Var W, Cov(Y^2, Y) = disc Cov(W, Y)
        var4.append(disc * disc * vw - 4.0 * mu * disc * cwy + 4.0 * mu * mu * vy)
        var2.append(vy)
        se_g.append(joint.estimate([1.0, 0.0]).stderr)  # the engine's own standard error
    n_g = sizes.astype(float)
    pooled4 = float(np.sum(n_g * np.array(var4)) / n_g.sum())
    pooled2 = float(np.sum(n_g * np.array(var2)) / n_g.sum())
    c = pooled4 / (4.0 * pooled2 * pooled2)
    x, y = np.log(n_g), np.log(np.array(se_g))
    w = n_g / c
    xb = float(np.sum(w * x) / w.sum())
    yb = float(np.sum(w * y) / w.sum())
    sxx = float(np.sum(w * (x - xb) ** 2))
    slope = float(np.sum(w * (x - xb) * (y - yb)) / sxx)
    se_b = 1.0 / math.sqrt(sxx)
    q = norm.isf(alpha / 2.0)
    table = ", ".join(f"{s:.3g} at {int(n)}" for s, n in zip(se_g, sizes))
    return [_outcome(
        model, "paths", value=slope, stderr=se_b, reference=-0.5, difference=slope + 0.5,
        z=(slope + 0.5) / se_b, p_value=p_value(slope + 0.5, se_b, "=="), paths=int(sizes.sum()),
        seed=_seed_int(seed), target_source="SE proportional to paths^(-1/2)",
        message=(f"slope {slope:.4f}, {100 * (1 - alpha):g}% interval [{slope - q * se_b:.4f}, {slope + q * se_b:.4f}] "
                 f"(before Holm); SE by paths: {table}; {option.describe()}"),
        legs=tuple(leg.label() for leg in legs),
    )]


# ----------------------------------------------------------------------------------------
# seeds


def audit_seeds(
    model: Model,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    k: int = 32,
    alpha: float = DEFAULT_ALPHA,
    option: AuditOption | None = None,
) -> list[Outcome]:
    r"""Seed-to-seed spread against the reported standard errors.

    ``k`` seeds spawned from the run's seed (``SeedSequence.spawn``), ``paths // k`` paths
    each. Many small seeds give the test its power: Q has k - 1 degrees of freedom, and
    with the default 32 a spread twice the claimed SE is flagged almost surely at
    alpha = 0.01, where 8 seeds would miss a spread 1.4 times the SE four times in five.
    With fewer than ``k * 1000`` paths, fewer seeds are used (each keeps 1000 paths). With :math:`\bar v = \sum_k v_k s_k^{-2} / \sum_k s_k^{-2}`,
    :math:`Q = \sum_k (v_k - \bar v)^2/s_k^2 \sim \chi^2_{k-1}` (Cochran 1954, "The
    combination of estimates from different experiments", Biometrics 10(1)); two-sided
    p-value :math:`2\min(F(Q), 1 - F(Q))`. The outcome's value is Q, its reference the mean
    k - 1 and its stderr the chi-square's standard deviation :math:`\sqrt{2(k-1)}`.
    """
    if k < 3:
        raise ParamError(f"k={k!r} seeds is too few for a spread test; use at least 3")
    k = max(3, min(k, paths // SEED_PATHS_MIN))  # fewer seeds rather than seeds too small
    each = paths // k
    if each < SEED_PATHS_MIN:
        raise ParamError(f"paths={paths!r} is too few for {k} seeds; use at least {k * SEED_PATHS_MIN}")
    option = option or reference_option(model)
    children = coerce_seed(seed).spawn(k) if not isinstance(seed, np.random.SeedSequence) else seed.spawn(k)
    leg = option.probe(model.n_assets)
    key = case_key(_name(model), "seeds")
    est = [_evaluate([leg], model, paths=each, seed=child, key=key).estimate([1.0]) for child in children]
    v = np.array([e.value for e in est])
    s = np.array([e.stderr for e in est])
    if np.any(s <= 0):
        raise ModelError(f"a seed's standard error is {s.min()!r}: the option does not vary across paths")
    wts = 1.0 / s**2
    vbar = float(np.sum(wts * v) / wts.sum())
    q_stat = float(np.sum(((v - vbar) / s) ** 2))
    dof = k - 1
    p = float(min(1.0, 2.0 * min(chi2.sf(q_stat, dof), chi2.cdf(q_stat, dof))))
    ratio = float(np.std(v, ddof=1) / math.sqrt(np.mean(s**2)))
    sd = math.sqrt(2.0 * dof)
    return [_outcome(
        model, "seeds", value=q_stat, stderr=sd, reference=float(dof), difference=q_stat - dof,
        z=(q_stat - dof) / sd, p_value=p, paths=each * k, seed=_seed_int(seed),
        target_source=f"chi-square with {dof} degrees of freedom",
        message=(f"{k} seeds x {each} paths: spread / reported SE = {ratio:.3g} (1 expected); "
                 f"values {v.min():.5g} .. {v.max():.5g}; two-sided; {option.describe()}"),
        legs=(leg.label(),),
    )]


# ----------------------------------------------------------------------------------------
# steps


def audit_steps(
    model: Model,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    levels: int = 4,
    alpha: float = DEFAULT_ALPHA,
    option: AuditOption | None = None,
) -> list[Outcome]:
    r"""Prices at dt, dt/2, ..., dt/2^(levels-1) (dt = a quarter of the option's year).

    A model with ``exact = False`` (a discretisation, e.g. :class:`~limitcase.models.Heston`)
    is stepped through its ``substeps`` parameter (set to 1, 2, 4, ... on the option's
    quarterly grid, whatever the model's own setting), every level on the same normals; with
    :math:`d_l = P_{l} - P_{l+1}` the successive differences, the weak order is estimated as
    :math:`\hat p = \log_2(d_{L-2}/d_{L-1})` (delta-method standard error; reported only),
    and the Richardson limit with the declared order p (``model.weak_order``),
    :math:`P^* = (2^pP_L - P_{L-1})/(2^p - 1)`, is tested against the reference price.

    A model without ``exact = False`` is taken to be exact in time: it is stepped by
    refining the date grid, each level on its own normals, and the differences
    :math:`P_l - P_L` are tested jointly, :math:`d^T\Sigma^{-1}d \sim \chi^2_{L-1}`
    (``steps_flat``); the pooled (inverse-variance weighted) price is tested against the
    reference price (``steps_limit``).
    """
    if levels < 3:
        raise ParamError(f"levels={levels!r} must be at least 3 (two differences)")
    _check_paths(paths, 2 * BLOCK, "steps")
    option = option or reference_option(model)
    ref, source = reference_price(model, option)
    exact = bool(getattr(model, "exact", True))
    factors = [2**i for i in range(levels)]
    a = model.n_assets
    has_substeps = "substeps" in type(model).param_specs()
    if exact:
        lv = [_Level(model, f, f) for f in factors]
        per = model.normals_per_step()
    elif has_substeps:
        lv = [_Level(model.replace(substeps=f), f, 1) for f in factors]
        per = model.replace(substeps=1).normals_per_step()
    else:
        raise ModelError(f"{_name(model)} declares exact = False but has no substeps parameter to step through")
    stacked = _Levels(model, lv, per, common=not exact)
    legs = [option.probe(stacked.n_assets, offset=i * a, name=f"{option.describe()} dt={option.maturity / option.dates_count / f:g}")
            for i, f in enumerate(factors)]
    joint = _evaluate(legs, stacked, paths=paths, seed=seed, key=case_key(_name(model), "steps"))
    prices = joint.mean
    dts = [option.maturity / option.dates_count / f for f in factors]
    table = ", ".join(f"{p:.5g} at dt={h:.4g}" for p, h in zip(prices, dts))
    base = dict(paths=joint.paths, seed=_seed_int(seed), legs=tuple(leg.label() for leg in legs))
    L = levels
    if not exact:
        p_dec = float(getattr(model, "weak_order", 1.0))
        w = np.zeros(L)
        w[-1], w[-2] = 2**p_dec / (2**p_dec - 1), -1.0 / (2**p_dec - 1)
        est = joint.estimate(w)
        diff = est.value - ref
        order_text = _order_text(joint, L)
        out = [_outcome(
            model, "steps_limit", value=est.value, stderr=est.stderr, reference=ref, difference=diff,
            z=_z(diff, est.stderr), p_value=p_value(diff, est.stderr, "=="), target_source=source,
            message=(f"Richardson limit with weak order {p_dec:g} from the two finest steps; {order_text}; "
                     f"prices {table}; common random numbers across steps; {option.describe()}"),
            **base,
        )]
        # the bias must shrink at least as fast as the declared order says: with the
        # coarser difference resolved (|d1| >= 3 SE, so its sign is known), the contrast
        # sign(d1) (d1 - 2^p d2) must be >= 0
        e = np.eye(L)
        d1w, d2w = e[L - 3] - e[L - 2], e[L - 2] - e[L - 1]
        d1 = joint.estimate(d1w)
        if abs(d1.value) >= 3.0 * d1.stderr:
            sign = math.copysign(1.0, d1.value)
            contrast = joint.estimate(sign * (d1w - 2**p_dec * d2w))
            out.append(_outcome(
                model, "steps_order", value=contrast.value, stderr=contrast.stderr, reference=0.0,
                difference=contrast.value, z=_z(contrast.value, contrast.stderr),
                p_value=p_value(contrast.value, contrast.stderr, ">="), sense=">=",
                target_source=f"step bias shrinks by at least 2^{p_dec:g} per halving (declared weak order)",
                message=(f"|d1| - 2^{p_dec:g} |d2| with d1 = P(dt={dts[L - 3]:.4g}) - P(dt={dts[L - 2]:.4g}) = "
                         f"{d1.value:.4g}, d2 = P(dt={dts[L - 2]:.4g}) - P(dt={dts[L - 1]:.4g}) = "
                         f"{joint.estimate(d2w).value:.4g}; {order_text}"),
                **base,
            ))
        return out
    # exact scheme: flat in the step, and right
    cov = joint.cov / joint.paths
    dmat = np.zeros((L - 1, L))
    for i in range(L - 1):
        dmat[i, i], dmat[i, -1] = 1.0, -1.0
    d = dmat @ prices
    sd = dmat @ cov @ dmat.T
    stat = float(d @ np.linalg.solve(sd, d))
    dse = np.sqrt(np.diag(sd))
    worst = int(np.argmax(np.abs(d) / dse))
    flat = _outcome(
        model, "steps_flat", value=float(d[worst]), stderr=float(dse[worst]), reference=0.0,
        difference=float(d[worst]), z=float(d[worst] / dse[worst]), p_value=float(chi2.sf(stat, L - 1)),
        target_source=f"an exact scheme does not depend on the step (chi-square {stat:.3g}, {L - 1} dof)",
        message=(f"largest difference: dt={dts[worst]:.4g} minus dt={dts[-1]:.4g}; prices {table}; "
                 f"independent normals per step; {option.describe()}"),
        **base,
    )
    inv = np.linalg.inv(cov)
    one = np.ones(L)
    wts = inv @ one / (one @ inv @ one)
    est = joint.estimate(wts)
    diff = est.value - ref
    limit = _outcome(
        model, "steps_limit", value=est.value, stderr=est.stderr, reference=ref, difference=diff,
        z=_z(diff, est.stderr), p_value=p_value(diff, est.stderr, "=="), target_source=source,
        message=f"pooled over {L} steps (exact scheme); {option.describe()}", **base,
    )
    return [flat, limit]


def _order_text(joint: Joint, L: int) -> str:
    """The estimated weak order from the two finest differences, or why it is not resolved."""
    e = np.eye(L)
    d1w, d2w = e[L - 3] - e[L - 2], e[L - 2] - e[L - 1]
    d1, d2 = joint.estimate(d1w), joint.estimate(d2w)
    if abs(d1.value) < 3 * d1.stderr or abs(d2.value) < 3 * d2.stderr or d1.value * d2.value <= 0:
        return (f"weak order not resolved (differences {d1.value:.3g} +/- {d1.stderr:.2g}, "
                f"{d2.value:.3g} +/- {d2.stderr:.2g}: the step bias is within the noise)")
    c = joint.cov / joint.paths
    g = np.array([1.0 / d1.value, -1.0 / d2.value]) / math.log(2.0)
    m = np.vstack([d1w, d2w])
    se = math.sqrt(max(float(g @ (m @ c @ m.T) @ g), 0.0))
    order = math.log2(d1.value / d2.value)
    return f"estimated weak order {order:.2f} +/- {se:.2f}"


# ----------------------------------------------------------------------------------------
# degenerations


def audit_degenerations(
    model: Model,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
) -> list[Outcome]:
    """Each declared degeneration of ``model`` (and, for several assets, each asset alone):
    the reference option priced by Monte Carlo at the degenerate parameters against the
    reference price under the model it becomes."""
    _check_paths(paths, 2 * BLOCK, "degenerations")
    out: list[Outcome] = []
    for deg in type(model).degenerations:
        case = f"degenerations:{deg.name}"
        try:
            changes = {k: (v(model) if callable(v) else v) for k, v in deg.changes.items()}
            at_limit = model.replace(**changes)
            becomes = deg.becomes(at_limit)
            option = reference_option(at_limit)
            ref, source = reference_price(becomes, option)
            out.append(_priced_against(at_limit, case, option, ref, f"{becomes.label()} by {source}",
                                       paths, seed, deg.note or f"becomes {becomes.label()}"))
        except Exception as exc:  # a declaration or the model failed: report, go on
            out.append(_error(model, case, exc, paths, _seed_int(seed) or 0))
    if model.n_assets > 1:
        for i in range(model.n_assets):
            alone = _marginal(model, i)
            if alone is None:
                continue
            case = f"degenerations:asset{i + 1}_alone"
            try:
                option = AuditOption("call", OPTION_MATURITY, strike=float(model.initial()[i]), columns=(i,))
                ref, source = reference_price(alone, AuditOption("call", OPTION_MATURITY, strike=option.strike))
                out.append(_priced_against(model, case, option, ref, f"{alone.label()} by {source}", paths, seed,
                                           f"asset {i + 1} alone is Black-Scholes with its own vol and dividend"))
            except Exception as exc:
                out.append(_error(model, case, exc, paths, _seed_int(seed) or 0))
    return out


def _priced_against(model: Model, case: str, option: AuditOption, ref: float, source: str,
                    paths: int, seed: int, note: str) -> Outcome:
    leg = option.probe(model.n_assets)
    joint = _evaluate([leg], model, paths=paths, seed=seed, key=case_key(_name(model), case))
    est = joint.estimate([1.0])
    diff = est.value - ref
    return _outcome(
        model, case, value=est.value, stderr=est.stderr, reference=ref, difference=diff, z=_z(diff, est.stderr),
        p_value=p_value(diff, est.stderr, "=="), paths=joint.paths, seed=_seed_int(seed), target_source=source,
        message=option.describe(), note=f"{note}; {model.label()}", legs=(leg.label(),),
    )


# ----------------------------------------------------------------------------------------
# runner


_RUNNERS: dict[str, Callable[..., list[Outcome]]] = {
    "martingale": audit_martingale,
    "paths": audit_paths,
    "seeds": audit_seeds,
    "steps": audit_steps,
    "degenerations": audit_degenerations,
}


def audit_model(
    model: Model,
    audits: Sequence[str] = AUDITS,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
    drift_correction: bool = False,
    timings: dict[str, float] | None = None,
) -> list[Outcome]:
    """Run the named audits on one model; outcomes before the run-wide correction.

    An audit that raises becomes an ``error`` outcome for that audit; the others still run.
    ``timings``, if given, receives the seconds each audit took.
    """
    unknown = [a for a in audits if a not in _RUNNERS]
    if unknown:
        raise InputError(f"unknown audit {unknown[0]!r}; the audits are: {', '.join(AUDITS)}")
    out: list[Outcome] = []
    for name in audits:
        kwargs: dict[str, Any] = dict(paths=paths, seed=seed, alpha=alpha)
        if name == "martingale":
            kwargs["drift_correction"] = drift_correction
        start = time.perf_counter()
        try:
            out.extend(_RUNNERS[name](model, **kwargs))
        except Exception as exc:  # the model (or its declarations) failed: report it, go on
            out.append(_error(model, name, exc, paths, _seed_int(seed) or 0))
        if timings is not None:
            timings[name] = time.perf_counter() - start
    return out


def run_audits(
    models: Mapping[str, Model] | Iterable[Model] | None = None,
    audits: Sequence[str] = AUDITS,
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
    drift_correction: bool = False,
    select: Sequence[str] = (),
    progress: Callable[[int, int], None] | None = None,
) -> RunResult:
    """Audit every model (default: :func:`default_models`) and apply Holm's correction
    over all the audits' outcomes at level ``alpha``.

    ``select``: keep only the outcomes whose ``model/case`` contains one of these texts
    (and run only the audits that can produce them), before the correction.
    ``RunResult.extra`` holds the models audited and the seconds each audit took
    (``timings``: ``{model name: {audit: seconds}}``).
    """
    coerce_seed(seed)
    if models is None:
        models = default_models()
    items = list(models.items()) if isinstance(models, Mapping) else [(_name(m), m) for m in models]
    outcomes: list[Outcome] = []
    timings: dict[str, dict[str, float]] = {}
    for i, (name, model) in enumerate(items):
        timings[name] = {}
        wanted = [a for a in audits if not select
                  or any(p in f"{_name(model)}/{a}" or f"{_name(model)}/{a}" in p for p in select)]
        found = audit_model(model, wanted, paths=paths, seed=seed, alpha=alpha,
                            drift_correction=drift_correction, timings=timings[name])
        if select:
            found = [o for o in found if any(p in f"{o.product}/{o.case}" for p in select)]
        outcomes.extend(found)
        if progress is not None:
            progress(i + 1, len(items))
    extra = {
        "models": {name: m.label() for name, m in items},
        "audits": list(audits),
        "timings": {k: {a: round(s, 3) for a, s in v.items()} for k, v in timings.items()},
    }
    return RunResult(finalise(outcomes, alpha), paths=paths, seed=seed, alpha=alpha, extra=extra)
