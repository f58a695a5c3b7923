"""The size of a run, estimated before any work, and the rule that warns about or refuses it.

Why. A path count is a number a user types: ``--paths 1000000000000`` was accepted and the
run then grew its memory for hours with no output. Every run of checks is sized first from
what it will simulate, never from a trial run:

- **work** -- for each check, its paths (under ``--precision``, the budget ``--max-paths``:
  the most it may use) times the dates of its grid times (normals per step + legs), plus the
  Longstaff-Schwartz pilot of an early-exercise check;
- **time** -- work divided by :data:`~limitcase.settings.PATH_DATES_PER_SECOND` and by the
  worker processes;
- **memory** -- the largest block (or pilot) any check holds at once, by the rule of
  :func:`limitcase.case.case_bytes` (a check above
  :data:`~limitcase.settings.MAX_CASE_BYTES` is refused on its own, as an error of that check).

The rule (:func:`enforce`): above :data:`~limitcase.settings.RUN_WARN_SECONDS` a warning
with the estimate; above :data:`~limitcase.settings.RUN_REFUSE_SECONDS` a
:class:`~limitcase.errors.ParamError` with the estimate, unless the caller allows a long run
explicitly (``--allow-long-run`` on the command line, ``allow_long_run=True`` in
:func:`limitcase.suite.run_checks`).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Sequence

from .errors import ParamError
from .settings import (
    AUDIT_UNITS_PER_PATH,
    DEFAULT_REGRESSION_PATHS,
    MUTATE_SURVIVOR_SHARE,
    PATH_DATES_PER_SECOND,
    RUN_REFUSE_SECONDS,
    RUN_WARN_SECONDS,
)

__all__ = ["RunSize", "estimate_run", "estimate_mutation", "estimate_dossier", "enforce", "format_seconds"]


@dataclass(frozen=True)
class RunSize:
    """The estimate of a run: ``work`` in path-dates x (normals + legs), ``seconds`` on
    ``workers`` processes, ``peak_bytes`` of the largest block held at once, ``checks`` sized
    and the ``paths`` per check that were assumed."""

    work: float
    seconds: float
    peak_bytes: int
    checks: int
    paths: int
    workers: int
    what: str = ""
    """What the estimate covers, when it is more than checks at one path count (a mutation
    run, a dossier): the sentence then starts with it."""

    def describe(self) -> str:
        """One sentence with the estimate, for a warning or a refusal."""
        procs = "1 process" if self.workers == 1 else f"{self.workers} worker processes"
        subject = self.what or (f"{self.checks} check{'s' if self.checks != 1 else ''} at {self.paths:,} paths "
                                "each are")
        return (f"{subject} estimated "
                f"at {format_seconds(self.seconds)} on {procs} ({self.work:.3g} path-date units at "
                f"{PATH_DATES_PER_SECOND:.3g} a second per process) and up to {self.peak_bytes / 2**20:,.0f} MiB "
                "of paths held at once per process")


def format_seconds(s: float) -> str:
    """``s`` in the largest unit that keeps it readable (s, min, h, days, years)."""
    for unit, size in (("years", 365.25 * 86400), ("days", 86400), ("h", 3600), ("min", 60)):
        if s >= 2 * size:
            return f"{s / size:,.3g} {unit}"
    return f"{s:.0f} s"


def _check_units(check: Any, regression_paths: int) -> tuple[float, float, int] | None:
    """``(units per path, units of the Longstaff-Schwartz pilot, peak bytes)`` of one check,
    or ``None`` when it cannot be placed (an error or skip of its own, at no cost)."""
    from .case import case_bytes
    from .legs import grid_of
    from .streams import BLOCK

    if (getattr(check, "error", None) is not None or getattr(check, "skip", None) is not None
            or check.model is None or not check.legs):
        return None
    try:
        dates = len(grid_of(check.legs))
        k = int(check.model.normals_per_step())
        assets = int(check.model.n_assets)
        early = any(len(p.exercise_dates()) for p in check.legs)
    except Exception:  # the check's own error, reported when it runs
        return None
    per_path = float(dates * (k + len(check.legs)))
    pilot = float(regression_paths) * per_path if early else 0.0
    return per_path, pilot, case_bytes(dates, k, assets, max(BLOCK, regression_paths) if early else BLOCK)


def _checks_work(checks: Sequence[Any], paths: int, regression_paths: int) -> tuple[float, int, int]:
    """``(work, peak bytes, checks sized)`` of running ``checks`` at ``paths`` each."""
    work, peak, sized = 0.0, 0, 0
    for check in checks:
        u = _check_units(check, regression_paths)
        if u is None:
            continue
        sized += 1
        work += float(paths) * u[0] + u[1]
        peak = max(peak, u[2])
    return work, peak, sized


def _size(work: float, peak: int, sized: int, paths: int, workers: int, what: str = "") -> RunSize:
    w = max(1, int(workers))
    return RunSize(work=work, seconds=work / PATH_DATES_PER_SECOND / w, peak_bytes=peak, checks=sized,
                   paths=int(paths), workers=w, what=what)


def estimate_run(checks: Sequence[Any], *, paths: int, workers: int = 1, max_paths: int | None = None,
                 regression_paths: int = DEFAULT_REGRESSION_PATHS) -> RunSize:
    """The estimate of running ``checks`` (:class:`limitcase.checks.Check`) at ``paths`` each
    (or, with ``max_paths``, a precision run's budget: the larger of the two).

    A check whose legs cannot be placed (dates that raise, no model) is left out: it will be
    an error of its own, at no cost.
    """
    n = max(int(paths), int(max_paths or 0))
    work, peak, sized = _checks_work(checks, n, regression_paths)
    return _size(work, peak, sized, n, workers)


def estimate_mutation(per_product: Sequence[tuple[type, Sequence[Any], int]], *, paths: int, quick_paths: int,
                      equivalence_paths: int, workers: int = 1,
                      regression_paths: int = DEFAULT_REGRESSION_PATHS) -> RunSize:
    """The estimate of a mutation run (:func:`limitcase.mutate.run_mutation`).

    ``per_product``: for each product, ``(its class, its checks, its mutant count)``. The
    rule, each term an upper bound but the last (a mutant's checks stop at the first one
    certain to fail; its comparison at the first point where it differs):

    - the unmutated product's checks at ``quick_paths``; at ``paths`` with the weight
      ``min(1, mutants x MUTATE_SURVIVOR_SHARE)`` (an original runs again at the full
      budget only once one of its mutants survives the first pass);
    - per point of the checks (each leg that is the product itself), once: its paths
      simulated on ``equivalence_paths`` and the original priced on them (the leg's dates
      x (normals + 1)); these are shared by the product's mutants
      (:mod:`limitcase.mutate.shared`);
    - per mutant, the comparison with the original at every such point (the mutant priced:
      the leg's dates, once), then its checks at ``quick_paths``;
    - per mutant, a share :data:`~limitcase.settings.MUTATE_SURVIVOR_SHARE` of its checks
      at ``paths`` (the survivors of the first pass run again at the full budget).
    """
    work, peak, sized, mutants = 0.0, 0, 0, 0
    for cls, checks, count in per_product:
        w_quick, p1, n1 = _checks_work(checks, quick_paths, regression_paths)
        w_full, p2, _ = _checks_work(checks, paths, regression_paths)
        eq_once, eq = 0.0, 0.0
        for check in checks:
            u = _check_units(check, regression_paths)
            if u is None:
                continue
            for leg in check.legs:
                if type(leg) is cls:
                    try:
                        dates = float(equivalence_paths) * len(leg.validated_dates())
                        eq_once += dates * (int(check.model.normals_per_step()) + 1)
                        eq += dates
                    except Exception:
                        continue
        full_share = min(1.0, count * MUTATE_SURVIVOR_SHARE)
        work += w_quick + full_share * w_full + eq_once + count * (w_quick + eq + MUTATE_SURVIVOR_SHARE * w_full)
        peak, sized, mutants = max(peak, p1, p2), sized + n1, mutants + int(count)
    what = (f"{mutants:,} mutant{'s' if mutants != 1 else ''} of {len(per_product)} product"
            f"{'s' if len(per_product) != 1 else ''} ({sized} checks of the originals; first pass at "
            f"{quick_paths:,} paths, survivors at {paths:,}) are")
    return _size(work, peak, sized, paths, workers, what)


def estimate_dossier(checks: Sequence[Any], products: Sequence[tuple[Any, Any]], *, paths: int, points: int,
                     audit_paths: int, audited_models: int, workers: int = 1,
                     regression_paths: int = DEFAULT_REGRESSION_PATHS) -> RunSize:
    """The estimate of a dossier (:func:`limitcase.document.build_dossier`).

    ``products``: ``(product, model)`` for each product on a page. The rule:

    - every check at ``paths``, as :func:`estimate_run`;
    - per reduction of a product, its sweep: ``points + 1`` legs priced together on the
      product's dates at ``paths``;
    - per product, its convergence in paths (``paths, paths/2, ...``: about twice one run)
      and, under a model with a time-step parameter, its step sweep (the step halved three
      times: 1 + 2 + 4 + 8 runs' worth);
    - per audited model, :data:`~limitcase.settings.AUDIT_UNITS_PER_PATH` units per audit
      path.
    """
    from .case import case_bytes
    from .streams import BLOCK
    from .sweep import step_parameter

    work, peak, sized = _checks_work(checks, paths, regression_paths)
    for product, model in products:
        try:
            dates = len(product.validated_dates())
            k = int(model.normals_per_step())
            assets = int(model.n_assets)
            early = len(product.exercise_dates()) > 0
        except Exception:  # the page reports it
            continue
        pilot = float(regression_paths) * dates * (k + 1) if early else 0.0
        one = float(paths) * dates * (k + 1) + pilot
        sweeps = len(type(product).reductions) * (float(paths) * dates * (k + points + 1) + pilot)
        steps = 15.0 * one if step_parameter(model) is not None else 0.0
        work += sweeps + 2.0 * one + steps
        peak = max(peak, case_bytes(dates, k, assets, max(BLOCK, regression_paths) if early else BLOCK))
    work += float(audited_models) * float(audit_paths) * AUDIT_UNITS_PER_PATH
    what = (f"the dossier of {len(products)} product{'s' if len(products) != 1 else ''} ({sized} checks, "
            f"sweeps of {points + 1} points and convergence runs at {paths:,} paths, audits of "
            f"{audited_models} model{'s' if audited_models != 1 else ''} at {audit_paths:,}) is")
    return _size(work, peak, sized, paths, workers, what)


def enforce(size: RunSize, *, allow_long_run: bool = False, option: str = "--allow-long-run") -> str | None:
    """Apply the sizing rule: raise :class:`ParamError` above
    :data:`~limitcase.settings.RUN_REFUSE_SECONDS` (unless ``allow_long_run``); return a
    warning sentence above :data:`~limitcase.settings.RUN_WARN_SECONDS`; else ``None``."""
    if size.seconds > RUN_REFUSE_SECONDS and not allow_long_run:
        raise ParamError(
            f"run refused before it started: {size.describe()}, above the limit of "
            f"{format_seconds(RUN_REFUSE_SECONDS)} (limitcase.settings.RUN_REFUSE_SECONDS); give fewer paths, "
            f"or {option} to run it anyway"
        )
    if size.seconds > RUN_WARN_SECONDS:
        return f"warning: a long run: {size.describe()}"
    return None
