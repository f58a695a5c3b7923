"""Run checks: price their legs on common paths, verify path rules, decide.

The suite is the only place where checks meet the engine. Each check draws from its own
streams (keyed by product and case name), so a failing check reproduces on its own with
the same seed, whatever else was run with it.

Parallel runs. A run is cut into tasks: the set-up of each check (Longstaff-Schwartz
policy, control-variate pilot) and ranges of its blocks. Tasks go to the shared pool of forked
worker processes (:mod:`limitcase.workers`, ``workers > 1``), which inherit the loaded
products, so products defined in the user's own files work there as they do here; Ctrl-C
stops the workers and ends the run at once. Every block is summarised by whichever
process computes it and the summaries are combined in block order in this process: the
numbers are the same for any number of workers. Where ``fork`` is not available the run
falls back to one process, with a :class:`RuntimeWarning`.

Precision runs. With ``precision`` set, paths are added in rounds until every check's
detectable bias (:func:`limitcase.verdict.detectable_bias` at the run's alpha and number of
checks) is at most the target, or the check's ``max_paths`` budget is spent. Blocks are
added in order, so the result is the result of a fixed run with the final path count; the
next round's size depends only on the standard errors so far, never on the differences.
(A relative target on a relation whose target is 0 is taken relative to the largest price
among the legs it weighs: a leg's mean, not the difference under test.)

Sequential-testing caveat. Choosing the sample size from the data and then testing as if it
had been fixed is exact when the stopping rule is independent of the sample mean. The
standard error of normal data is independent of its mean (Cochran's theorem); for skewed
cash flows (calls, barriers) a large mean and a large sample variance go together, so
checks that happened to draw a high mean stop a little later. The effect on the test is of
second order (the stopping rule moves the sample size, not the statistic) and is measured in
``tests/engine``: the false-alarm rate of precision runs over many seeds stays within the
binomial interval of the nominal rate. A stopping rule reading the difference itself
("stop when the check is clearly passing") would break the test, and is not offered.
"""

from __future__ import annotations

import math
import warnings
from dataclasses import dataclass, replace
from typing import Any, Callable, Sequence

from .case import BlockResult, Case, Setup
from .checks import Check
from .controls import gather_controls
from .errors import LimitcaseError, NegativeAmount, ParamError
from .modelaudit import mark_checks, plan_model_audits, run_model_audits
from .sampling import parse_method
from .settings import (
    DEFAULT_ALPHA,
    DEFAULT_MAX_PATHS,
    DEFAULT_METHOD,
    DEFAULT_PATHS,
    DEFAULT_REGRESSION_PATHS,
    DEFAULT_SEED,
    MODEL_AUDIT,
    default_workers,
    validate_run,
)
from .streams import BLOCK, case_key
from .verdict import Outcome, RunResult, check_scale, decide, detectable_bias, finalise, skip_outcome
from .workers import ForkedPool, InlinePool, open_pool

__all__ = [
    "RunResult",
    "run_check",
    "run_checks",
    "Precision",
    "parse_precision",
    "default_workers",
    "DEFAULT_PATHS",
    "DEFAULT_SEED",
    "DEFAULT_ALPHA",
    "DEFAULT_MAX_PATHS",
    "DEFAULT_METHOD",
    "decide",
]

MAX_GROWTH = 8.0
"""A precision round multiplies a check's paths by at most this factor."""
SAFETY = 1.05
"""A precision round aims 5% beyond the paths the standard error projects, so one round
usually suffices."""


@dataclass(frozen=True)
class Precision:
    """A target for the detectable bias: ``value`` in price units, or, when ``relative``,
    as a fraction of each check's price scale (``|reference|``, or for a target of 0 the
    largest price among the legs it weighs)."""

    value: float
    relative: bool = False

    def target(self, scale: float | None) -> float:
        if not self.relative:
            return self.value
        return self.value * (scale or 0.0)

    def __str__(self) -> str:
        return f"{100 * self.value:g}%" if self.relative else f"{self.value:g}"


def parse_precision(value: "str | float | Precision") -> Precision:
    """``0.01`` (price units) or ``"0.5%"`` (relative) as a :class:`Precision`.

    Raises :class:`ParamError` for anything that is not a positive number, naming the value.
    """
    if isinstance(value, Precision):
        return value
    text = str(value).strip()
    relative = text.endswith("%")
    try:
        number = float(text[:-1] if relative else text)
    except ValueError:
        number = math.nan
    if not math.isfinite(number) or number <= 0:
        raise ParamError(
            f"precision={value!r} is not a positive number; give a bias in price units "
            "(e.g. 0.01) or relative to the reference with a trailing % (e.g. 0.5%)"
        )
    return Precision(number / 100.0 if relative else number, relative)


# ----------------------------------------------------------------------------------------
# the run: tasks, executors, rounds

_RUN: dict[int, "_Run"] = {}  # runs by id, inherited by forked workers


@dataclass
class _Item:
    index: int
    check: Check
    case: Case | None = None
    setup: Setup | None = None
    acc: Any = None
    paths: int = 0  # rounded paths asked for so far
    error: str | None = None
    status: str = ""
    done: bool = False
    direct: Outcome | None = None


class _Run:
    def __init__(self, checks: Sequence[Check], seed: int, regression_paths: int, method: str) -> None:
        self.items = [_Item(i, c) for i, c in enumerate(checks)]
        self.seed = seed
        self.regression_paths = regression_paths
        self.method = method


def _case_for(check: Check, seed: int, method: str, regression_paths: int) -> Case:
    assert check.model is not None
    spec = parse_method(method)
    controls = None
    if spec is None or spec.control:
        legs = [leg for w, leg in zip(check.weights, check.legs) if w]
        controls, notes = gather_controls(legs, check.model)
    else:
        notes = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # substitutions are recorded as notes on the check
        case = Case(check.legs, check.model, seed=seed, key=case_key(check.product, check.case),
                    rules=check.rules, method=method, controls=controls, regression_paths=regression_paths,
                    warn=False)
    if notes:
        case.notes = tuple(notes) + case.notes
    return case


def _task_setup(args: tuple[int, int]) -> tuple[int, Setup | None, str | None]:
    run_id, i = args
    item = _RUN[run_id].items[i]
    assert item.case is not None
    try:
        return i, item.case.setup(), None
    except Exception as exc:  # the product's own code too: an error for this check only
        return i, None, _error_text(exc)


def _task_blocks(args: tuple[int, int, Setup, int, int, int]) -> tuple[int, list[BlockResult] | None, str | None]:
    run_id, i, setup, first, last, paths = args
    item = _RUN[run_id].items[i]
    assert item.case is not None
    try:
        return i, item.case.blocks(setup, first, last, paths), None
    except Exception as exc:  # the product's own code too: an error for this check only
        return i, None, _error_text(exc)


FAILED = "failed: "
"""Prefix of a check's error text that is a failure, not an error: a product declared
non-negative that pays a negative amount (:class:`~limitcase.errors.NegativeAmount`)."""


def _error_text(exc: BaseException) -> str:
    """The message of a check's error: ours as they are; anything else (raised by the product's
    own code where no boundary wrapped it) with its type and the line it came from. A negative
    amount of a non-negative product is a failure: its text starts with :data:`FAILED`."""
    if isinstance(exc, NegativeAmount):
        return FAILED + str(exc)
    if isinstance(exc, LimitcaseError):
        return str(exc)
    import traceback

    frames = traceback.extract_tb(exc.__traceback__)
    where = f" ({frames[-1].filename}:{frames[-1].lineno})" if frames else ""
    return f"{type(exc).__name__}: {exc}{where}"


def _executor(workers: int, tasks_hint: int) -> InlinePool | ForkedPool:
    """The shared pool (:mod:`limitcase.workers`): forked workers inherit ``_RUN`` (the
    checks, their products and cases), a Dask cluster is sent it; one process where
    forking is not possible."""
    return open_pool(workers, tasks_hint, stacklevel=4, inherit=((__name__, "_RUN"),))


def _share(paths: int, check: Check) -> int:
    """The paths a check is priced with: its share of the run's (an interior point's is
    smaller, :data:`limitcase.settings.INNER_PATH_SHARE`), at least two."""
    return max(2, int(round(int(paths) * float(check.path_share))))


def _split(first: int, last: int, per_task: int) -> list[tuple[int, int]]:
    return [(b, min(last, b + per_task)) for b in range(first, last, per_task)]


def _execute(
    checks: Sequence[Check],
    *,
    paths: int,
    seed: int,
    alpha: float,
    regression_paths: int,
    method: str,
    precision: Precision | None,
    max_paths: int,
    workers: int,
    progress: Callable[[int, int], None] | None,
    family: int | None = None,
    info: dict | None = None,
) -> list[Outcome]:
    """Outcomes (before Holm) of ``checks``, computed in rounds on an executor.

    ``family``: the number of checks Holm will correct over (default: those that run)."""
    run = _Run(checks, seed, regression_paths, method)
    total = len(run.items)
    finished = 0

    def finish(item: _Item) -> None:
        nonlocal finished
        item.done = True
        finished += 1
        if progress is not None:
            progress(finished, total)

    for item in run.items:
        if item.check.error is not None or item.check.skip is not None:
            item.error = item.check.error
            finish(item)
            continue
        if item.check.direct is not None:
            item.direct = direct_outcome(item.check, seed)
            finish(item)
            continue
        try:
            item.case = _case_for(item.check, seed, method, regression_paths)
        except Exception as exc:  # the product's own code too: an error for this check only
            item.error = _error_text(exc)
            finish(item)
            continue
        first = _share(paths, item.check)
        if precision is not None:
            first = max(first, 2)
            first = -(-first // BLOCK) * BLOCK  # whole blocks, so later rounds extend them
        item.paths = item.case.round_paths(min(first, max(max_paths, 2)) if precision is not None else first)
        item.acc = item.case.accumulator()

    live = [it for it in run.items if not it.done]
    run_id = id(run)
    _RUN[run_id] = run
    ex = _executor(workers, len(live))
    if info is not None:
        info["processes"] = ex.workers
    try:
        for i, setup, err in ex.map(_task_setup, [(run_id, it.index) for it in live]):
            item = run.items[i]
            if err is not None:
                item.error = err
                finish(item)
            else:
                item.setup = setup
        while True:
            active = [it for it in run.items if not it.done]
            if not active:
                break
            todo = [(it, it.acc.next_block, Case.blocks_for(it.paths)) for it in active]
            for it, a, b in todo:
                if a >= b:  # nothing left to add (cannot happen with whole-block rounds; never loop on it)
                    it.status = it.status or "budget"
                    finish(it)
            todo = [(it, a, b) for it, a, b in todo if a < b]
            if not todo:
                continue
            blocks = sum(b - a for _, a, b in todo)
            per_task = max(1, min(64, -(-blocks // (4 * ex.workers)))) if ex.workers > 1 else 1 << 30
            tasks = []
            for it, a, b in todo:
                for lo, hi in _split(a, b, per_task):
                    tasks.append((run_id, it.index, it.setup, lo, hi, it.paths))
            tasks.sort(key=lambda t: -(t[4] - t[3]) * len(run.items[t[1]].case.grid))  # longest first
            results: dict[int, list[BlockResult]] = {}
            pending: dict[int, int] = {}
            for t in tasks:
                pending[t[1]] = pending.get(t[1], 0) + 1
            for i, res, err in ex.map(_task_blocks, tasks):
                item = run.items[i]
                if err is not None:
                    item.error = item.error or err
                elif item.error is None:
                    results.setdefault(i, []).extend(res or [])
                pending[i] -= 1
                if pending[i] == 0:  # all of this check's blocks are in: combine them, in order
                    if item.error is None:
                        for r in sorted(results.pop(i, []), key=lambda r: r.block):
                            item.acc.add(r)
                    if item.error is not None or precision is None:
                        finish(item)
            if precision is None:
                continue
            active = [it for it in active if not it.done]
            m = family or sum(1 for it in run.items if it.error is None)
            for it in active:
                _next_round(it, precision, alpha, m, max_paths)
                if it.done:
                    it.done = False
                    finish(it)
    finally:
        ex.close()
        _RUN.pop(run_id, None)

    outcomes = []
    for it in run.items:
        outcomes.append(_outcome(it, seed, precision, alpha))
    return outcomes


def _next_round(it: _Item, precision: Precision, alpha: float, m: int, max_paths: int) -> None:
    """Decide from the standard error alone whether ``it`` needs more paths, and how many."""
    assert it.case is not None and it.setup is not None
    joint = it.acc.joint(it.setup)
    check = it.check
    if check.rules and any(r.violations for r in joint.rules):
        it.status, it.done = "identity broken", True
        return
    est = joint.estimate(check.weights)
    dof = est.dof if math.isfinite(est.dof) else None
    target = precision.target(check_scale(check, joint))
    bias = detectable_bias(est.stderr, check.sense, alpha, m, allowance=check.allowance, dof=dof)
    if bias <= target:
        it.status, it.done = "reached", True
        return
    if check.allowance >= target:
        it.status, it.done = "allowance", True
        return
    have = it.acc.paths
    if have >= max_paths:
        it.status, it.done = "budget", True
        return
    stat = bias - check.allowance
    want = have * ((stat / (target - check.allowance)) ** 2) * SAFETY
    want = min(want, have * MAX_GROWTH, max_paths)
    n = int(-(-math.ceil(want) // BLOCK) * BLOCK)
    n = max(n, have + BLOCK)
    n = min(n, max(max_paths, have))
    n = it.case.round_paths(n)
    if n <= have:
        it.status, it.done = "budget", True
        return
    it.paths = n


def negative_outcome(check: Check, message: str, seed: int, paths: int = 0) -> Outcome:
    """A product declared non-negative paid a negative amount: the check fails outright
    (p = 0, like a broken path-by-path identity), with the message naming the product."""
    return Outcome(product=check.product, case=check.case, kind=check.kind, verdict="pass", p_value=0.0,
                   pathwise_ok=False, message=message, paths=paths, seed=seed, note=check.note,
                   target_source=check.target_source, legs=tuple(p.label() for p in check.legs))


def direct_outcome(check: Check, seed: int) -> Outcome:
    """The outcome of a check decided without Monte Carlo (``check.direct``): a pass or an
    outright failure (p = 0, like a broken path-by-path identity), or a skip when nothing
    decides; an exception of the product's code is an error for this check only."""
    assert check.direct is not None
    base = dict(product=check.product, case=check.case, kind=check.kind, seed=seed, note=check.note,
                target_source=check.target_source, legs=tuple(p.label() for p in check.legs))
    try:
        ok, message, n = check.direct(check.legs)
    except Exception as exc:  # the product's own code on the given paths
        return Outcome(verdict="error", message=_error_text(exc), **base)
    if ok is None:
        return Outcome(verdict="skip", message=message, paths=n, **base)
    return Outcome(verdict="pass", message=message, paths=n, p_value=1.0 if ok else 0.0, pathwise_ok=bool(ok),
                   difference=0.0 if ok else None, **base)


def _outcome(it: _Item, seed: int, precision: Precision | None, alpha: float) -> Outcome:
    check = it.check
    if it.direct is not None:
        return it.direct
    base = dict(product=check.product, case=check.case, kind=check.kind, paths=it.acc.paths if it.acc else 0,
                seed=seed, note=check.note)
    if check.error is None and check.skip is not None:
        return skip_outcome(check, seed)
    if it.error is not None and it.error.startswith(FAILED):
        return negative_outcome(check, it.error[len(FAILED):], seed, base["paths"])
    if it.error is not None:
        legs = tuple(p.label() for p in check.legs) if it.case is not None else ()
        method = it.case.method if it.case is not None else "plain"
        return Outcome(verdict="error", message=it.error, legs=legs, method=method, **base)
    assert it.setup is not None
    joint = it.acc.joint(it.setup)
    out = decide(check, joint, seed)
    if precision is not None:
        target = precision.target(out.scale)
        status = it.status or "reached"
        message = out.message
        if status == "budget":
            message = (message + "; " if message else "") + (
                f"precision {precision} not reached within the budget of {joint.paths} paths"
            )
        elif status == "allowance":
            message = (message + "; " if message else "") + (
                f"precision {precision} cannot be reached: the declared allowance {check.allowance:.4g} "
                "alone is larger"
            )
        out = replace(out, precision=target, precision_status=status, message=message)
    return out


# ----------------------------------------------------------------------------------------
# public entry points


def run_check(
    check: Check,
    *,
    paths: int,
    seed: int,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
    on_batch: Callable[[int], None] | None = None,
    method: str = DEFAULT_METHOD,
    precision: "str | float | Precision | None" = None,
    max_paths: int = DEFAULT_MAX_PATHS,
    alpha: float = DEFAULT_ALPHA,
    family: int = 1,
    stop_at_broken_identity: bool = False,
) -> Outcome:
    """Price one check in this process and return its outcome before the run-wide correction.

    With ``precision``, the detectable bias is computed at ``alpha`` over a run of
    ``family`` checks (the Holm family the check will be part of). With
    ``stop_at_broken_identity``, pricing stops after the first block on which a path-by-path
    identity breaks: the check fails whatever the other blocks give (the mutation run's
    first pass; the outcome's counts are then those of the blocks priced).
    """
    validate_run(paths=paths, seed=seed, alpha=alpha, method=method, max_paths=max_paths, workers=1,
                 regression_paths=regression_paths)
    prec = parse_precision(precision) if precision is not None else None
    if check.error is None and check.skip is not None:
        return skip_outcome(check, seed)
    if check.error is None and check.direct is not None:
        return direct_outcome(check, seed)
    if prec is None and check.error is None:
        base = dict(product=check.product, case=check.case, kind=check.kind, paths=paths, seed=seed,
                    note=check.note)
        try:
            case = _case_for(check, seed, method, regression_paths)
            setup = case.setup()
            n = case.round_paths(_share(paths, check))
            acc = case.accumulator()
            buf = case.buffer(min(BLOCK, n))
            for b in range(Case.blocks_for(n)):
                broken = False
                for r in case.blocks(setup, b, b + 1, n, buf):
                    acc.add(r)
                    broken = broken or any(v > 0 for v, _, _ in r.rules)
                if on_batch is not None:
                    on_batch(acc.paths)
                if broken and stop_at_broken_identity:
                    break
            joint = acc.joint(setup)
        except NegativeAmount as exc:  # a failure of the check, not an error
            return negative_outcome(check, str(exc), seed, paths)
        except Exception as exc:  # the product's own code too: an error for this check only
            return Outcome(verdict="error", message=_error_text(exc), legs=tuple(p.label() for p in check.legs),
                           **base)
        return decide(check, joint, seed)
    out = _execute([check], paths=paths, seed=seed, alpha=alpha, regression_paths=regression_paths,
                   method=method, precision=prec, max_paths=max_paths, workers=1, progress=None,
                   family=max(1, int(family)))
    return out[0]


def run_checks(
    checks: Sequence[Check],
    *,
    paths: int = DEFAULT_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
    progress: Callable[[int, int], None] | None = None,
    method: str = DEFAULT_METHOD,
    precision: "str | float | Precision | None" = None,
    max_paths: int = DEFAULT_MAX_PATHS,
    workers: int = 1,
    allow_long_run: bool = False,
    audit_models: bool = MODEL_AUDIT,
) -> RunResult:
    """Run every check and apply Holm's correction over the run at level ``alpha``.

    Parameters
    ----------
    checks
        From :func:`limitcase.reduce.checks_for`.
    paths
        Paths per check (the first round's, with ``precision``).
    seed, alpha
        The run's seed and family-wise false-alarm rate.
    regression_paths
        Longstaff-Schwartz pilot paths.
    progress
        ``progress(done, total)`` after each check finishes.
    method
        Sampling method, one of :data:`limitcase.sampling.METHODS` (default ``"auto"``, as
        on the command line: control variates with Sobol points or antithetic pairs).
    precision
        A detectable-bias target (``0.01`` or ``"0.5%"``, see :func:`parse_precision`):
        paths are added until each check reaches it or spends ``max_paths``.
    max_paths
        The path budget of each check in a precision run.
    workers
        Processes sharing the work (1: this one). The numbers do not depend on it.
    allow_long_run
        Run even when the run's estimated time is above the refusal limit
        (:mod:`limitcase.sizing`; the caller has sized the run itself, as the command line
        does); otherwise such a run raises :class:`ParamError` before any work, with the
        estimate, and above the warning limit a :class:`RuntimeWarning` gives the estimate.
    audit_models
        First audit the martingale of every distinct model the checks use, on plain paths
        (:mod:`limitcase.modelaudit`): outcomes of kind ``audit`` listed after the checks, in
        the same Holm family; a model that fails fails the run and its checks say so.
    """
    validate_run(paths=paths, seed=seed, alpha=alpha, method=method, max_paths=max_paths, workers=workers,
                 regression_paths=regression_paths)
    prec = parse_precision(precision) if precision is not None else None
    if not allow_long_run:
        from .sizing import enforce, estimate_run

        note = enforce(estimate_run(checks, paths=paths, workers=workers,
                                    max_paths=max_paths if prec is not None else None,
                                    regression_paths=regression_paths), option="allow_long_run=True")
        if note:
            warnings.warn(note, RuntimeWarning, stacklevel=2)
    info: dict = {}
    plans = plan_model_audits(checks) if audit_models else []
    family = sum(1 for c in checks if c.error is None and c.skip is None) + len(plans)
    audits = run_model_audits(plans, seed=seed, alpha=alpha, family=family)
    outcomes = _execute(checks, paths=paths, seed=seed, alpha=alpha, regression_paths=regression_paths,
                        method=method, precision=prec, max_paths=max_paths, workers=workers, progress=progress,
                        family=family if plans else None, info=info)
    extra: dict = {"method": method, "processes": info.get("processes", 1)}
    if prec is not None:
        extra.update(precision=str(prec), max_paths=int(max_paths))
    final = finalise(outcomes + audits, alpha)
    done, audited = final[: len(outcomes)], final[len(outcomes):]
    if any(c.origin is not None for c in checks):
        from .interior import shrink_failures

        done = shrink_failures(checks, done, lambda c: run_check(c, paths=paths, seed=seed, method=method,
                                                                 regression_paths=regression_paths),
                               alpha=alpha, family=sum(1 for o in final if o.p_value is not None
                                                       and o.verdict not in ("error", "skip")))
    if plans:
        done = mark_checks(done, plans, audited)
        extra["model_audits"] = {f"{a.product}/{a.case}": a.note for a in audited}
    return RunResult(done + audited, paths=paths, seed=seed, alpha=alpha, extra=extra)
