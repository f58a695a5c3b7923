"""Statistical decisions: a p-value per check, Holm's correction over the run.

A check compares a Monte Carlo statistic ``d`` (standard error ``se``) with its target.
With a declared bias allowance ``a``:

* ``==``: p = 2 (1 - Phi(max(|d - target| - a, 0) / se))
* ``>=``: p = Phi((d - target + a) / se)   (small when d is clearly below target)
* ``<=``: p = 1 - Phi((d - target - a) / se)

Holm (1979), "A simple sequentially rejective multiple test procedure", Scand. J.
Statistics 6(2), 65-70: sort the m p-values, ``p_adj(i) = max_{j<=i} min(1, (m-j+1) p(j))``;
a check fails when ``p_adj < alpha``. The family-wise false-alarm rate of the run is then at
most ``alpha`` whatever the dependence between checks. A path-by-path identity that breaks
is a failure outright (p = 0): no amount of noise excuses it.

The smallest bias a check could have detected with 90% power is reported beside it:
``(z_{1-alpha/(2m)} + z_{0.9}) se`` for a two-sided check (``alpha/m`` for a one-sided one), the
Bonferroni level being the strictest Holm may apply.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Sequence

from scipy.stats import norm

__all__ = ["Outcome", "p_value", "holm", "detectable_bias", "finalise", "POWER"]

POWER = 0.9


@dataclass(frozen=True)
class Outcome:
    """The result of one check, before and after the run-wide correction."""

    product: str
    case: str
    kind: str
    verdict: str  # "pass", "fail", "error"
    value: float | None = None
    stderr: float | None = None
    reference: float | None = None
    difference: float | None = None
    z: float | None = None
    p_value: float | None = None
    p_adjusted: float | None = None
    detectable_bias: float | None = None
    detectable_relative: float | None = None
    allowance: float = 0.0
    allowance_reason: str = ""
    sense: str = "=="
    message: str = ""
    paths: int = 0
    seed: int | None = None
    method: str = "plain"
    target_source: str = ""
    note: str = ""
    legs: tuple[str, ...] = ()
    pathwise_ok: bool | None = None

    def to_dict(self) -> dict:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        d["legs"] = list(self.legs)
        for k, v in d.items():
            if isinstance(v, float) and not math.isfinite(v):
                d[k] = None if math.isnan(v) else (1e308 if v > 0 else -1e308)
        return d


def p_value(diff: float, se: float, sense: str, allowance: float = 0.0) -> float:
    """p-value of the difference ``diff`` (statistic minus target) under ``sense``."""
    if not math.isfinite(diff):
        return 0.0
    tiny = 1e-12 * (1.0 + abs(diff))
    if sense == "==":
        excess = max(abs(diff) - allowance, 0.0)
        if se <= 0.0:
            return 1.0 if excess <= tiny else 0.0
        return float(2.0 * norm.sf(excess / se))
    if sense == ">=":
        shifted = diff + allowance
        if se <= 0.0:
            return 1.0 if shifted >= -tiny else 0.0
        return float(norm.cdf(shifted / se))
    if sense == "<=":
        shifted = diff - allowance
        if se <= 0.0:
            return 1.0 if shifted <= tiny else 0.0
        return float(norm.sf(shifted / se))
    raise ValueError(f"sense={sense!r} must be '==', '>=' or '<='")


def holm(pvalues: Sequence[float]) -> list[float]:
    """Holm step-down adjusted p-values, in the input order."""
    m = len(pvalues)
    order = sorted(range(m), key=lambda i: pvalues[i])
    adjusted = [1.0] * m
    running = 0.0
    for rank, i in enumerate(order):
        running = max(running, min(1.0, (m - rank) * pvalues[i]))
        adjusted[i] = running
    return adjusted


def detectable_bias(se: float, sense: str, alpha: float, m: int, power: float = POWER) -> float:
    """Smallest true bias detected with probability ``power`` at the strictest Holm level."""
    m = max(m, 1)
    level = alpha / m / (2.0 if sense == "==" else 1.0)
    return float((norm.isf(level) + norm.isf(1.0 - power)) * se)


def finalise(outcomes: Sequence[Outcome], alpha: float) -> list[Outcome]:
    """Apply Holm over every check that produced a p-value; set verdicts and bias bounds."""
    tested = [i for i, o in enumerate(outcomes) if o.verdict != "error" and o.p_value is not None]
    adjusted = holm([outcomes[i].p_value for i in tested])  # type: ignore[misc]
    m = len(tested)
    out = list(outcomes)
    for i, padj in zip(tested, adjusted):
        o = out[i]
        se = o.stderr or 0.0
        bias = detectable_bias(se, o.sense, alpha, m)
        rel = bias / abs(o.reference) if o.reference not in (None, 0.0) else None
        failed = (o.pathwise_ok is False) or padj < alpha
        message = o.message
        if failed and o.pathwise_ok is not False:
            message = (message + "; " if message else "") + (
                f"adjusted p={padj:.3g} < alpha={alpha:g} (Holm over {m} checks)"
            )
        out[i] = replace(
            o,
            verdict="fail" if failed else "pass",
            p_adjusted=padj,
            detectable_bias=bias,
            detectable_relative=rel,
            message=message,
        )
    return out
