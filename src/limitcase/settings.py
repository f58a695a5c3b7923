"""Every default of a run, in one place, and the one validation of run arguments.

The library (:func:`limitcase.suite.run_checks`, :mod:`limitcase.testing`), the command
line (its options and their help texts), the pytest plugin, the dossier and the mutation
runner read their defaults from here, so a library caller and a command-line user get the
same run unless they ask otherwise. :func:`validate_run` checks a run's arguments once,
before any work, and names the argument, the value and what is allowed.
:func:`reproduce_command` builds the command line that reproduces a run or one check.
"""

from __future__ import annotations

import math
import os
import shlex
from typing import Any, Sequence

import numpy as np

from .errors import ParamError
from .streams import BLOCK, coerce_seed

__all__ = [
    "DEFAULT_PATHS",
    "DEFAULT_SEED",
    "DEFAULT_ALPHA",
    "DEFAULT_METHOD",
    "ENGINE_METHOD",
    "DEFAULT_MAX_PATHS",
    "DEFAULT_REGRESSION_PATHS",
    "DEFAULT_BATCH",
    "DEFAULT_WORKERS",
    "DEFAULT_SCHEDULER",
    "MODEL_AUDIT",
    "MODEL_AUDIT_DRIFT",
    "MODEL_AUDIT_MIN_PATHS",
    "MODEL_AUDIT_MAX_PATHS",
    "MIN_COMMAND_PATHS",
    "MIN_REGRESSION_PATHS",
    "MIN_MAX_PATHS",
    "REPORT_PATHS",
    "REPORT_POINTS",
    "REPORT_OUTPUT",
    "MUTATE_QUICK_PATHS",
    "MUTATE_EQUIVALENCE_PATHS",
    "MUTATE_EQUIVALENCE_REGRESSION_PATHS",
    "MUTATE_SHARED_PATHS_BYTES",
    "REPRICE_MODEL",
    "REPRICE_WEIGHTING",
    "REPRICE_STARTS",
    "REPRICE_STEPS_PER_YEAR",
    "REPRICE_LOCALVOL_STEPS_PER_YEAR",
    "REPRICE_TOLERANCE_VOL",
    "METHODS",
    "DEFAULT_INNER_POINTS",
    "INNER_WINDOW",
    "INNER_DRAWS",
    "INNER_PATH_SHARE",
    "INNER_SHRINK_ROUNDS",
    "INNER_SHRINK_BUDGET",
    "INNER_SHRINK_FAILURES",
    "CLT_MIN_PAYING",
    "REFERENCE_ACCURACY",
    "END_CHECKS",
    "END_STEP",
    "END_FAR_FACTOR",
    "END_ALLOWANCE_FACTOR",
    "END_MAX_DATES",
    "SECOND_MODEL",
    "SECOND_MODEL_WARP",
    "SECOND_MODEL_PATH_SHARE",
    "MAX_CASE_BYTES",
    "CASE_WORDS_PER_DATE",
    "RUN_WARN_SECONDS",
    "RUN_REFUSE_SECONDS",
    "PATH_DATES_PER_SECOND",
    "MUTATE_SURVIVOR_SHARE",
    "AUDIT_UNITS_PER_PATH",
    "default_workers",
    "validate_run",
    "reproduce_command",
    "reproduce_check",
]

METHODS = ("auto", "plain", "antithetic", "control", "sobol", "control+antithetic", "control+sobol")
"""Sampling methods accepted by ``--method`` and by ``method=`` of :func:`limitcase.engine.evaluate`
(what each does: :mod:`limitcase.sampling`)."""

DEFAULT_PATHS = 100_000
"""Monte Carlo paths per check (``--paths``; the first round under ``--precision``)."""

DEFAULT_SEED = 20261201
"""Seed of a run (``--seed``); every check draws its own streams from it."""

DEFAULT_ALPHA = 0.01
"""Family-wise false-alarm rate of a run (``--alpha``), held by Holm's correction."""

DEFAULT_METHOD = "auto"
"""Sampling method (``--method``): control variates with Sobol points where they apply and
antithetic pairs otherwise (see :mod:`limitcase.sampling`)."""

ENGINE_METHOD = "plain"
"""Sampling method of the engine's own entry points (:func:`limitcase.engine.evaluate`,
:func:`limitcase.engine.price`, :class:`limitcase.case.Case`) when none is given: plain
pseudo-random paths, the building block the audits and sweeps ask for by name. Runs of
checks (the library's ``run_checks``, the command line, the plugin, ``limitcase.testing``)
use :data:`DEFAULT_METHOD`."""

DEFAULT_MAX_PATHS = 4_000_000
"""Path budget of each check under ``--precision`` (``--max-paths``)."""

DEFAULT_REGRESSION_PATHS = 1 << 16
"""Pilot paths on which Longstaff-Schwartz policies are fitted (``--regression-paths``)."""

DEFAULT_BATCH = BLOCK
"""Paths between progress reports of :func:`limitcase.engine.evaluate`."""

DEFAULT_WORKERS = None
"""Worker processes of a command-line run: ``None`` means every core this process may use
(:func:`default_workers`); the library runs in one process unless told otherwise."""

DEFAULT_SCHEDULER: str | None = None
"""``--scheduler``: no Dask cluster; the work runs on the local process pool."""

MODEL_AUDIT = True
"""Whether a run of checks (:func:`limitcase.suite.run_checks`: the library, the command
line, the plugin, ``limitcase.testing``) first audits the martingale of every model its checks
use, on plain paths (:mod:`limitcase.modelaudit`)."""

MODEL_AUDIT_DRIFT = 0.005
"""The drift error, per year, that the run's model audit detects with 90% power at the
strictest Holm level of the run: a dividend or rate off by half a percent a year. The
audit's path count is sized for it from a pilot's variance (:mod:`limitcase.modelaudit`)."""

MODEL_AUDIT_MIN_PATHS = 2 * BLOCK
"""The fewest paths of a run's model audit (the martingale audit's own minimum)."""

MODEL_AUDIT_MAX_PATHS = 256 * BLOCK
"""The most paths of a run's model audit (about a million): a model so volatile that more
would be needed is audited at this count, and the audit's message gives the drift it can
then detect."""

MIN_COMMAND_PATHS = 100
"""The fewest paths the command line and the pytest plugin accept per check."""

MIN_REGRESSION_PATHS = 1000
"""The fewest Longstaff-Schwartz pilot paths the command line accepts."""

MIN_MAX_PATHS = 100
"""The smallest ``--max-paths`` the command line accepts."""

END_CHECKS = False
"""Whether ``check`` adds the checks of every undeclared parameter end (``--ends``;
:mod:`limitcase.ends`)."""

END_STEP = 1.0 / 256.0
"""Step of the points approaching an end, as a fraction of the distance from the default
(of ``max(|end|, 1)`` when the default sits on the end): small, so the quadratic
extrapolation's ``O(step^3)`` error stays far below the standard error."""

END_ALLOWANCE_FACTOR = 2.0
"""The truncation allowance of a continuity check is this many times the third difference one
step further from the end (:mod:`limitcase.ends`): the two leading terms differ by a factor
``1 + O(step)``, so 2 covers them while the step is small against the price's scale of change."""

END_FAR_FACTOR = 16.0
"""An end at infinity is priced at the default moved this many times ``max(|default|, 1)``
toward it (a far finite value)."""

END_MAX_DATES = 500
"""An end whose product has more dates than this is listed, not priced (a count of 10,000
monitoring dates)."""

SECOND_MODEL = False
"""Whether ``check`` reruns every path-by-path identity under Heston on warped dates
(``--second-model``; :mod:`limitcase.second_model`)."""

SECOND_MODEL_WARP = 1.5
"""Strength ``c`` of the date warp of the second model, ``u -> (1 - exp(-c u)) / (1 - exp(-c))``
on each interval between the legs' maturities: dates crowd toward the interval's start."""

SECOND_MODEL_PATH_SHARE = 0.125
"""Share of the run's paths a second-model case is priced with. Its verdict is a
path-by-path identity: a bug that breaks it on a share ``f`` of the paths goes unseen on
``n`` paths with probability ``(1 - f)^n``, below 1e-5 at the default 100,000 paths (12,500
here) once ``f >= 1e-3``; the statistical part it would add is none (its target is zero)."""

REPORT_PATHS = 16_384
"""Default paths of a report (``report --paths``; a power of two, as Sobol points want):
clear pictures, and the whole catalogue in a minute or two on two cores."""

REPORT_POINTS = 7
"""Finite sweep points before each limit in the dossier (``report --points``; the limit itself
is added)."""

REPORT_OUTPUT = "limitcase-report"
"""Folder the dossier is written to (``report --output``)."""

MUTATE_QUICK_PATHS = 10_000
"""Paths per check in the mutation run's first pass; survivors run again with the full budget."""

MUTATE_EQUIVALENCE_PATHS = 4 * BLOCK
"""Random paths per parameter point on which a mutant is compared with the original."""

MUTATE_EQUIVALENCE_REGRESSION_PATHS = 2 * BLOCK
"""Pilot paths of the Longstaff-Schwartz fits in the equivalence runs (mutant and original
are fitted on the same pilot, so identical exercise values give identical policies)."""

MUTATE_SHARED_PATHS_BYTES = 768 * 2**20
"""Bytes per process of simulated paths (and the original's present values on them) kept
between the comparisons of the mutants of one point (:mod:`limitcase.mutate.shared`): a
product's points at 16,384 paths are a few megabytes each on weekly dates, about 35 MB on
daily dates over a year."""

REPRICE_MODEL = "heston"
"""Model calibrated by ``reprice`` (``--model``)."""

REPRICE_WEIGHTING = "vega"
"""Weighting of the calibration's residuals (``reprice --weighting``)."""

REPRICE_STARTS = 6
"""Starting points of the calibration's local fits (``reprice --starts``)."""

REPRICE_STEPS_PER_YEAR = 32
"""Heston scheme steps per year in the reprice (``reprice --steps-per-year``). The QE
scheme's bias at 16 steps a year was below 0.7 standard errors of 200,000 paths on every
strike of the demo surface (T = 0.3 and 2); 32 halves the step again."""

REPRICE_LOCALVOL_STEPS_PER_YEAR = 256
"""Log-Euler steps per year of the local-volatility reprice (``reprice --model local-vol``
without ``--steps-per-year``). Measured on the demo surface (100,000 paths per expiry): at
32 steps a year 13 of 45 quotes failed the formula test (the short expiry's wings by up to
10 standard errors: the step bias of a steep short-dated skew); at 256 and at 1,024 all 45
passed. The bias halves with the step (weak order 1)."""

REPRICE_TOLERANCE_VOL = 0.5
"""Declared tolerance (implied-volatility points) of a quote without bid-ask (``reprice --tolerance``)."""


DEFAULT_INNER_POINTS = 1
"""Interior parameter points at which every declared reduction and relation also runs
(``check --inner-points``; 0 turns them off): see :mod:`limitcase.interior`."""

INNER_WINDOW = 0.2
"""Half-width of the window an interior point is drawn from, relative to the parameter's
default (a strike of 100 is drawn in about (80, 120), clipped inside the declared range):
far enough from the default to run code the defaults never run (a non-integer number, a
fraction of a period), near enough that the product stays the same kind of contract (a
barrier on the same side of the spot, comparable prices)."""

INNER_DRAWS = 20
"""Draws tried for one interior point before giving up: a draw that breaks the product's
constraints (a lower barrier above the upper one) or makes its declaration unbuildable is
drawn again; after this many the point is reported as a skip, with the last reason."""

INNER_PATH_SHARE = 0.25
"""Share of the run's paths an interior-point check is priced with. The interior points look
for code that is wrong away from special values, where a bug moves the price by a visible
amount (a truncated number of fixings, a strict comparison): a quarter of the paths doubles
the detectable bias, and keeps the default run of the catalogue within its minute on two
cores. Measured on the catalogue (605 interior checks, CPU seconds of a shared two-core
machine, the model audits included): 55 s at half the paths, 42 s at a quarter; the rest is
each check's fixed cost (pilots, grids), which fewer paths do not remove."""

INNER_SHRINK_ROUNDS = 3
"""Rounds of shrinking a failing interior point toward the defaults (each round halves the
distance of each parameter in turn, kept where the check still fails)."""

INNER_SHRINK_BUDGET = 12
"""The most checks re-run to shrink one failing interior point."""

INNER_SHRINK_FAILURES = 8
"""The most failing interior points of one run that are shrunk (the rest report the point as
drawn): a broken product failing everywhere does not cost the run more than this."""

CLT_MIN_PAYING = 1000.0
"""The validity rule of a statistical comparison at an interior point: the smallest
``n q (1 - q) / (1 - 2q)^2`` (``q`` the share of the ``n`` paths on which a leg pays) for the
normal approximation of the mean to be trusted (:func:`limitcase.verdict.normal_approximation`)."""

REFERENCE_ACCURACY = 1e-9
"""The absolute accuracy a reference price is taken to have, relative to the contract's scale
(the larger of ``|reference|`` and the model's initial spot): see
:func:`limitcase.verdict.reference_accuracy`."""

MAX_CASE_BYTES = 2 << 30
"""The most memory one check's simulation may need at once (one block of paths, or the
Longstaff-Schwartz pilot, whichever is larger). A product whose dates would need more is an
error for its checks, named with the estimate, before any allocation (a million dates
would ask for about 30 GiB a block)."""

CASE_WORDS_PER_DATE = 4
"""The estimate behind :data:`MAX_CASE_BYTES`: a simulated path needs, at each date of the
case's grid, ``k + CASE_WORDS_PER_DATE * assets`` doubles (``k`` normals per step; the prices,
the variance increments, the shared uniforms and the payoff's temporaries). Measured with
``tracemalloc`` on one block of 2,000 dates: 4.2 doubles per path-date for a Black-Scholes
case under ``auto`` (k = 1), 10 under Heston (k = 8)."""

RUN_WARN_SECONDS = 3600.0
"""Sizing rule of a run (``check``, ``mutate``, the plugin), applied before any work: its time is
estimated from the path-dates it will simulate (paths x dates of each check's grid x (normals
per step + legs)) at :data:`PATH_DATES_PER_SECOND` per worker. Above this estimate the command
warns with it and goes on."""

RUN_REFUSE_SECONDS = 7 * 86400.0
"""Above this estimated time (a week) the run is refused with the estimate, unless it is
explicitly allowed (``--allow-long-run``). ``--paths 1000000000000`` on the catalogue is
estimated at years."""

PATH_DATES_PER_SECOND = 2.0e7
"""The throughput behind the estimate: path-dates x (normals per step + legs) per second and
per worker process. Measured on the shipped catalogue (402 checks, 2.25e9 units) at 100,000
paths under ``auto`` with one process on a shared two-core machine: 112 s, 2.0e7 a second.
A faster machine finishes sooner than the estimate; the limits are wide enough (an hour, a
week) for that not to matter."""


MUTATE_SURVIVOR_SHARE = 0.02
"""The sizing of a mutation run (:func:`limitcase.sizing.estimate_mutation`) counts this share
of the mutants as survivors of the first pass, run again at the full budget. Measured on the
shipped catalogue at the defaults (2026-12-05): 10 of 1,623 mutants (0.6%); a library whose
checks catch less has more, hence the margin."""

AUDIT_UNITS_PER_PATH = 250.0
"""The sizing of a dossier counts each audited model's engine audits as this many path-date
units (as :data:`PATH_DATES_PER_SECOND` counts them) per audit path. Measured with
``limitcase.audits.audit_model`` at 20,000 paths on the catalogue's scenario models (CPU
seconds x :data:`PATH_DATES_PER_SECOND` / paths): 49-58 for Black-Scholes, 109 with cash
dividends, 122 under local volatility, 180 and 238 for two and three assets."""

def default_workers() -> int:
    """The cores this process may use."""
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _is_int(x: Any) -> bool:
    return isinstance(x, (int, np.integer)) and not isinstance(x, bool)


def validate_run(
    *,
    paths: Any = DEFAULT_PATHS,
    seed: Any = DEFAULT_SEED,
    alpha: Any = DEFAULT_ALPHA,
    method: Any = DEFAULT_METHOD,
    max_paths: Any = DEFAULT_MAX_PATHS,
    workers: Any = 1,
    regression_paths: Any = DEFAULT_REGRESSION_PATHS,
    min_paths: int = 2,
) -> None:
    """Check a run's arguments before any work; raise :class:`ParamError` naming the first
    bad one, its value and what is allowed.

    ``min_paths`` is the fewest paths per check allowed (2 for the library, where a
    standard error needs two paths; :data:`MIN_COMMAND_PATHS` for the command line and the
    pytest plugin).
    """
    coerce_seed(seed)
    if not _is_int(paths) or paths < min_paths:
        raise ParamError(f"paths={paths!r} must be an integer >= {min_paths}")
    if not isinstance(alpha, (int, float, np.floating)) or isinstance(alpha, bool) or not 0.0 < alpha < 1.0:
        raise ParamError(f"alpha={alpha!r} must lie in (0, 1); it is the run's family-wise false-alarm rate")
    if method not in METHODS:
        raise ParamError(f"method={method!r} is not a sampling method; use one of {', '.join(METHODS)}")
    if not _is_int(max_paths) or max_paths < 2:
        raise ParamError(f"max_paths={max_paths!r} must be an integer >= 2 (the path budget of each check)")
    if not _is_int(workers) or workers < 1:
        raise ParamError(f"workers={workers!r} must be an integer >= 1")
    if not _is_int(regression_paths) or regression_paths < 2:
        raise ParamError(f"regression_paths={regression_paths!r} must be an integer >= 2 "
                         "(the Longstaff-Schwartz pilot paths)")


def reproduce_command(
    command: str,
    paths_in: Sequence[str] = (),
    *,
    seed: int | None,
    paths: int | None,
    select: str | None = None,
    method: str | None = None,
    precision: Any = None,
    max_paths: int | None = None,
    model: str | None = None,
    alpha: float | None = None,
    inner_points: int | None = None,
    ends: bool = END_CHECKS,
    second_model: bool = SECOND_MODEL,
) -> str:
    """The command line that reproduces a run (or, with ``select``, one of its checks).

    Options equal to their defaults are left out (``--method auto``, ``--alpha 0.01``);
    ``seed`` and ``paths`` are always written when given (``None`` leaves them out, for a
    renderer that appends them per check). ``max_paths`` is written only with
    ``precision``, where it applies. Arguments are quoted for a POSIX shell (the selection always, in single quotes).
    """
    parts = ["limitcase", command, *(shlex.quote(str(p)) for p in paths_in)]
    if model is not None:
        parts += ["--model", shlex.quote(str(model))]
    if seed is not None:
        parts += ["--seed", str(seed)]
    if paths is not None:
        parts += ["--paths", str(paths)]
    if alpha is not None and not math.isclose(float(alpha), DEFAULT_ALPHA):
        parts += ["--alpha", f"{float(alpha):g}"]
    if method is not None and method != DEFAULT_METHOD:
        parts += ["--method", str(method)]
    if inner_points is not None and int(inner_points) != DEFAULT_INNER_POINTS:
        parts += ["--inner-points", str(int(inner_points))]
    if precision is not None:
        parts += ["--precision", shlex.quote(str(precision))]
        if max_paths is not None:
            parts += ["--max-paths", str(max_paths)]
    if ends != END_CHECKS:
        parts += ["--ends" if ends else "--no-ends"]
    if second_model != SECOND_MODEL:
        parts += ["--second-model" if second_model else "--no-second-model"]
    if select is not None:
        parts += ["--select", "'" + select.replace("'", "'\\''") + "'"]
    return " ".join(parts)


def reproduce_check(run_command: str, *, seed: int, paths: int, select: str) -> str:
    """The run's command (from :func:`reproduce_command` without seed and paths) completed
    to reproduce one check: ``--seed``, ``--paths`` and the quoted ``--select``. The one
    place the per-check line of every renderer is written."""
    return f"{run_command} --seed {seed} --paths {paths} --select '" + select.replace("'", "'\\''") + "'"
