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
from dataclasses import dataclass, field, replace
from typing import Any, Sequence

import numpy as np

from scipy.stats import norm
from scipy.stats import t as student_t

from .encoding import jsonable
from .checks import Check
from .estimates import Joint
from .settings import CLT_MIN_PAYING, REFERENCE_ACCURACY

__all__ = ["Outcome", "RunResult", "decide", "skip_outcome", "check_scale", "FLOAT_FLOOR", "p_value", "holm",
           "detectable_bias", "finalise", "POWER", "normal_approximation", "reference_accuracy"]

POWER = 0.9


@dataclass(frozen=True)
class Outcome:
    """The result of one check, before and after the run-wide correction."""

    product: str
    case: str
    kind: str
    verdict: str  # "pass", "fail", "error", "skip" (no reference under the model: not tested)
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
    model_audit: str | None = None  # verdict of the run's martingale audit of the check's model
    reference_accuracy: float = 0.0  # the reference's own absolute accuracy, added to the allowance
    point: str = ""  # an interior-point check: the parameters drawn ("strike=103.7, ...")

    def to_dict(self) -> dict:
        d = {k: getattr(self, k) for k in self.__dataclass_fields__}
        d["legs"] = list(self.legs)
        d["controls"] = list(self.controls)
        return jsonable(d)


@dataclass
class RunResult:
    """Every outcome of a run and the settings that produced them."""

    outcomes: list[Outcome]
    paths: int
    seed: int
    alpha: float
    extra: dict = field(default_factory=dict)

    @property
    def summary(self) -> dict:
        counts = {"pass": 0, "fail": 0, "error": 0, "skip": 0}
        for o in self.outcomes:
            counts[o.verdict] = counts.get(o.verdict, 0) + 1
        counts["total"] = len(self.outcomes)
        return counts

    @property
    def ok(self) -> bool:
        """Every outcome passed or was skipped (a skip is reported, never a failure)."""
        return all(o.verdict in ("pass", "skip") for o in self.outcomes)


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
    """Apply Holm over every check that produced a p-value; set verdicts and bias bounds.
    Errors and skips are outside the family: neither was tested."""
    tested = [i for i, o in enumerate(outcomes) if o.verdict not in ("error", "skip") and o.p_value is not None]
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


# ----------------------------------------------------------------------------------------
# decisions


FLOAT_FLOOR = 1e-10
"""Standard errors below ``FLOAT_FLOOR`` times the check's price level are raised to it
(zero included: a check with no sampling noise, a sure amount or an identity that holds on
every path, is still compared through the last digits of block sums).
(A control equal to the statistic on every path is no longer applied to it, see
:data:`limitcase.estimates.TAUTOLOGY_R2`; the floor remains for sure amounts and identities.)
No estimate is taken to be more precise than one part in 1e10 of the prices it compares."""


def skip_outcome(check: Check, seed: int | None) -> Outcome:
    """The outcome of a check whose target does not exist under its model: ``skip``, with
    the reason. Not priced, not tested, outside Holm's family."""
    return Outcome(product=check.product, case=check.case, kind=check.kind, verdict="skip",
                   message=check.skip or "", seed=seed, note=check.note, sense=check.sense,
                   target_source=check.target_source, legs=tuple(p.label() for p in check.legs))


def decide(check: Check, joint: Joint, seed: int) -> Outcome:
    """The outcome of a priced check: path rules first, then the statistical test."""
    est = joint.estimate(check.weights)
    diff = est.value - check.target
    messages = list(joint.notes)
    for label, r2 in joint.dropped_controls(check.weights):
        messages.append(
            f"control '{label}' not applied: the statistic is an exact linear function of it on the pilot "
            f"paths (1 - R^2 = {max(1.0 - r2, 0.0):.1g}, below {1.0 - joint.control_max_r2:.0e}), so it would "
            "return the control's assumed price unchecked"
        )
    scale = check_scale(check, joint)
    level = _rounding_scale(check, joint)
    if level and est.stderr < FLOAT_FLOOR * level:
        est = type(est)(est.value, FLOAT_FLOOR * level, est.paths, est.dof)
        messages.append(f"standard error raised to the floating-point floor {FLOAT_FLOOR:g} x {level:.6g}")
    pathwise_ok: bool | None = None
    if check.rules:
        pathwise_ok = all(r.violations == 0 for r in joint.rules)
        for r in joint.rules:
            if r.violations:
                messages.append(
                    f"path-by-path identity broken on {r.violations} of {joint.paths} paths "
                    f"(worst residual {r.worst:.6g} at path {r.worst_path})"
                )
    dof = est.dof if math.isfinite(est.dof) else None
    accuracy = reference_accuracy(check)
    exact_identity = bool(check.rules) and pathwise_ok is True and check.target == 0.0  # proved path by path
    if check.origin is not None and pathwise_ok is not False and not exact_identity:
        why = normal_approximation(joint.paying, joint.paths, check.weights)
        if why is not None:
            return replace(skip_outcome(check, seed), paths=joint.paths, method=joint.method_for(check.weights),
                           value=est.value, stderr=est.stderr, reference=check.target, pathwise_ok=pathwise_ok,
                           message=("path-by-path identity holds on every path; " if pathwise_ok else "")
                           + f"statistical comparison skipped at this interior point: {why}")
    allowance = check.allowance
    if check.allowance_weights:  # an error bound estimated on the same paths (limitcase.ends)
        allowance += abs(float(joint.estimate(check.allowance_weights).value))
    p = 0.0 if pathwise_ok is False else p_value(diff, est.stderr, check.sense, allowance + accuracy, dof)
    z = diff / est.stderr if est.stderr > 0 else (0.0 if diff == 0 else math.copysign(math.inf, diff))
    if allowance:
        messages.append(f"allowance {allowance:.4g}: {check.allowance_reason}")
    return Outcome(
        product=check.product,
        case=check.case,
        kind=check.kind,
        verdict="pass",
        value=est.value,
        stderr=est.stderr,
        reference=check.target,
        difference=diff,
        z=z,
        p_value=p,
        allowance=allowance,
        allowance_reason=check.allowance_reason,
        sense=check.sense,
        message="; ".join(messages),
        paths=joint.paths,
        seed=seed,
        method=joint.method_for(check.weights),
        target_source=check.target_source,
        note=check.note,
        legs=tuple(p_.label() for p_ in check.legs),
        pathwise_ok=pathwise_ok,
        dof=dof,
        scale=scale,
        controls=joint.used_controls(check.weights),
        reference_accuracy=accuracy,
        point=point_text(check),
    )


def point_text(check: Check) -> str:
    """The drawn parameters of an interior-point check, ``name=value, ...`` ("" otherwise)."""
    if check.origin is None:
        return ""
    return ", ".join(f"{k}={v:.6g}" if isinstance(v, float) else f"{k}={v}" for k, v in check.origin.drawn)


def normal_approximation(paying: Sequence[int], paths: int, weights: Sequence[float]) -> str | None:
    """Why the normal approximation of the statistic's mean cannot be trusted (None when it can).

    A leg that pays on a share ``q`` of ``n`` paths is, path by path, a mixture of a point mass
    at 0 and the amounts paid. The indicator alone has skewness ``(1 - 2q) / sqrt(q (1 - q))``;
    the skewness of a mean of ``n`` paths is that over ``sqrt(n)``, and the first correction of
    the Edgeworth expansion to the normal distribution of the mean is proportional to it
    (Hall 1992, *The Bootstrap and Edgeworth Expansion*, section 2.2; the Berry-Esseen bound
    scales the same way). A z-test far in the tail (Holm's levels are about 1e-5 for the
    catalogue) needs that correction small: the rule asks
    ``n q (1 - q) / (1 - 2q)^2 >= CLT_MIN_PAYING`` (1000), i.e. a skewness of the mean
    below about 0.03, for every leg the statistic weighs. With ``n = 50,000`` it lets
    through a leg paying on 2% of the paths and stops one paying on 40 paths. The rule is about
    too few paying paths, so it applies where paying is the rarer side (``q < 1/2``): a leg that
    pays on most paths has its point mass at 0 on the side where, for the catalogue's payoffs
    (a deep put, a call), the amounts paid shrink continuously to 0. A leg that pays on no path
    at all is the extreme case: its mean is 0 with a standard error of 0, which says nothing
    about a payment rarer than one in ``n`` (by the rule of three its probability may still be
    up to ``3/n``; measured: an up-and-in put far out of reach, worth 4.4e-5, paid on none of
    25,000 paths and was compared as 0 against its closed form). Interior points are drawn
    where a product may be nearly worthless (a barrier near the spot, a far strike); there the
    comparison is skipped, never failed, and the checks that need no normal approximation
    (path by path) still run.
    """
    if not paying:
        return None
    for i, (w, k) in enumerate(zip(weights, paying)):
        if not w or 2 * k >= paths:
            continue
        if k <= 0:
            return (f"leg {i + 1} pays on none of {paths} paths: a mean of 0 with no estimate of its variance, "
                    "too few paying paths for the normal approximation of the mean")
        q = k / paths
        ratio = paths * q * (1.0 - q) / max((1.0 - 2.0 * q) ** 2, 1e-300)
        if ratio < CLT_MIN_PAYING:
            return (f"leg {i + 1} pays on {k} of {paths} paths (q = {q:.3g}): n q (1 - q) / (1 - 2q)^2 = "
                    f"{ratio:.3g} < {CLT_MIN_PAYING:g}, too few paying paths for the normal approximation "
                    "of the mean")
    return None


def reference_accuracy(check: Check) -> float:
    """The absolute accuracy of a check's reference price, added to its allowance.

    A reference is a number computed in double precision: closed forms lose a few digits to
    cancellation, quadrature and series stop at a tolerance (the shipped ones ask
    ``epsrel`` of 1e-12 of the integrand's scale, and sum the barrier and Poisson series to
    about 1e-12). Their error is absolute, on the contract's scale, not relative to the
    price: where a product is nearly worthless (a knock-out far beyond the spot), a
    quadrature may return 1e-14 when the price is 3e-17, and Monte Carlo, whose standard
    error shrinks with the price, would call that difference many standard errors. The rule:
    a reference is accurate to ``REFERENCE_ACCURACY`` (1e-9) times the contract's scale,
    the larger of ``|reference|`` and the model's initial spot (the largest asset's), a
    thousand times the shipped references' tolerance and far below any price difference a
    check can see (a standard error of 1e-9 of the spot would need about 1e16 paths). A
    target of exactly 0 (an identity, a parity, a bound at 0) is exact and gets nothing.
    """
    if not check.target or check.model is None:
        return 0.0
    scale = abs(float(check.target))
    try:
        spot = float(np.max(np.abs(np.asarray(check.model.initial(), dtype=float))))
    except Exception:  # a model without a spot: the reference's own size is the scale
        spot = 0.0
    if math.isfinite(spot):
        scale = max(scale, spot)
    return REFERENCE_ACCURACY * scale


def check_scale(check: Check, joint: Joint) -> float | None:
    """The price scale of a check, for relative precision and detectable bias: ``|target|``,
    or for a target of 0 the largest price among the legs it weighs (never the difference)."""
    if check.target:
        return abs(check.target)
    prices = [abs(float(m)) for w, m in zip(check.weights, joint.mean) if w]
    top = max(prices, default=0.0)
    return top if top > 0 else None


def _rounding_scale(check: Check, joint: Joint) -> float | None:
    """The price level whose last digits rounding can move: the target, or the sum of the
    weighted legs' prices when that is larger (an identity of large legs that cancel)."""
    legs = sum(abs(w) * abs(float(m)) for w, m in zip(check.weights, joint.mean))
    top = max(abs(check.target), legs)
    return top if top > 0 else None
