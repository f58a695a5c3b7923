"""Running the checks on mutants, over the shared worker pool.

Part of :mod:`limitcase.mutate` (the package docstring describes the method).
"""

from __future__ import annotations

import collections
import math
import time
import warnings
from dataclasses import asdict
from typing import Any, Callable, Sequence

import numpy as np

from ..errors import ParamError
from ..models.base import Model
from ..interior import interior_checks
from ..product import Product
from ..reduce import checks_for
from ..settings import DEFAULT_INNER_POINTS, MUTATE_QUICK_PATHS
from ..suite import DEFAULT_ALPHA, DEFAULT_PATHS, DEFAULT_SEED, run_check
from ..verdict import Outcome, finalise
from ..workers import Lost, open_pool
from .advice import suggest, suggest_hidden
from .equivalence import (
    EQUIVALENCE_PATHS, Equivalence, PointDifference, check_points, equivalence, probe_difference,
)
from .mutants import Discarded, Mutant, make_mutants
from .same_checks import forget_originals, mutant_checks
from .operators import OPERATORS
from .encoding import json_safe
from .scores import MutantResult, MutationReport, ProductScore, family_of, product_scores

__all__ = ["QUICK_PATHS", "mutation_scores", "run_mutation"]

QUICK_PATHS = MUTATE_QUICK_PATHS
"""Paths per check in the first pass; survivors run again with the full budget."""

TIME_LIMIT_FLOOR = 60.0
"""Seconds any one mutant stage may take, at least, under the automatic time limit."""

TIME_LIMIT_FACTOR = 20.0
"""Under the automatic time limit, a mutant stage may take this many times the CPU seconds
the unmutated product's checks took at the same budget (or the floor, if larger): a mutant
is the same product with one slip, so a stage far slower than that is stuck."""

ORIGINAL_TIME_LIMIT = 10 * TIME_LIMIT_FLOOR
"""Seconds an unmutated product's own check run may take under the automatic time limit."""


# --- the work a process does ------------------------------------------------------------

_REGISTRY: dict[str, Any] = {}
"""Set before the pool forks: the products and mutants the workers look up by index (a
dynamically built class cannot be pickled, but a forked worker inherits it)."""


_CHECKS: dict[type, list] = {}
"""The checks of the last product class built in this process: a mutant's task builds them
for its equivalence points and again for its checks (the references they carry are the
costly part); a :class:`~limitcase.checks.Check` is frozen, so one list serves both."""


_USABLE = ("pass", "skip")
"""The original's verdicts under which a case can still judge a mutant: a pass, or a skip
(an interior point's statistical comparison skipped for too few paying paths: its
path-by-path part still runs, and a mutant that fails it is caught)."""


def _checks_of(cls: type[Product]) -> list:
    """The checks a mutant (or its original) is judged by, built once per class in this
    process: the declared ones, then the same declarations at the run's interior points
    (:mod:`limitcase.interior`; a mutant keeps its original's class name, so it is drawn
    the same points)."""
    found = _CHECKS.get(cls)
    if found is None:
        mutant = _mutant_of(cls)
        found = _build_checks(cls) if mutant is None else mutant_checks(mutant, _build_checks)
        _CHECKS.clear()
        _CHECKS[cls] = found
    return found


def _build_checks(cls: type[Product]) -> list:
    model = _REGISTRY.get("model")
    s = _REGISTRY.get("settings") or {}
    found = checks_for(cls, model)
    points = int(s.get("inner_points", DEFAULT_INNER_POINTS))
    if points > 0:
        broken = sorted({c.case for c in found if c.error is not None})
        found = found + interior_checks(cls, model, seed=s["seed"], points=points, skip_cases=broken)
    return found


def _mutant_of(cls: type[Product]) -> Mutant | None:
    """The run's mutant whose class is ``cls`` (``None`` for an original)."""
    index = _REGISTRY.get("mutant_of")
    if index is None:
        index = _REGISTRY["mutant_of"] = {m.cls: m for m in _REGISTRY.get("mutants", ())}
    return index.get(cls)


def _run_each(cls: type[Product], paths: int, s: dict, order: Sequence[int] | None = None,
              baseline: Sequence[str] | None = None
              ) -> tuple[list[Outcome | None], list[float], str, int | None]:
    """Run a product's checks one by one (``order``: cheapest first, when known), each on its
    own streams, so the numbers are those of a run of all of them together.

    Returns ``(raw outcomes before Holm, CPU seconds per check, crash message, stopped)``.
    With ``baseline`` (the original's verdicts), the run stops at the first check the
    original passes that is certain to fail under Holm over the product's ``M`` checks,
    whatever the others give: a broken path-by-path identity, or ``p < alpha / M`` (Holm
    rejects every p-value below ``alpha / m``, and ``m <= M``). ``stopped`` is its index."""
    raw: list[Outcome | None] = []
    seconds: list[float] = []
    try:
        with np.errstate(all="ignore"), warnings.catch_warnings():
            warnings.simplefilter("ignore")
            checks = _checks_of(cls)
            raw = [None] * len(checks)
            seconds = [0.0] * len(checks)
            limit = s["alpha"] / max(1, len(checks))
            for j in (range(len(checks)) if order is None else order):
                t0 = time.process_time()
                o = run_check(checks[j], paths=paths, seed=s["seed"], method=s["method"], alpha=s["alpha"],
                              stop_at_broken_identity=baseline is not None)
                seconds[j] = time.process_time() - t0
                raw[j] = o
                if (baseline is not None and j < len(baseline) and baseline[j] in _USABLE and o.verdict != "error"
                        and (o.pathwise_ok is False or (o.p_value is not None and o.p_value < limit))):
                    return raw, seconds, "", j
        return raw, seconds, "", None
    except Exception as exc:  # the mutant broke the check machinery itself: a visible failure
        return raw, seconds, f"the check run raised {type(exc).__name__}: {exc}", None


def _judge(cls: type[Product], paths: int, s: dict, baseline: Sequence[str], order: Sequence[int] | None
           ) -> tuple[str, list[str], str]:
    """``(status, cases, message)`` of a mutant's checks at ``paths``, as
    ``limitcase check`` would judge the product (Holm over its checks), stopping at the
    first check certain to fail."""
    raw, _, crash, stopped = _run_each(cls, paths, s, order, baseline)
    if stopped is not None:
        o = raw[stopped]
        assert o is not None
        m = len(raw)
        why = ("path-by-path identity broken" if o.pathwise_ok is False
               else f"p={o.p_value:.3g} < alpha/{m}: it fails under Holm over the product's {m} checks "
                    "whatever the others give")
        message = f"{o.case}: {o.message + '; ' if o.message else ''}{why}"
        return "caught", [o.case], message[:600]
    if crash:
        return "error", [], crash
    return _detection(finalise([o for o in raw if o is not None], s["alpha"]), "", baseline)


def _detection(outcomes: list[Outcome], crash: str, baseline: Sequence[str]) -> tuple[str, list[str], str]:
    """``(status, cases, message)`` of a mutant's run against the original's verdicts
    (``baseline``: the original's verdict per check, in the same order)."""
    if crash:
        return "error", [], crash
    failed, errored, msgs = [], [], []
    for i, o in enumerate(outcomes):
        if i < len(baseline) and baseline[i] not in _USABLE:
            continue  # the original does not pass this case: it cannot detect anything
        if o.verdict == "fail":
            failed.append(o.case)
            msgs.append(f"{o.case}: {o.message}")
        elif o.verdict == "error":
            errored.append(o.case)
            msgs.append(f"{o.case}: {o.message}")
    if failed:
        return "caught", failed, "; ".join(msgs)[:600]
    if errored:
        return "error", errored, "; ".join(msgs)[:600]
    return "survived", [], ""


def _task_original(index: int, paths: int) -> tuple[int, int, list[Outcome], float, list[float]]:
    """The unmutated product's checks at ``paths``: outcomes after Holm over its checks, CPU
    seconds in all and per check (the cost order its mutants' checks then run in)."""
    s = _REGISTRY["settings"]
    cls = _REGISTRY["products"][index]
    t0 = time.process_time()
    raw, seconds, crash, _ = _run_each(cls, paths, s)
    if crash:
        outcomes = [Outcome(product=cls.__name__, case="(run)", kind="run", verdict="error", message=crash)]
    else:
        outcomes = finalise([o for o in raw if o is not None], s["alpha"])
    return index, paths, outcomes, time.process_time() - t0, seconds


def _safe_equivalence(mutant: Mutant, paths: int, seed: int, stop_early: bool) -> Equivalence:
    try:
        model = _REGISTRY.get("model")
        points = check_points(mutant.cls, _checks_of(mutant.cls), model)
        return equivalence(mutant.cls, mutant.original, paths=paths, seed=seed, stop_early=stop_early,
                           model=model, points=points,
                           site=(mutant.file, mutant.mutation.line, mutant.mutation.col),
                           variant=(mutant.mutation.function, mutant.mutation.source))
    except Exception as exc:  # the comparison itself broke on the mutant: it is not equivalent
        return Equivalence(False, (PointDifference("(comparison)", note=f"{type(exc).__name__}: {exc}"),))


def _task_mutant(mid: int, stage: str, baseline: Sequence[str], order: Sequence[int] | None = None) -> dict:
    """One mutant's stage: ``"first"`` (equivalence test, stopping at the first difference,
    then the checks with the quick budget) or ``"full"`` (the checks with the full budget,
    then, for a survivor, the complete comparison at every point for the suggestion).
    The result carries the CPU seconds spent comparing (``cpu_equivalence``) and checking
    (``cpu_checks``). ``order``: the checks' order, cheapest first (by the original's CPU
    seconds); the checks stop at the first one certain to fail under Holm."""
    s = _REGISTRY["settings"]
    mutant: Mutant = _REGISTRY["mutants"][mid]
    out: dict[str, Any] = {"mid": mid, "stage": stage, "cpu_equivalence": 0.0, "cpu_checks": 0.0}
    t0 = time.process_time()
    if stage == "first":
        eq = _safe_equivalence(mutant, s["equivalence_paths"], s["seed"], stop_early=True)
        out["equivalence"] = eq
        if eq.equivalent:
            try:
                off = probe_difference(mutant.cls, mutant.original, paths=s["equivalence_paths"], seed=s["seed"],
                                       model=_REGISTRY.get("model"),
                                       site=(mutant.file, mutant.mutation.line, mutant.mutation.col),
                           variant=(mutant.mutation.function, mutant.mutation.source))
            except Exception as exc:
                off = PointDifference("(probe)", note=f"{type(exc).__name__}: {exc}")
            out.update(status="equivalent", paths=0, cases=[], message="", probe=off,
                       cpu_equivalence=time.process_time() - t0)
            return out
        paths = s["quick_paths"]
    else:
        paths = s["paths"]
    t1 = time.process_time()
    out["cpu_equivalence"] = t1 - t0
    status, cases, message = _judge(mutant.cls, paths, s, baseline, order)
    out.update(status=status, paths=paths, cases=cases, message=message)
    t2 = time.process_time()
    out["cpu_checks"] = t2 - t1
    if status == "survived" and (stage == "full" or s["paths"] <= s["quick_paths"]):
        out["equivalence"] = _safe_equivalence(mutant, s["equivalence_paths"], s["seed"], stop_early=False)
        out["cpu_equivalence"] += time.process_time() - t2
    return out


def run_mutation(
    products: Sequence[type[Product]],
    *,
    paths: int = DEFAULT_PATHS,
    quick_paths: int = QUICK_PATHS,
    equivalence_paths: int = EQUIVALENCE_PATHS,
    seed: int = DEFAULT_SEED,
    alpha: float = DEFAULT_ALPHA,
    workers: int | None = None,
    operators: Sequence[str] | None = None,
    method: str = "auto",
    progress: Callable[[int, int], None] | None = None,
    time_limit: float | None = None,
    model: Model | None = None,
    allow_long_run: bool = False,
    warn: Callable[[str], None] | None = None,
    inner_points: int = DEFAULT_INNER_POINTS,
) -> MutationReport:
    """Mutate each product's payoff code, run its checks on every mutant, and score.

    Parameters
    ----------
    products
        Product classes (``limitcase.loader.load_products``).
    paths
        Paths per check for the survivors of the first pass (and their original's own run,
        made once a first mutant of that product survives the first pass).
    quick_paths
        Paths per check in the first pass, and of every original's run (the first pass's
        baseline).
    equivalence_paths
        Simulated paths per parameter point in the equivalence test.
    seed, alpha
        The run's seed and family-wise false-alarm rate (per product, Holm), as for
        ``limitcase check``: mutant and original share every random stream.
    workers
        Worker processes (default: the cores this process may use); 1 runs in this process.
    operators
        Operator names to apply (default: all of :data:`OPERATORS`).
    method
        Sampling method of the checks, as ``limitcase check --method`` (default ``"auto"``,
        the same as ``check``); the equivalence comparison always uses plain paths.
    progress
        Called with ``(done, total)`` as tasks finish.
    time_limit
        Seconds one mutant stage (its first pass, or its full-budget run) may take; a
        mutant past it is stopped, its worker replaced, and it is reported as
        ``"timeout"``. ``None`` (default): :data:`TIME_LIMIT_FACTOR` times the CPU seconds
        of the unmutated product's checks at that budget, at least
        :data:`TIME_LIMIT_FLOOR`; ``math.inf``: no limit.
    model
        Run every product's and every mutant's checks, and the equivalence comparison, under
        this model instead of each product's scenario (``mutate --model``); the caller leaves
        out products whose asset count differs (:func:`limitcase.plan.model_fits`).
    allow_long_run
        Run even when the estimated time is above the refusal limit. The run is sized once
        the mutants are made, before anything is priced
        (:func:`limitcase.sizing.estimate_mutation`): above
        :data:`~limitcase.settings.RUN_REFUSE_SECONDS` it raises :class:`ParamError` with
        the estimate unless allowed; above :data:`~limitcase.settings.RUN_WARN_SECONDS` the
        estimate goes to ``warn`` (default: a :class:`RuntimeWarning`).
    warn
        Receives the warning sentence of a long run (the command line prints it).

    Returns
    -------
    MutationReport

    Notes
    -----
    A mutant is judged as ``limitcase check`` judges a product run on its own: Holm's
    correction over that product's checks, at ``alpha``. The unmutated products are judged
    as ``limitcase check`` judges the whole run: Holm over every check of every product
    (``false_alarms``), each at the largest budget it ran at (``quick_paths``, or ``paths``
    for the products listed in ``settings["originals_at_full_budget"]``; the catalogue at
    the full budget is what ``limitcase check`` runs, and running it again here was the
    largest single cost of a mutation run); a case an original fails at its own
    per-product level cannot detect that product's mutants and is listed in
    ``settings["excluded_cases"]``.
    """
    for name, value, low in (("paths", paths, 2), ("quick_paths", quick_paths, 2),
                             ("equivalence_paths", equivalence_paths, 2)):
        if not isinstance(value, (int, np.integer)) or value < low:
            raise ParamError(f"{name}={value!r} must be an integer >= {low}; pass a path count such as 10000")
    if quick_paths > paths:
        raise ParamError(f"quick_paths={quick_paths!r} is above paths={paths!r}; the first pass must be the "
                         "cheaper one (lower quick_paths or raise paths)")
    if workers is None:
        from ..suite import default_workers

        workers = default_workers()
    if not isinstance(workers, int) or workers < 1:
        raise ParamError(f"workers={workers!r} must be an integer >= 1")
    if time_limit is not None and not (isinstance(time_limit, (int, float)) and time_limit > 0):
        raise ParamError(f"time_limit={time_limit!r} must be a positive number of seconds (math.inf: no limit)")
    start = time.monotonic()
    cpu0 = time.process_time()
    mutants: list[Mutant] = []
    discarded: list[Discarded] = []
    for cls in products:
        ms, ds = make_mutants(cls, operators)
        mutants.extend(ms)
        discarded.extend(ds)
    product_list = list(products)
    from ..sampling import METHODS

    if method not in METHODS:
        raise ParamError(f"method={method!r} is not a sampling method; choose from {', '.join(METHODS)}")
    settings = dict(paths=int(paths), quick_paths=int(quick_paths), equivalence_paths=int(equivalence_paths),
                    seed=int(seed), alpha=float(alpha), workers=workers, method=method,
                    operators=list(OPERATORS) if operators is None else list(operators),
                    model=None if model is None else model.label(), inner_points=int(inner_points))
    from ..sizing import enforce, estimate_mutation

    counts = collections.Counter(m.original for m in mutants)

    def sized(cls: type[Product]) -> list:
        try:
            return checks_for(cls, model)
        except Exception:  # reported by the product's own run, as before; it costs nothing here
            return []

    size = estimate_mutation([(cls, sized(cls), counts[cls]) for cls in product_list], paths=paths,
                             quick_paths=quick_paths, equivalence_paths=equivalence_paths, workers=workers)
    note = enforce(size, allow_long_run=allow_long_run,
                   option="--allow-long-run (allow_long_run=True)")
    if note:
        if warn is None:
            warnings.warn(note, RuntimeWarning, stacklevel=2)
        else:
            warn(note)
    settings["estimated_seconds"] = round(size.seconds, 1)
    _REGISTRY.clear()
    _CHECKS.clear()
    forget_originals()
    _REGISTRY.update(products=product_list, mutants=mutants, settings=settings, model=model)
    index_of = {cls: i for i, cls in enumerate(product_list)}
    budgets = tuple(dict.fromkeys((quick_paths, paths)))
    by_product: dict[int, list[int]] = collections.defaultdict(list)
    for k, m in enumerate(mutants):
        by_product[index_of[m.original]].append(k)
    total = [len(product_list) + len(mutants)]
    done = [0]
    baselines: dict[tuple[int, int], list[Outcome]] = {}
    cpu = {"making_mutants": time.process_time() - cpu0, "originals": 0.0, "equivalence": 0.0,
           "checks_first_pass": 0.0, "checks_full_budget": 0.0}
    first: dict[int, dict] = {}
    final: dict[int, dict] = {}
    waiting: dict[int, list[int]] = collections.defaultdict(list)  # survivors waiting for a full baseline

    def verdicts(i: int, budget: int) -> list[str]:
        return [o.verdict for o in baselines[(i, budget)]]

    original_seconds: dict[tuple[int, int], float] = {}
    check_seconds: dict[tuple[int, int], list[float]] = {}

    def order(i: int, budget: int) -> list[int] | None:
        """Product ``i``'s checks, cheapest first at ``budget`` (as the original's took)."""
        cost = check_seconds.get((i, budget))
        return None if not cost else sorted(range(len(cost)), key=lambda j: cost[j])

    def limit(i: int, budget: int) -> float | None:
        """The time limit of a mutant stage of product ``i`` at ``budget`` paths."""
        if time_limit is not None:
            return None if math.isinf(time_limit) else float(time_limit)
        return max(TIME_LIMIT_FLOOR, TIME_LIMIT_FACTOR * original_seconds.get((i, budget), 0.0))

    def first_stage(k: int, i: int) -> tuple[Callable, tuple, float | None]:
        return _task_mutant, (k, "first", verdicts(i, quick_paths), order(i, quick_paths)), limit(i, quick_paths)

    def full_stage(k: int) -> tuple[Callable, tuple, float | None]:
        i = index_of[mutants[k].original]
        return _task_mutant, (k, "full", verdicts(i, paths), order(i, paths)), limit(i, paths)

    original_limit = None if time_limit is not None and math.isinf(time_limit) else (
        float(time_limit) if time_limit is not None else ORIGINAL_TIME_LIMIT)
    full_asked: set[int] = set()  # products whose original runs at the full budget

    def on_done(res: Any) -> list[tuple]:
        done[0] += 1
        new: list[tuple] = []
        if isinstance(res, tuple):  # an original's run
            i, budget, outcomes, seconds, per_check = res
            baselines[(i, budget)] = outcomes
            original_seconds[(i, budget)] = seconds
            check_seconds[(i, budget)] = per_check
            cpu["originals"] += seconds
            if budget == quick_paths:
                new += [first_stage(k, i) for k in by_product[i]]
            if budget == paths:
                new += [full_stage(k) for k in waiting.pop(i, [])]
        elif res["stage"] == "first":
            k = res["mid"]
            first[k] = res
            cpu["equivalence"] += res["cpu_equivalence"]
            cpu["checks_first_pass"] += res["cpu_checks"]
            if res["status"] == "survived" and paths > quick_paths:
                total[0] += 1
                i = index_of[mutants[k].original]
                if (i, paths) in baselines:
                    new.append(full_stage(k))
                else:
                    waiting[i].append(k)
                    if i not in full_asked:  # its original at the full budget, once, when first needed
                        full_asked.add(i)
                        total[0] += 1
                        new.append((_task_original, (i, paths), original_limit))
        else:
            final[res["mid"]] = res
            cpu["equivalence"] += res["cpu_equivalence"]
            cpu["checks_full_budget"] += res["cpu_checks"]
        if progress is not None:
            progress(done[0], total[0])
        return new

    def on_lost(lost: Lost) -> list[tuple]:
        """A task past its time limit, or whose worker died: a visible failure, recorded
        as the task's result so the run goes on."""
        if lost.fn is _task_original:
            i, budget = lost.args
            name = product_list[i].__name__
            outcome = Outcome(product=name, case="(run)", kind="run", verdict="error",
                              message=f"the unmutated product's checks at {budget} paths: {lost.detail}")
            return on_done((i, budget, [outcome], lost.seconds, []))
        k, stage = lost.args[:2]
        status = "timeout" if lost.reason == "timeout" else "error"
        return on_done({"mid": k, "stage": stage, "status": status, "cases": [], "message": lost.detail,
                        "paths": quick_paths if stage == "first" else paths,
                        "cpu_equivalence": 0.0, "cpu_checks": 0.0})

    # the originals' first-pass runs go first: each one releases its product's mutants; an
    # original runs at the full budget only once one of its mutants survives the first pass
    # (the survivors' baseline): the whole catalogue at the full budget is `limitcase check`
    initial = [(_task_original, (i, quick_paths), original_limit) for i in range(len(product_list))]
    pool = open_pool(min(workers, max(1, len(mutants) + len(product_list))), tasks_hint=len(initial) + len(mutants),
                     inherit=((__name__, "_REGISTRY"),))
    settings["processes"] = pool.workers
    settings["time_limit"] = "auto" if time_limit is None else float(time_limit)
    try:
        pool.run(initial, on_done, on_lost)
    finally:
        pool.close()
        _REGISTRY.clear()
        _CHECKS.clear()
        forget_originals()

    results: list[MutantResult] = []
    for k, m in enumerate(mutants):
        r = final.get(k, first[k])
        eq: Equivalence | None = r.get("equivalence", first[k].get("equivalence"))
        status = r["status"]
        suggestion = ""
        off: PointDifference | None = first[k].get("probe")
        if status == "survived":
            suggestion = suggest(m, eq, checks_for(m.original, model))
        elif status == "equivalent" and off is not None and off.differs:
            suggestion = suggest_hidden(m, off)
        mu = m.mutation
        results.append(MutantResult(
            id=m.id, product=m.original.__name__, module=m.original.__module__, family=family_of(m.original),
            operator=mu.operator, description=mu.description, function=mu.function, location=m.location,
            line=mu.line, diff=mu.diff, status=status, paths=r["paths"], detected_by=tuple(r["cases"]),
            message=r["message"], suggestion=suggestion,
            edge_only=bool(eq is not None and eq.edge_only and status == "survived"),
            params_involved=mu.params_involved, equivalence=eq.to_dict() if eq is not None else None,
            off_checks=json_safe(asdict(off)) if off is not None else None,
        ))
    originals: dict[str, list[dict]] = {}
    judged = {i: (paths if (i, paths) in baselines else quick_paths) for i in range(len(product_list))}
    run_wide = finalise([o for i in range(len(product_list)) for o in baselines[(i, judged[i])]], alpha)
    budget_of = {product_list[i].__name__: judged[i] for i in judged}
    false_alarms: list[dict] = []
    for o in run_wide:
        if o.verdict not in _USABLE:
            cls = next(c for c in product_list if c.__name__ == o.product)
            false_alarms.append({"product": o.product, "family": family_of(cls), "case": o.case,
                                 "verdict": o.verdict, "message": o.message, "paths": budget_of[o.product]})
    excluded = []
    for cls, i in index_of.items():
        originals[cls.__name__] = [o.to_dict() for o in baselines[(i, judged[i])]]
        for budget in budgets:
            for o in baselines.get((i, budget), ()):
                if o.verdict not in _USABLE:
                    excluded.append({"product": cls.__name__, "case": o.case, "paths": budget,
                                     "verdict": o.verdict, "message": o.message})
    settings["excluded_cases"] = excluded
    settings["originals_at_full_budget"] = sorted(product_list[i].__name__ for i in judged if judged[i] == paths)
    settings["cpu_seconds"] = {k: round(v, 2) for k, v in cpu.items()}
    return MutationReport(
        results=results, discarded=discarded, originals=originals, false_alarms=false_alarms, settings=settings,
        runtime=time.monotonic() - start,
        products=[(c.__name__, c.__module__, family_of(c)) for c in product_list],
    )


def mutation_scores(products: Sequence[type[Product]], **kwargs: Any) -> dict[str, ProductScore]:
    """Run the mutation analysis on ``products`` (keywords as :func:`run_mutation`) and
    return each product's score, by product name."""
    return product_scores(run_mutation(products, **kwargs))
