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
    DEFAULT_REGRESSION_PATHS,
    PATH_DATES_PER_SECOND,
    RUN_REFUSE_SECONDS,
    RUN_WARN_SECONDS,
)

__all__ = ["RunSize", "estimate_run", "enforce", "format_seconds"]


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

    def describe(self) -> str:
        """One sentence with the estimate, for a warning or a refusal."""
        procs = "1 process" if self.workers == 1 else f"{self.workers} worker processes"
        return (f"{self.checks} check{'s' if self.checks != 1 else ''} at {self.paths:,} paths each are estimated "
                f"at {format_seconds(self.seconds)} on {procs} ({self.work:.3g} path-date units at "
                f"{PATH_DATES_PER_SECOND:.3g} a second per process) and up to {self.peak_bytes / 2**20:,.0f} MiB "
                "of paths held at once per process")


def format_seconds(s: float) -> str:
    """``s`` in the largest unit that keeps it readable (s, min, h, days, years)."""
    for unit, size in (("years", 365.25 * 86400), ("days", 86400), ("h", 3600), ("min", 60)):
        if s >= 2 * size:
            return f"{s / size:,.3g} {unit}"
    return f"{s:.0f} s"


def estimate_run(checks: Sequence[Any], *, paths: int, workers: int = 1, max_paths: int | None = None,
                 regression_paths: int = DEFAULT_REGRESSION_PATHS) -> RunSize:
    """The estimate of running ``checks`` (:class:`limitcase.checks.Check`) at ``paths`` each
    (or, with ``max_paths``, a precision run's budget: the larger of the two).

    A check whose legs cannot be placed (dates that raise, no model) is left out: it will be
    an error of its own, at no cost.
    """
    from .case import case_bytes
    from .legs import grid_of

    n = max(int(paths), int(max_paths or 0))
    work = 0.0
    peak = 0
    sized = 0
    for check in checks:
        if (getattr(check, "error", None) is not None or getattr(check, "skip", None) is not None
                or check.model is None or not check.legs):
            continue
        try:
            dates = len(grid_of(check.legs))
            k = int(check.model.normals_per_step())
            assets = int(check.model.n_assets)
            early = any(len(p.exercise_dates()) for p in check.legs)
        except Exception:  # the check's own error, reported when it runs
            continue
        sized += 1
        per_path = dates * (k + len(check.legs))
        work += float(n) * per_path + (float(regression_paths) * per_path if early else 0.0)
        from .streams import BLOCK

        peak = max(peak, case_bytes(dates, k, assets, max(BLOCK, regression_paths) if early else BLOCK))
    w = max(1, int(workers))
    return RunSize(work=work, seconds=work / PATH_DATES_PER_SECOND / w, peak_bytes=peak, checks=sized, paths=n,
                   workers=w)


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
