"""A run's audit of its own models: the martingale of every model a run of checks uses,
tested on plain paths before the checks built on it are believed.

Why. The default sampling uses control variates, and a control's exact price is an
assumption about the model: the discounted underlying is worth the model's forward
``S0 exp(-q t)``. A model whose simulation misses that forward (a dividend left out of the
drift) then has the miss absorbed, in part, by every check that uses the control (and in
full by a check that *is* the control; :mod:`limitcase.controls` drops those). So every run
of checks (:func:`limitcase.suite.run_checks`) first runs, for each distinct model its checks
use, the martingale audit of :func:`limitcase.audits.audit_martingale` on plain
pseudo-random paths, without controls, with kind ``audit``, in the same Holm family as the
checks. A model that fails it fails the run, and every check under it says so
(``Outcome.model_audit`` and its message).

Distinct models. Two checks share an audit when their models are of the same class with
equal parameters (:func:`model_key`); a parameter that cannot change the drift (a volatility)
still makes another model: nothing is assumed about what a user's model does with it.

Dates. The audit's own grid (:data:`limitcase.audits.MARTINGALE_DATES`, one month to two
years) and every date at which a check under the model ends (where the underlying control
sits), all on common paths; one test per (date, asset), combined by Bonferroni.

Paths: sized to see a drift error. A drift off by ``delta`` a year moves the discounted
asset at ``t`` by the relative amount ``exp(delta t) - 1``; its relative standard error on
``n`` paths is ``sqrt(v_t / n)`` with ``v_t = Var[e^{-rt} S_t] / (S0 e^{-qt})^2``
(``e^{sigma^2 t} - 1`` under Black-Scholes). The audit rejects at the strictest Holm level
of the run when one of its ``L`` date-asset tests is beyond ``q = z_{1 - alpha/(2 m L)}``
(``m``: the run's tested cases), so a bias is found with probability 90% (``POWER``) when

    n >= (q + z_{0.9})^2 v_t / (exp(delta t) - 1)^2

at some date ``t`` (the normal approximation to the z-test's power; Cohen 1988, ch. 2). The
variance ``v_t`` is measured on a pilot of :data:`PILOT_BLOCKS` blocks from streams of its
own (independent of the audit's paths, so the choice of ``n`` cannot bias the test). The
audit takes, for each asset, the best date, and the largest count over the assets (a drift
error in any one asset is seen), rounded up to whole blocks and held within
:data:`~limitcase.settings.MODEL_AUDIT_MIN_PATHS` and
:data:`~limitcase.settings.MODEL_AUDIT_MAX_PATHS`; ``delta`` is
:data:`~limitcase.settings.MODEL_AUDIT_DRIFT` (half a percent a year). Example: the
catalogue's Black-Scholes (sigma 0.2, dates to 2 years, m about 420, L = 5): ``v_2 = 0.083``,
``q + z_{0.9} = 5.9``, n about 29,000 paths. The audit's message gives the drift it detects
at the path count used.

Audits repeat exactly (same seed, same paths): a run's outcomes are kept in a small cache,
so the many runs of one process (mutation testing) audit a model once.
"""

from __future__ import annotations

import math
from collections import OrderedDict
from dataclasses import dataclass, field, replace
from typing import Any, Hashable, Sequence

import numpy as np
from scipy.stats import norm

from .audits import MARTINGALE_DATES, audit_martingale
from .checks import Check
from .errors import LimitcaseError
from .models.base import Model
from .settings import MODEL_AUDIT_DRIFT, MODEL_AUDIT_MAX_PATHS, MODEL_AUDIT_MIN_PATHS
from .streams import BLOCK, ROLE_PATHS, block_generator, case_key, coerce_seed
from .verdict import POWER, Outcome

__all__ = ["ModelAudit", "PILOT_BLOCKS", "model_key", "plan_model_audits", "audit_paths_needed",
           "run_model_audits", "mark_checks"]

PILOT_BLOCKS = 2
"""Blocks of pilot paths on which the audit's variance per date is measured (for sizing only)."""

_CACHE_SIZE = 64
_CACHE: "OrderedDict[Hashable, Outcome]" = OrderedDict()


def _freeze(v: Any) -> Hashable:
    if isinstance(v, np.ndarray):
        return ("array", v.shape, tuple(v.ravel().tolist()))
    if isinstance(v, (list, tuple)):
        return tuple(_freeze(x) for x in v)
    try:
        hash(v)
    except TypeError:
        return ("object", id(v))  # unhashable and not a sequence: distinct unless the same object
    return v


def model_key(model: Model) -> Hashable:
    """Two models are the same for the run's audit when they are of the same class with
    equal parameters (an unhashable parameter object counts by identity)."""
    return (type(model), tuple((k, _freeze(v)) for k, v in sorted(model.params().items())))


@dataclass
class ModelAudit:
    """One model a run uses: the checks under it (their indices) and the audit's dates."""

    model: Model
    key: Hashable
    case: str = "martingale"
    checks: list[int] = field(default_factory=list)
    dates: tuple[float, ...] = ()


def _last_dates(check: Check) -> set[float]:
    out = set()
    for leg in check.legs:
        try:
            out.add(round(float(leg.validated_dates()[-1]), 12))
        except Exception:  # a leg whose dates are broken is that check's error, not the audit's
            continue
    return out


def plan_model_audits(checks: Sequence[Check]) -> list[ModelAudit]:
    """The distinct models of ``checks`` (see :func:`model_key`), in order of first use,
    with the checks under each and the audit's dates. Several models of one class are
    named ``martingale:1``, ``martingale:2``, ... (their labels are in the outcome's note)."""
    plans: dict[Hashable, ModelAudit] = {}
    for i, c in enumerate(checks):
        if c.model is None:
            continue
        key = model_key(c.model)
        plan = plans.get(key)
        if plan is None:
            plan = plans[key] = ModelAudit(c.model, key)
        plan.checks.append(i)
        plan.dates = tuple(sorted(set(plan.dates) | _last_dates(c)))
    out = list(plans.values())
    by_class: dict[str, list[ModelAudit]] = {}
    for p in out:
        p.dates = tuple(sorted({round(float(t), 12) for t in MARTINGALE_DATES} | set(p.dates)))
        by_class.setdefault(type(p.model).__name__, []).append(p)
    for same in by_class.values():
        if len(same) > 1:
            for j, p in enumerate(same, 1):
                p.case = f"martingale:{j}"
    return out


def _pilot_variance(model: Model, dates: np.ndarray, seed: int) -> np.ndarray:
    """``Var[e^{-rt} S_t] / (S0 e^{-qt})^2`` per (date, asset), on pilot paths of their own."""
    ss = coerce_seed(seed)
    key = case_key(type(model).__name__, "martingale", "sizing")
    k = model.normals_per_step()
    disc = np.exp(-model.short_rate * dates)[None, :, None]
    parts = []
    for b in range(PILOT_BLOCKS):
        g = block_generator(ss, key, ROLE_PATHS, b)
        z = g.standard_normal((BLOCK, dates.size, k))
        parts.append(np.asarray(model.simulate(dates, z, g).s, dtype=float) * disc)
    x = np.concatenate(parts)
    target = np.asarray(model.forward(dates), dtype=float) * np.exp(-model.short_rate * dates)[:, None]
    return np.var(x, axis=0, ddof=1) / target**2


def audit_paths_needed(v: np.ndarray, dates: np.ndarray, alpha: float, family: int,
                       drift: float = MODEL_AUDIT_DRIFT) -> int:
    """Paths for the audit to see a drift error of ``drift`` a year with 90% power at the
    strictest Holm level of a family of ``family`` (module notes); ``v`` is (dates, assets)."""
    tests = v.size
    q = float(norm.isf(alpha / (2.0 * max(int(family), 1) * tests)) + norm.isf(1.0 - POWER))
    bias = np.expm1(drift * dates)[:, None]
    need = q * q * v / bias**2  # per (date, asset)
    per_asset = np.min(need, axis=0)  # the best date of each asset
    n = float(np.max(per_asset))
    if not math.isfinite(n):
        return MODEL_AUDIT_MAX_PATHS
    n = max(MODEL_AUDIT_MIN_PATHS, min(MODEL_AUDIT_MAX_PATHS, -(-int(math.ceil(n)) // BLOCK) * BLOCK))
    return int(n)


def _detectable_drift(v: np.ndarray, dates: np.ndarray, alpha: float, family: int, n: int) -> float:
    q = float(norm.isf(alpha / (2.0 * max(int(family), 1) * v.size)) + norm.isf(1.0 - POWER))
    rel = q * np.sqrt(v / n)  # detectable relative bias per (date, asset)
    per = np.log1p(rel) / dates[:, None]
    return float(np.max(np.min(per, axis=0)))


def _audit_one(plan: ModelAudit, seed: int, alpha: float, family: int) -> Outcome:
    model = plan.model
    dates = np.asarray(plan.dates, dtype=float)
    try:
        v = _pilot_variance(model, dates, seed)
        n = audit_paths_needed(v, dates, alpha, family)
        cache_key = (plan.key, seed, n, plan.dates)
        found = _CACHE.get(cache_key)
        if found is None:
            found = audit_martingale(model, paths=n, seed=seed, dates=plan.dates)[0]
            _CACHE[cache_key] = found
            while len(_CACHE) > _CACHE_SIZE:
                _CACHE.popitem(last=False)
        seen = _detectable_drift(v, dates, alpha, family, n)
        sizing = (f"run audit on plain paths, no controls: {n} paths detect a drift error of "
                  f"{100 * seen:.2g}% a year with 90% power (sized for {100 * MODEL_AUDIT_DRIFT:g}%)")
        return replace(found, case=plan.case, note=model.label(), message=f"{sizing}; {found.message}")
    except Exception as exc:  # the model cannot be audited: an error of the run
        what = "" if isinstance(exc, LimitcaseError) else f"{type(exc).__name__}: "
        return Outcome(product=type(model).__name__, case=plan.case, kind="audit", verdict="error",
                       message=f"the model's martingale audit could not run: {what}{exc}",
                       seed=seed, note=model.label())


def run_model_audits(plans: Sequence[ModelAudit], *, seed: int, alpha: float, family: int) -> list[Outcome]:
    """The martingale audit of each planned model (outcomes before Holm's correction)."""
    return [_audit_one(p, seed, alpha, family) for p in plans]


def mark_checks(outcomes: Sequence[Outcome], plans: Sequence[ModelAudit], audits: Sequence[Outcome]) -> list[Outcome]:
    """Checks' outcomes with ``model_audit`` set to their model's audit verdict (after Holm),
    and, when it did not pass, a message saying so."""
    out = list(outcomes)
    for plan, a in zip(plans, audits):
        for i in plan.checks:
            o = out[i]
            message = o.message
            if a.verdict != "pass":
                text = (f"the model failed its martingale audit ({a.product}/{a.case}, {plan.model.label()}): "
                        "its simulation misses the forward, which control variates assume; this check "
                        "is not evidence") if a.verdict == "fail" else (
                        f"the model's martingale audit did not run ({a.product}/{a.case}): {a.message}")
                message = (message + "; " if message else "") + text
            out[i] = replace(o, model_audit=a.verdict, message=message)
    return out
