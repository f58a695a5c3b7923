"""Computing the dossier: the checks of every product (Holm over the whole run, exactly as
``limitcase check`` with the same settings), a sweep toward each declared limit, convergence
in the number of paths and, for a model with time steps, in the step, the symbolic
cross-check of a stated formula and the engine audits of each scenario model. The result is
a :class:`~limitcase.document.records.Dossier` of plain records; ``limitcase.report.dossier``
renders it.
"""

from __future__ import annotations

import json
import warnings
import re
import time
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Callable, Iterator, Sequence

from ..errors import InputError
from ..product import Product
from ..reduce import Check, checks_for
from ..settings import DEFAULT_PATHS, DEFAULT_REGRESSION_PATHS, REPORT_PATHS
from ..suite import run_checks
from ..sweep import DEFAULT_POINTS, convergence, run_sweep, step_sweep
from ..verdict import Outcome
from .describe import describe_product
from .records import (
    ConvergenceSeries, Dossier, FormulaRecord, LimitRecord, MutationScore, MutationSummary, Point, ProductPage,
    RecognitionRecord, StepSeries, SweepSeries,
)

__all__ = ["REPORT_PATHS", "build_dossier", "load_mutations", "parallel_map"]

def load_mutations(path: str | Path, threshold: float | None = None) -> MutationSummary:
    """Read a ``limitcase mutate --json`` file for the dossier (a mutation run takes
    minutes; the dossier shows the last one rather than rerunning it). ``threshold`` is the
    score a product must reach (``None``: scores are shown, not judged)."""
    from ..mutate import scores_from_json

    scores = scores_from_json(path)
    doc = json.loads(Path(path).read_text(encoding="utf-8"))
    survivors: dict[str, list[dict[str, Any]]] = {}
    for m in doc.get("mutants", []):
        if m.get("status") == "survived":
            survivors.setdefault(m.get("product", ""), []).append(m)
    plain = {name: MutationScore(sc.caught, sc.error, sc.survived, sc.equivalent, sc.score, bool(sc.false_alarm))
             for name, sc in scores.items()}
    return MutationSummary(str(path), plain, survivors, threshold)


def _slug(name: str, taken: set[str]) -> str:
    base = re.sub(r"[^A-Za-z0-9_.-]+", "-", name) or "product"
    slug, k = base, 2
    while slug.lower() in taken or slug.lower() == "index":
        slug, k = f"{base}-{k}", k + 1
    taken.add(slug.lower())
    return slug


def _points(estimates: Sequence[Any]) -> tuple[Point, ...]:
    return tuple(Point(float(e.value), float(e.stderr), int(e.paths)) for e in estimates)


def _sweep_record(product: Product, red: Any, *, paths: int, seed: int, points: int,
                  regression_paths: int, model: Any = None) -> SweepSeries:
    sw = run_sweep(product, red, model, paths=paths, seed=seed, points=points, regression_paths=regression_paths)
    plan = sw.plan
    spec = type(product).param_specs().get(plan.param)
    return SweepSeries(
        product=plan.product, case=plan.case, param=plan.param, points=tuple(dict(p) for p in plan.points),
        estimates=_points(sw.estimates), target=sw.target, shared_paths=sw.shared_paths,
        discrete=bool(spec is not None and spec.integer), error=sw.error, info=sw.info,
    )


def _formula_record(product: Product, seed: int) -> FormulaRecord:
    from .. import symbolic

    cross = symbolic.cross_check(product, seed=seed)
    shown, note = symbolic.compact_instance(product)
    try:
        expr = shown.formula()
        latex, text = symbolic.to_latex(expr), symbolic.to_text(expr)
    except Exception as exc:  # pragma: no cover - formula() already ran once
        latex, text = "", f"(formula could not be shown: {exc})"
    return FormulaRecord(latex, text, note, cross.status, cross.message)


def _recognition_record(product: Product, red: Any) -> RecognitionRecord:
    from .. import symbolic

    rec = symbolic.recognise(product, red)

    def both(expr: Any) -> tuple[str | None, str | None]:
        return (None, None) if expr is None else (symbolic.to_latex(expr), symbolic.to_text(expr))

    ll, lt = both(rec.limit_formula)
    bl, bt = both(rec.base_formula)
    return RecognitionRecord(rec.status, rec.message, rec.base, ll, lt, bl, bt)


def _audit_outcomes(models: dict[str, Any], paths: int, seed: int, alpha: float, workers: int = 1,
                    tick: Callable[[], None] = lambda: None) -> tuple[dict[str, list[Outcome]], str]:
    """The engine audits of each distinct scenario model, Holm over all their outcomes
    (one family of its own, as ``limitcase.audits.run_audits`` forms it); keyed by the
    model's label. Empty, with a note, when the audits module is not there."""
    try:
        from .. import audits as audit_module  # noqa: F401
    except ImportError:
        return {}, "the audits module is not installed; no engine audits were run"
    from ..verdict import finalise

    per: dict[str, list[Outcome]] = {}
    flat: list[Outcome] = []
    jobs = [(model, paths, seed, alpha) for model in models.values()]
    for label, outs in zip(models, _spread(_audit_task, jobs, workers)):
        per[label] = outs
        flat.extend(outs)
        tick()
    final = iter(finalise(flat, alpha))
    per = {label: [next(final) for _ in outs] for label, outs in per.items()}
    n = len(flat)
    return per, (f"engine audits of the scenario models ({paths:,} paths each), Holm over their {n} "
                 f"outcomes at {alpha:g}, a family of its own")


@dataclass
class _Work:
    """What one product's page needs besides its checks' outcomes (computed in a worker)."""

    formula: FormulaRecord | None = None
    limits: list[LimitRecord] = field(default_factory=list)
    convergence: ConvergenceSeries | None = None
    steps: StepSeries | None = None
    errors: list[str] = field(default_factory=list)


def _page_work(product: Product, paths: int, seed: int, points: int, regression_paths: int,
               model: Any = None) -> _Work:
    """A product's formula and its cross-check, a sweep toward each limit with the symbolic
    recognition, its convergence in paths and in the time step."""
    cls = type(product)
    work = _Work()
    try:
        has_formula = product.formula() is not None
    except Exception as exc:
        work.errors.append(f"{cls.__name__}.formula() raised {type(exc).__name__}: {exc}")
        has_formula = False
    if has_formula:
        work.formula = _formula_record(product, seed)
    for red in cls.reductions:
        lim = LimitRecord(red.name, red.note, None)
        lim.sweep = _sweep_record(product, red, paths=paths, seed=seed, points=points,
                                  regression_paths=regression_paths, model=model)
        if has_formula:
            lim.recognition = _recognition_record(product, red)
        work.limits.append(lim)
    conv = convergence(product, model, paths=paths, seed=seed, regression_paths=regression_paths)
    work.convergence = ConvergenceSeries(conv.product.label(), _points(conv.estimates), conv.error)
    if conv.error:
        work.errors.append(f"convergence run: {conv.error}")
    st = step_sweep(product, model, paths=paths, seed=seed, regression_paths=regression_paths)
    if st is not None:
        work.steps = StepSeries(st.product.label(), st.param, tuple(int(v) for v in st.values),
                                _points(st.estimates), st.error)
        if st.error:
            work.errors.append(f"time-step run: {st.error}")
    return work


# Work spread over worker processes. The jobs reach the workers by fork (a registry they
# inherit), not by pickling: a user's product classes need not be importable by name.
_JOBS: dict[int, Sequence[Any]] = {}


def _page_task(args: tuple[int, int]) -> _Work:
    job, k = args
    return _page_work(*_JOBS[job][k])


def _audit_task(args: tuple[int, int]) -> list[Outcome]:
    from .. import audits as audit_module

    job, k = args
    model, paths, seed, alpha = _JOBS[job][k]
    return audit_module.audit_model(model, paths=paths, seed=seed, alpha=alpha)


def _open_pool(workers: int, tasks: int) -> Any:
    """The package's one pool of worker processes (:mod:`limitcase.workers`, with its
    one-process fallback), or ``None`` (run here) where that module is not part of the
    package: the one place to change when the pool moves."""
    try:
        from ..workers import open_pool  # type: ignore[import-not-found]
    except ImportError:
        return None
    return open_pool(workers, tasks)


def parallel_map(fn: Callable[[Any], Any], items: Sequence[Any], workers: int) -> Iterator[Any]:
    """``fn`` of each item, in order, on up to ``workers`` processes (``fn`` and the items
    are pickled): how a command spreads the drawing of a dossier's pictures."""
    items = list(items)
    pool = _open_pool(workers, len(items))
    if pool is None:
        yield from map(fn, items)
        return
    try:
        yield from pool.map(fn, items)
    finally:
        pool.close()


def _spread(task: Callable[[tuple[int, int]], Any], jobs: Sequence[Any], workers: int) -> Iterator[Any]:
    """``task`` of each job, in order, on up to ``workers`` processes; each result as soon as
    it and those before it are in. The jobs are registered before the pool forks."""
    key = id(jobs)
    _JOBS[key] = jobs
    try:
        yield from parallel_map(task, [(key, k) for k in range(len(jobs))], workers)
    finally:
        _JOBS.pop(key, None)


def build_dossier(
    products: Sequence[type[Product]],
    *,
    paths: int = REPORT_PATHS,
    seed: int,
    alpha: float,
    points: int = DEFAULT_POINTS,
    regression_paths: int = DEFAULT_REGRESSION_PATHS,
    selects: Sequence[str] = (),
    sources: Sequence[str] = (),
    audits: bool = True,
    audit_paths: int | None = None,
    method: str = "auto",
    workers: int = 1,
    progress: Callable[[int, int], None] | None = None,
    model: Any = None,
    allow_long_run: bool = False,
    warn: Callable[[str], None] | None = None,
) -> Dossier:
    """Compute everything the dossier of ``products`` shows.

    The checks of every product are run together (:func:`limitcase.suite.run_checks`, Holm
    over the run, sampling ``method`` as ``limitcase check --method``, default ``auto``):
    with the same ``paths``, ``seed``, ``alpha`` and method their verdicts are those of
    ``limitcase check``. Sweeps and convergence runs use plain Monte Carlo (each point's
    standard error is then the textbook ``sigma / sqrt(n)`` one). ``selects`` keeps the
    products whose name contains one of the strings (all when empty). ``progress(done,
    total)`` is called as checks, sweeps, convergence runs and audits finish. ``model``:
    every product under that model instead of its scenario (``report --model``); a product
    whose asset count differs is listed with the reason and not run.

    The dossier is sized once its checks are built, before anything is priced
    (:func:`limitcase.sizing.estimate_dossier`): above
    :data:`~limitcase.settings.RUN_REFUSE_SECONDS` it raises
    :class:`~limitcase.errors.ParamError` with the estimate unless ``allow_long_run``;
    above :data:`~limitcase.settings.RUN_WARN_SECONDS` the estimate goes to ``warn``
    (default: a :class:`RuntimeWarning`).
    """
    started = time.monotonic()
    chosen = [c for c in products if not selects or any(s in c.__name__ for s in selects)]
    if not chosen:
        raise InputError(f"no product matches --select {', '.join(selects)!r}; products: "
                         + ", ".join(c.__name__ for c in products))
    taken: set[str] = set()
    pages: list[ProductPage] = []
    instances: list[Product | None] = []
    all_checks: list[Check] = []
    spans: list[tuple[int, int]] = []
    for cls in chosen:
        desc = describe_product(cls)
        if model is not None and desc.error is None:
            desc.scenario = f"{model.label()} (report --model; the product's own scenario: {desc.scenario})"
        page = ProductPage(name=cls.__name__, slug=_slug(cls.__name__, taken), description=desc)
        product: Product | None = None
        checks: list[Check] = []
        misfit = None
        if desc.error is None and model is not None:
            from ..plan import model_fits
            try:
                misfit = model_fits(cls(), model)
            except Exception:
                misfit = None
        if desc.error is not None:
            page.errors.append(f"{cls.__name__} {desc.error}")
        elif misfit is not None:
            page.errors.append(f"{cls.__name__} skipped under the model: {misfit}")
        else:
            try:
                product = cls()
                checks = checks_for(product, model)
            except Exception as exc:  # a reduction or relation whose declaration code raises
                page.errors.append(f"{cls.__name__} cannot be built at its defaults: {type(exc).__name__}: {exc}")
                product, checks = None, []
        spans.append((len(all_checks), len(all_checks) + len(checks)))
        all_checks.extend(checks)
        instances.append(product)
        pages.append(page)

    built = [p for p in instances if p is not None]
    models: dict[str, Any] = {}
    if audits:
        for p in built:
            m = p.scenario() if model is None else model
            models.setdefault(m.label(), m)
    from ..sizing import enforce, estimate_dossier

    size = estimate_dossier(all_checks, [(p, p.scenario() if model is None else model) for p in built], paths=paths,
                            points=points, audit_paths=audit_paths or DEFAULT_PATHS, audited_models=len(models),
                            workers=workers, regression_paths=regression_paths)
    note = enforce(size, allow_long_run=allow_long_run, option="--allow-long-run (allow_long_run=True)")
    if note:
        if warn is None:
            warnings.warn(note, RuntimeWarning, stacklevel=2)
        else:
            warn(note)
    total = len(all_checks) + sum(len(type(p).reductions) + 2 for p in built) + len(models)
    done = [0]

    def report(n: int) -> None:
        done[0] = n
        if progress is not None:
            progress(min(n, total), total)

    result = run_checks(all_checks, paths=paths, seed=seed, alpha=alpha, regression_paths=regression_paths,
                        progress=lambda i, n: report(i), method=method, workers=workers,
                        audit_models=False, allow_long_run=True)  # sized above; the dossier audits its models itself, a family of their own
    report(len(all_checks))

    jobs = [(p, paths, seed, points, regression_paths, model) for p in built]
    placed = [(page, span) for page, product, span in zip(pages, instances, spans) if product is not None]
    for (page, (a, b)), work in zip(placed, _spread(_page_task, jobs, workers)):
        outs = result.outcomes[a:b]
        by_case = {o.case: o for o in outs if o.kind == "reduction"}
        page.relations = [o for o in outs if o.kind == "relation"]
        page.other = [o for o in outs if o.kind not in ("relation", "reduction")]
        page.formula, page.convergence, page.steps = work.formula, work.convergence, work.steps
        for lim in work.limits:
            lim.outcome = by_case.get(lim.name)
        page.limits = work.limits
        page.errors.extend(work.errors)
        report(done[0] + len(work.limits) + 2)

    audit_note = ""
    per: dict[str, list[Outcome]] = {}
    if audits:
        per, audit_note = _audit_outcomes(models, audit_paths or DEFAULT_PATHS, seed, alpha, workers,
                                          tick=lambda: report(done[0] + 1))
        for page, p in zip(pages, instances):
            if p is not None:
                page.audits = per.get((p.scenario() if model is None else model).label(), [])
    settings = {
        "paths": paths, "seed": seed, "alpha": alpha, "points": points, "method": method,
        "regression_paths": regression_paths, "sources": list(sources),
        "model": None if model is None else model.label(),
        "seconds": round(time.monotonic() - started, 1),
    }
    result.extra.update(
        points=points,
        formula_checks={p.name: p.formula.status for p in pages if p.formula is not None},
        audits={label: {o.case: o.verdict for o in outs} for label, outs in per.items()},
    )
    return Dossier(pages, result, settings, audit_note, per)
