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
from .sampling import METHODS
from .streams import BLOCK, coerce_seed

__all__ = [
    "DEFAULT_PATHS",
    "DEFAULT_SEED",
    "DEFAULT_ALPHA",
    "DEFAULT_METHOD",
    "DEFAULT_MAX_PATHS",
    "DEFAULT_REGRESSION_PATHS",
    "DEFAULT_BATCH",
    "DEFAULT_WORKERS",
    "MIN_COMMAND_PATHS",
    "MIN_REGRESSION_PATHS",
    "MIN_MAX_PATHS",
    "REPORT_PATHS",
    "REPORT_POINTS",
    "REPORT_OUTPUT",
    "METHODS",
    "default_workers",
    "validate_run",
    "reproduce_command",
]

DEFAULT_PATHS = 100_000
"""Monte Carlo paths per check (``--paths``; the first round under ``--precision``)."""

DEFAULT_SEED = 20261201
"""Seed of a run (``--seed``); every check draws its own streams from it."""

DEFAULT_ALPHA = 0.01
"""Family-wise false-alarm rate of a run (``--alpha``), held by Holm's correction."""

DEFAULT_METHOD = "auto"
"""Sampling method (``--method``): control variates with Sobol points where they apply and
antithetic pairs otherwise (see :mod:`limitcase.sampling`)."""

DEFAULT_MAX_PATHS = 4_000_000
"""Path budget of each check under ``--precision`` (``--max-paths``)."""

DEFAULT_REGRESSION_PATHS = 1 << 16
"""Pilot paths on which Longstaff-Schwartz policies are fitted (``--regression-paths``)."""

DEFAULT_BATCH = BLOCK
"""Paths between progress reports of :func:`limitcase.engine.evaluate`."""

DEFAULT_WORKERS = None
"""Worker processes of a command-line run: ``None`` means every core this process may use
(:func:`default_workers`); the library runs in one process unless told otherwise."""

MIN_COMMAND_PATHS = 100
"""The fewest paths the command line and the pytest plugin accept per check."""

MIN_REGRESSION_PATHS = 1000
"""The fewest Longstaff-Schwartz pilot paths the command line accepts."""

MIN_MAX_PATHS = 100
"""The smallest ``--max-paths`` the command line accepts."""

REPORT_PATHS = 16_384
"""Paths per point of the dossier's sweeps and per check of its run (``report --paths``)."""

REPORT_POINTS = 7
"""Points of each sweep toward a limit in the dossier (``report --points``)."""

REPORT_OUTPUT = "limitcase-report"
"""Folder the dossier is written to (``report --output``)."""


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
    if precision is not None:
        parts += ["--precision", shlex.quote(str(precision))]
        if max_paths is not None:
            parts += ["--max-paths", str(max_paths)]
    if select is not None:
        parts += ["--select", "'" + select.replace("'", "'\\''") + "'"]
    return " ".join(parts)
