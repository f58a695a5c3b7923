"""Run checks: price their legs on common paths, verify path rules, decide.

The suite is the only place where checks meet the engine. Each check draws from its own
streams (keyed by product and case name), so a failing check reproduces on its own with
the same seed, whatever else was run with it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field
from typing import Callable, Sequence

import numpy as np

from .engine import DEFAULT_REGRESSION_PATHS, Joint, case_key, coerce_seed, evaluate
from .errors import LimitcaseError
from .reduce import Check
from .verdict import Outcome, finalise, p_value

__all__ = ["RunResult", "run_check", "run_checks", "DEFAULT_PATHS", "DEFAULT_SEED", "DEFAULT_ALPHA"]

DEFAULT_PATHS = 100_000
DEFAULT_SEED = 20261201
DEFAULT_ALPHA = 0.01


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
        counts = {"pass": 0, "fail": 0, "error": 0}
        for o in self.outcomes:
            counts[o.verdict] = counts.get(o.verdict, 0) + 1
        counts["total"] = len(self.outcomes)
        return counts

    @property
    def ok(self) -> bool:
        return all(o.verdict == "pass" for o in self.outcomes)


def run_check(
    check: Check,
    *,
    paths: int,
    seed: int,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
    on_batch: Callable[[int], None] | None = None,
) -> Outcome:
    """Price one check and return its outcome before the run-wide correction."""
    base = dict(product=check.product, case=check.case, kind=check.kind, paths=paths, seed=seed, note=check.note)
    if check.error is not None:
        return Outcome(verdict="error", message=check.error, **base)
    assert check.model is not None
    try:
        joint = evaluate(
            check.legs,
            check.model,
            paths=paths,
            seed=seed,
            key=case_key(check.product, check.case),
            rules=check.rules,
            regression_paths=regression_paths,
            on_batch=on_batch,
        )
    except LimitcaseError as exc:
        return Outcome(verdict="error", message=str(exc), legs=tuple(p.label() for p in check.legs), **base)
    return decide(check, joint, seed)


def decide(check: Check, joint: Joint, seed: int) -> Outcome:
    """The outcome of a priced check: path rules first, then the statistical test."""
    est = joint.estimate(check.weights)
    diff = est.value - check.target
    pathwise_ok: bool | None = None
    messages = []
    if check.rules:
        pathwise_ok = all(r.violations == 0 for r in joint.rules)
        for r in joint.rules:
            if r.violations:
                messages.append(
                    f"path-by-path identity broken on {r.violations} of {joint.paths} paths "
                    f"(worst residual {r.worst:.6g} at path {r.worst_path})"
                )
    p = 0.0 if pathwise_ok is False else p_value(diff, est.stderr, check.sense, check.allowance)
    z = diff / est.stderr if est.stderr > 0 else (0.0 if diff == 0 else math.copysign(math.inf, diff))
    if check.allowance:
        messages.append(f"allowance {check.allowance:.4g}: {check.allowance_reason}")
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
        allowance=check.allowance,
        allowance_reason=check.allowance_reason,
        sense=check.sense,
        message="; ".join(messages),
        paths=joint.paths,
        seed=seed,
        method=joint.method,
        target_source=check.target_source,
        note=check.note,
        legs=tuple(p_.label() for p_ in check.legs),
        pathwise_ok=pathwise_ok,
    )


def run_checks(
    checks: Sequence[Check],
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
    progress: Callable[[int, int], None] | None = None,
) -> RunResult:
    """Run every check and apply Holm's correction over the run at level ``alpha``.

    ``progress(done, total)`` is called after each check.
    """
    coerce_seed(seed)  # validates
    outcomes = []
    for i, check in enumerate(checks):
        outcomes.append(run_check(check, paths=paths, seed=seed, regression_paths=regression_paths))
        if progress is not None:
            progress(i + 1, len(checks))
    return RunResult(finalise(outcomes, alpha), paths=paths, seed=seed, alpha=alpha)
