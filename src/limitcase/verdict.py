"""Statistical decisions: a p-value per check, Holm's correction over the run.

A check compares a Monte Carlo statistic ``d`` (standard error ``se``) with its target.
With a declared bias allowance ``a``:

* ``==``: p = 2 (1 - F(max(|d - target| - a, 0) / se))
* ``>=``: p = F((d - target + a) / se)   (small when d is clearly below target)
* ``<=``: p = 1 - F((d - target - a) / se)

``F`` is the standard normal distribution function for a large-sample standard error, and
Student's t with the estimate's degrees of freedom when the standard error rests on few
independent replicates (``SCRAMBLES - 1`` for randomised quasi-Monte Carlo): with 31 degrees
of freedom the normal would understate a 1e-4 tail about threefold.

Holm (1979), "A simple sequentially rejective multiple test procedure", Scand. J.
Statistics 6(2), 65-70: sort the m p-values, ``p_adj(i) = max_{j<=i} min(1, (m-j+1) p(j))``;
a check fails when ``p_adj < alpha``. The family-wise false-alarm rate of the run is then at
most ``alpha`` whatever the dependence between checks. A path-by-path identity that breaks
is a failure outright (p = 0): no amount of noise excuses it.

Detectable bias. Beside each check stands the smallest true bias ``b`` (statistic's mean
minus target) that the run detects with probability ``POWER`` (90%):

    b = a + (q_{1-alpha/(2m)} + q_{POWER}) se    two-sided (``==``),
    b = a + (q_{1-alpha/m} + q_{POWER}) se       one-sided (``>=``, ``<=``; a violation of size b),

``q`` the quantiles of ``F``. Derivation: the check rejects when ``|d| - a > q se``; with
``d ~ N(b, se^2)`` and ``b > a`` that happens with probability at least
``Phi((b - a)/se - q)`` (the far tail only adds), which equals ``POWER`` at the ``b`` above.
The level ``alpha/m`` is Bonferroni's, the strictest Holm applies (to the smallest
p-value), so the power is at least 90% for a single biased check among correct ones. The
relative figure divides by ``|reference|`` (none for a target of 0). Cohen (1988),
*Statistical Power Analysis for the Behavioral Sciences*, 2nd ed., chapter 2, for the
normal approximation to the power of a z-test; with Student's t the same formula with t
quantiles approximates the non-central t power (common practice).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any, Sequence

from scipy.stats import norm
from scipy.stats import t as student_t

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
    dof: float | None = None  # degrees of freedom of the standard error (None: large sample)
    scale: float | None = None  # |reference|, or the largest weighted leg price for a target of 0
    precision: float | None = None  # the detectable bias asked for by --precision, in price units
    precision_status: str = ""  # "reached", "budget", "allowance", "identity broken" (precision runs)
    controls: tuple[str, ...] = ()  # control variates used

    def to_dict(self) -> dict:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        d["legs"] = list(self.legs)
        d["controls"] = list(self.controls)
        for k, v in d.items():
            if isinstance(v, float) and not math.isfinite(v):
                d[k] = None if math.isnan(v) else (1e308 if v > 0 else -1e308)
        return d


class _T:
    """Student's t with ``dof`` degrees of freedom, unfrozen (freezing costs milliseconds)."""

    def __init__(self, dof: float) -> None:
        self.dof = dof

    def sf(self, x: float) -> float:
        return float(student_t.sf(x, self.dof))

    def cdf(self, x: float) -> float:
        return float(student_t.cdf(x, self.dof))

    def isf(self, q: float) -> float:
        return float(student_t.isf(q, self.dof))


def _dist(dof: float | None) -> Any:
    if dof is None or not math.isfinite(dof) or dof > 1e7:
        return norm
    if dof < 1:
        raise ValueError(f"dof={dof!r} must be >= 1 (or None/inf for a large-sample standard error)")
    return _T(dof)


def p_value(diff: float, se: float, sense: str, allowance: float = 0.0, dof: float | None = None) -> float:
    """p-value of the difference ``diff`` (statistic minus target) under ``sense``.

    ``allowance`` widens the null hypothesis by a declared bias; ``dof`` are the degrees of
    freedom of ``se`` (Student's t; ``None`` or ``inf``: the normal).
    """
    if sense not in ("==", ">=", "<="):
        raise ValueError(f"sense={sense!r} must be '==', '>=' or '<='")
    if not math.isfinite(diff):
        return 0.0
    tiny = 1e-12 * (1.0 + abs(diff))
    if sense == "==":
        excess = max(abs(diff) - allowance, 0.0)
        if se <= 0.0:
            return 1.0 if excess <= tiny else 0.0
        return float(min(1.0, 2.0 * _dist(dof).sf(excess / se)))
    if sense == ">=":
        shifted = diff + allowance
        if se <= 0.0:
            return 1.0 if shifted >= -tiny else 0.0
        return float(_dist(dof).cdf(shifted / se))
    shifted = diff - allowance
    if se <= 0.0:
        return 1.0 if shifted <= tiny else 0.0
    return float(_dist(dof).sf(shifted / se))


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


def detectable_bias(
    se: float,
    sense: str,
    alpha: float,
    m: int,
    power: float = POWER,
    *,
    allowance: float = 0.0,
    dof: float | None = None,
) -> float:
    """Smallest true bias detected with probability ``power`` at the strictest Holm level.

    ``allowance + (q_{1 - alpha/(k m)} + q_{power}) * se`` with ``k = 2`` for a two-sided
    check and ``k = 1`` otherwise, ``q`` normal quantiles (Student's t with ``dof``
    degrees of freedom when given); see the module docstring for the derivation.
    """
    m = max(int(m), 1)
    level = alpha / m / (2.0 if sense == "==" else 1.0)
    dist = _dist(dof)
    return float(allowance + (dist.isf(level) + dist.isf(1.0 - power)) * se)


def finalise(outcomes: Sequence[Outcome], alpha: float) -> list[Outcome]:
    """Apply Holm over every check that produced a p-value; set verdicts and bias bounds."""
    tested = [i for i, o in enumerate(outcomes) if o.verdict != "error" and o.p_value is not None]
    adjusted = holm([outcomes[i].p_value for i in tested])  # type: ignore[misc]
    m = len(tested)
    out = list(outcomes)
    for i, padj in zip(tested, adjusted):
        o = out[i]
        se = o.stderr or 0.0
        bias = detectable_bias(se, o.sense, alpha, m, allowance=o.allowance, dof=o.dof)
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
