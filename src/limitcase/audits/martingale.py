"""The martingale audit, and the two audits of the standard error: against the path
count (``paths``) and across seeds (``seeds``)."""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np
from scipy.stats import chi2, norm

from ..engine import BLOCK, Joint, case_key, coerce_seed
from ..errors import ModelError, ParamError
from ..models.base import Model
from ..settings import DEFAULT_ALPHA, DEFAULT_PATHS, DEFAULT_SEED
from ..verdict import FLOAT_FLOOR, Outcome, p_value
from .constants import MARTINGALE_DATES, PATHS_GROUP_MIN, SEED_PATHS_MIN
from .probes import AuditOption, _Delivery, _Probe, reference_option
from .wrappers import DriftCorrected
from .common import _check_paths, _evaluate, _name, _outcome, _seed_int, _z

__all__ = [
    "audit_martingale",
    "audit_paths",
    "audit_seeds",
]


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
